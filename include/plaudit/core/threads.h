#pragma once
// Thread counts as options give them: 0 means every hardware thread.
namespace plaudit {

// `requested` when it is positive, else the hardware thread count (at least 1).
int ThreadsFor(int requested);

}  // namespace plaudit
