// file_workers.cpp — ordered parallel map over files.
#include "cli/file_workers.h"

#include <algorithm>
#include <atomic>
#include <exception>
#include <mutex>
#include <thread>
#include <vector>

#include "quant/checkpoint.h"

namespace tessera::cli {

WorkerPlan plan_workers(int threads, std::size_t items) {
  const int t = quant::resolve_threads(threads);
  // Two files per worker at least, or the last long file leaves the other cores idle.
  if (t > 1 && items >= std::size_t(2 * t)) return {t, 1};
  return {1, t};
}

std::vector<std::unique_ptr<quant::Tokenizer>> load_worker_models(const std::string& path, const WorkerPlan& plan,
                                                                  std::unique_ptr<quant::Tokenizer> first) {
  std::vector<std::unique_ptr<quant::Tokenizer>> models;
  if (first && first->pool().size() == plan.threads_per_worker) models.push_back(std::move(first));
  while (int(models.size()) < std::max(1, plan.workers)) models.push_back(quant::load_model(path, plan.threads_per_worker));
  return models;
}

void run_file_workers(std::size_t n, int workers, const std::function<void(std::size_t, int)>& work,
                      const std::function<void(std::size_t)>& commit) {
  std::atomic<std::size_t> next{0};
  std::atomic<bool> stop{false};
  std::mutex mu;
  std::vector<char> ready(n, 0);
  std::size_t committed = 0;
  std::exception_ptr error;
  auto fail = [&](std::exception_ptr e) {
    if (!error) error = e;
    stop = true;
  };
  auto body = [&](int w) {
    for (;;) {
      if (stop) return;
      const std::size_t i = next++;
      if (i >= n) return;
      try {
        work(i, w);
      } catch (...) {
        std::lock_guard<std::mutex> lock(mu);
        fail(std::current_exception());
        return;
      }
      std::lock_guard<std::mutex> lock(mu);
      ready[i] = 1;
      try {
        while (!stop && committed < n && ready[committed]) commit(committed++);
      } catch (...) {
        fail(std::current_exception());
        return;
      }
    }
  };
  workers = std::max(1, std::min<int>(workers, int(std::max<std::size_t>(n, 1))));
  if (workers == 1) {
    body(0);
  } else {
    std::vector<std::thread> pool;
    for (int w = 0; w < workers; ++w) pool.emplace_back(body, w);
    for (auto& t : pool) t.join();
  }
  if (error) std::rethrow_exception(error);
}

}  // namespace tessera::cli
