// file_workers.h — batch work over many files on every core: each worker owns its own
// model (a Tokenizer keeps scratch buffers and is not thread-safe), items are taken in
// order, and results are handed back in input order so manifests and tables do not depend
// on thread timing.
#pragma once
#include <cstddef>
#include <functional>

namespace tessera::cli {

// How to spend `threads` (0 = all cores) on `items` files: several one-thread workers when
// there are enough files to keep them busy, else one worker using every thread.
struct WorkerPlan {
  int workers = 1;
  int threads_per_worker = 1;
};
WorkerPlan plan_workers(int threads, std::size_t items);

// Calls work(i, w) for every i in [0, n) on `workers` threads (w = worker index), then
// commit(i) for i = 0, 1, 2, ... in order, under a lock, as soon as item i and all before
// it are done. The first exception (from work or commit) stops the taking of new items and
// is rethrown here after the workers have finished their current item.
void run_file_workers(std::size_t n, int workers, const std::function<void(std::size_t, int)>& work,
                      const std::function<void(std::size_t)>& commit);

}  // namespace tessera::cli
