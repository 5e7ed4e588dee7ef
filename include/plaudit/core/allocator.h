#pragma once
// Process-wide allocator setting for plaudit's executables (the CLI and the benchmark); the
// library itself never calls it, so programs embedding it keep their own policy.
//
// The gradient pass allocates and frees matrices of a block of rows (a 1024 x 512 double block is
// 4 MiB) many times per snapshot. glibc serves such sizes with mmap or returns them to the system
// on free, and every reuse then faults its pages in again: measured on a tanh of one such block,
// 12 ns an element with the default policy against 5 ns with freed memory kept
// (bench/, DEVELOPERS.md "Performance"). Keeping freed memory for reuse removes that cost.
namespace plaudit {

// Serve blocks below 32 MiB from the heap and keep up to 1 GiB of freed heap for reuse
// (mallopt M_MMAP_THRESHOLD and M_TRIM_THRESHOLD). Does nothing on other C libraries.
void KeepFreedMemoryForReuse();

}  // namespace plaudit
