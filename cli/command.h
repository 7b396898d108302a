// command.h — how subcommands plug into the tessera program.
// Each cli/<name>.cpp defines one `register_<name>(CLI::App&)` that adds its subcommand
// and returns the function to run once the arguments are parsed.
#pragma once
#include <functional>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>

namespace tessera::cli {

using Run = std::function<int()>;

Run register_resynth(CLI::App& app);
Run register_train(CLI::App& app);
Run register_inspect(CLI::App& app);
Run register_encode(CLI::App& app);
Run register_decode(CLI::App& app);
Run register_ladder(CLI::App& app);
Run register_evaluate(CLI::App& app);
Run register_report(CLI::App& app);
Run register_bench(CLI::App& app);

// Settings shared by every command that reads an experiment file.
struct ConfigArgs {
  std::string config;                 // --config FILE ("" = built-in defaults)
  std::vector<std::string> overrides; // --set section.key=value, in order
  void add_to(CLI::App& cmd);
};

}  // namespace tessera::cli
