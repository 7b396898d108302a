// count_allocations.h — counts the heap allocations of the whole test program while
// `tessera::testing::counting_allocations` is set, by interposing malloc (operator new,
// Eigen and std::vector all end there) and forwarding to glibc's own. Include it in one
// test program only, and only where TESSERA_COUNTS_ALLOCATIONS is defined (glibc, no
// sanitizer: the sanitizers interpose malloc themselves).
#pragma once
#include <atomic>
#include <cstddef>

#if defined(__GLIBC__) && !defined(__SANITIZE_ADDRESS__) && !defined(__SANITIZE_THREAD__)
#define TESSERA_COUNTS_ALLOCATIONS 1
extern "C" void* __libc_malloc(std::size_t);

namespace tessera::testing {
inline std::atomic<bool> counting_allocations{false};
inline std::atomic<long> allocations{0};

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

extern "C" void* malloc(std::size_t n) {
  if (tessera::testing::counting_allocations.load(std::memory_order_relaxed))
    tessera::testing::allocations.fetch_add(1, std::memory_order_relaxed);
  return __libc_malloc(n);
}
#endif
