// thread_pool.cpp — fork-join over a fixed set of std::thread workers.
#include "quant/thread_pool.h"

#include "audio/error.h"

namespace tessera::quant {

ThreadPool::ThreadPool(int threads) {
  if (threads < 1) throw Error("threads: expected at least 1, got " + std::to_string(threads));
  workers_.reserve(threads - 1);
  for (int lane = 1; lane < threads; ++lane) workers_.emplace_back([this, lane] { worker(lane); });
}

ThreadPool::~ThreadPool() {
  {
    std::lock_guard<std::mutex> lock(mu_);
    stop_ = true;
  }
  start_cv_.notify_all();
  for (std::thread& t : workers_) t.join();
}

void ThreadPool::worker(int lane) {
  unsigned long seen = 0;
  for (;;) {
    const FunctionRef<void(int)>* task;
    {
      std::unique_lock<std::mutex> lock(mu_);
      start_cv_.wait(lock, [&] { return stop_ || generation_ != seen; });
      if (stop_) return;
      seen = generation_;
      task = task_;
    }
    std::exception_ptr err;
    try {
      (*task)(lane);
    } catch (...) {
      err = std::current_exception();
    }
    std::lock_guard<std::mutex> lock(mu_);
    if (err && !error_) error_ = err;
    if (--pending_ == 0) done_cv_.notify_one();
  }
}

void ThreadPool::run(FunctionRef<void(int)> fn) {
  if (workers_.empty()) {
    fn(0);
    return;
  }
  {
    std::lock_guard<std::mutex> lock(mu_);
    task_ = &fn;
    pending_ = int(workers_.size());
    error_ = nullptr;
    ++generation_;
  }
  start_cv_.notify_all();
  std::exception_ptr err;
  try {
    fn(0);
  } catch (...) {
    err = std::current_exception();
  }
  std::unique_lock<std::mutex> lock(mu_);
  done_cv_.wait(lock, [&] { return pending_ == 0; });
  task_ = nullptr;
  if (!err) err = error_;
  if (err) std::rethrow_exception(err);
}

void ThreadPool::parallel_for(std::size_t n, FunctionRef<void(std::size_t, std::size_t)> fn) {
  const std::size_t lanes = std::size_t(size());
  run([&](int lane) {
    const std::size_t b = n * std::size_t(lane) / lanes, e = n * std::size_t(lane + 1) / lanes;
    if (b < e) fn(b, e);
  });
}

}  // namespace tessera::quant
