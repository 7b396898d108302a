// thread_pool.h — a fixed set of worker threads for fork-join parallel sections.
// Lane i always runs task i, so work split by lane is deterministic for a given size().
#pragma once
#include <condition_variable>
#include <cstddef>
#include <exception>
#include <mutex>
#include <thread>
#include <vector>

#include "quant/function_ref.h"

namespace tessera::quant {

class ThreadPool {
 public:
  // threads ≥ 1 lanes; lane 0 is the calling thread, so threads − 1 workers start.
  // Throws tessera::Error if threads < 1.
  explicit ThreadPool(int threads = 1);
  ~ThreadPool();
  ThreadPool(const ThreadPool&) = delete;
  ThreadPool& operator=(const ThreadPool&) = delete;

  int size() const { return int(workers_.size()) + 1; }

  // Runs fn(lane) for every lane 0..size()−1 and returns when all are done; the first
  // exception thrown by a lane is rethrown here. Allocates nothing (FunctionRef). Not
  // reentrant (no run() inside fn).
  // Usage: pool.run([&](int lane) { work(lane); });
  void run(FunctionRef<void(int)> fn);

  // Splits [0, n) into size() contiguous chunks (fixed by n and size()) and runs
  // fn(begin, end) for each on its own lane.
  void parallel_for(std::size_t n, FunctionRef<void(std::size_t, std::size_t)> fn);

 private:
  void worker(int lane);

  std::vector<std::thread> workers_;
  std::mutex mu_;
  std::condition_variable start_cv_, done_cv_;
  const FunctionRef<void(int)>* task_ = nullptr;
  unsigned long generation_ = 0;
  int pending_ = 0;
  bool stop_ = false;
  std::exception_ptr error_;
};

}  // namespace tessera::quant
