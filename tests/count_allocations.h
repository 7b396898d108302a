// count_allocations.h — counts the heap allocations of the whole test program while
// `tessera::testing::counting_allocations` is set, by interposing the C allocation
// functions (operator new, Eigen, std::vector and the aligned allocators all end in one
// of them) and forwarding to glibc's own. Include it in one translation unit of a test
// program; it defines TESSERA_COUNTS_ALLOCATIONS only on glibc without a sanitizer (the
// sanitizers interpose these functions themselves).
#pragma once
#include <atomic>
#include <cerrno>
#include <cstddef>

#if defined(__has_feature)
#if __has_feature(address_sanitizer) || __has_feature(thread_sanitizer) || __has_feature(memory_sanitizer)
#define TESSERA_UNDER_SANITIZER 1
#endif
#endif
#if defined(__SANITIZE_ADDRESS__) || defined(__SANITIZE_THREAD__)
#define TESSERA_UNDER_SANITIZER 1
#endif

#if defined(__GLIBC__) && !defined(TESSERA_UNDER_SANITIZER)
#define TESSERA_COUNTS_ALLOCATIONS 1
extern "C" void* __libc_malloc(std::size_t);
extern "C" void* __libc_calloc(std::size_t, std::size_t);
extern "C" void* __libc_realloc(void*, std::size_t);
extern "C" void* __libc_memalign(std::size_t, std::size_t);

namespace tessera::testing {
inline std::atomic<bool> counting_allocations{false};
inline std::atomic<long> allocations{0};

inline void count_allocation() {
  if (counting_allocations.load(std::memory_order_relaxed)) allocations.fetch_add(1, std::memory_order_relaxed);
}

// Allocations made by fn().
template <class Fn>
long allocations_of(Fn&& fn) {
  allocations = 0;
  counting_allocations = true;
  fn();
  counting_allocations = false;
  return allocations.load();
}
}  // namespace tessera::testing

extern "C" {
void* malloc(std::size_t n) noexcept {
  tessera::testing::count_allocation();
  return __libc_malloc(n);
}
void* calloc(std::size_t count, std::size_t n) noexcept {
  tessera::testing::count_allocation();
  return __libc_calloc(count, n);
}
void* realloc(void* p, std::size_t n) noexcept {
  tessera::testing::count_allocation();
  return __libc_realloc(p, n);
}
void* aligned_alloc(std::size_t alignment, std::size_t n) noexcept {
  tessera::testing::count_allocation();
  return __libc_memalign(alignment, n);
}
void* memalign(std::size_t alignment, std::size_t n) noexcept {
  tessera::testing::count_allocation();
  return __libc_memalign(alignment, n);
}
int posix_memalign(void** out, std::size_t alignment, std::size_t n) noexcept {
  tessera::testing::count_allocation();
  // POSIX: a power of two and a multiple of sizeof(void*), else EINVAL.
  if (alignment % sizeof(void*) != 0 || (alignment & (alignment - 1)) != 0) return EINVAL;
  void* p = __libc_memalign(alignment, n);
  if (!p && n != 0) return ENOMEM;
  *out = p;
  return 0;
}
}
#endif
