// child.h — runs one piece of a benchmark in its own process, so that its peak memory
// (ru_maxrss from wait4) is its own and one piece's allocations cannot slow the next.
#pragma once
#include <functional>
#include <string>
#include <vector>

namespace tessera::bench {

struct ChildResult {
  std::string output;    // what the child wrote (its stdout for a program)
  double peak_mb = 0;    // ru_maxrss of the child, MiB (includes the parent's pages it inherited)
  int exit_code = 0;     // 0 on success; 128 + signal when killed
};

// Forks; the child runs fn and sends back the string it returns (an exception's message
// becomes a non-zero exit and Error in the parent). The calling process must have no other
// threads (fork copies only the caller). Throws tessera::Error when the child fails.
ChildResult run_in_child(const std::function<std::string()>& fn);

// Runs a program (argv[0] is searched on PATH) with `env` ("NAME=value") added to the
// environment, capturing its stdout and stderr together in `output`. Does not throw on a
// non-zero exit: check exit_code.
ChildResult run_program(const std::vector<std::string>& argv, const std::vector<std::string>& env = {});

}  // namespace tessera::bench
