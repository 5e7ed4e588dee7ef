#include "plaudit/core/allocator.h"

#if defined(__GLIBC__)
#include <malloc.h>
#endif

namespace plaudit {

void KeepFreedMemoryForReuse() {
#if defined(__GLIBC__)
  // 32 MiB is glibc's largest mmap threshold on 64-bit systems (DEFAULT_MMAP_THRESHOLD_MAX).
  mallopt(M_MMAP_THRESHOLD, 32 * 1024 * 1024);
  mallopt(M_TRIM_THRESHOLD, 1024 * 1024 * 1024);
#endif
}

}  // namespace plaudit
