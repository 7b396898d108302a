// file_workers.h — batch work over many files on every core: each worker owns its own
// model (a Tokenizer keeps scratch buffers and is not thread-safe), items are taken in
// order, and results are handed back in input order so manifests and tables do not depend
// on thread timing.
#pragma once
#include <cstddef>
#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "quant/tokenizer.h"

namespace tessera::cli {

// How to spend `threads` (0 = all cores) on `items` files: several one-thread workers when
// there are enough files to keep them busy, else one worker using every thread.
struct WorkerPlan {
  int workers = 1;
  int threads_per_worker = 1;
};
WorkerPlan plan_workers(int threads, std::size_t items);

// plan.workers models of `path` with plan.threads_per_worker threads each; `first` (already
// loaded, e.g. to read the model id) is kept as worker 0 when its thread count fits.
std::vector<std::unique_ptr<quant::Tokenizer>> load_worker_models(const std::string& path, const WorkerPlan& plan,
                                                                  std::unique_ptr<quant::Tokenizer> first);

// Calls work(i, w) for every i in [0, n) on `workers` threads (w = worker index), then
// commit(i) for i = 0, 1, 2, ... in order, under a lock, as soon as item i and all before
// it are done. The first exception (from work or commit) stops the taking of new items and
// is rethrown here after the workers have finished their current item.
void run_file_workers(std::size_t n, int workers, const std::function<void(std::size_t, int)>& work,
                      const std::function<void(std::size_t)>& commit);

}  // namespace tessera::cli
