// main.cpp — the tessera program: parses arguments, runs one subcommand, and turns any
// error into one line on stderr and a non-zero exit.
#include <algorithm>
#include <cstdio>
#include <exception>
#include <map>

#include <CLI/CLI.hpp>

#include "audio/error.h"
#include "cli/command.h"

int main(int argc, char** argv) {
  using namespace tessera::cli;
  CLI::App app{"tessera: speech to discrete codes and back, on the CPU"};
  app.set_version_flag("--version", std::string("tessera ") + TESSERA_VERSION);
  app.require_subcommand(1);
  std::map<CLI::App*, Run> runs;
  auto add = [&](Run (*reg)(CLI::App&)) {
    const auto before = app.get_subcommands({});
    Run r = reg(app);
    for (CLI::App* sub : app.get_subcommands({}))
      if (std::find(before.begin(), before.end(), sub) == before.end()) runs[sub] = std::move(r);
  };
  add(register_resynth);
  add(register_train);
  add(register_inspect);
  add(register_encode);
  add(register_decode);
  add(register_ladder);
  add(register_evaluate);
  add(register_report);
  add(register_bench);

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    // Help and version exit 0; every usage error exits 2 (CLI11's own codes are ≥ 100)
    // with one "error: ..." line like every other error, and a pointer to the help.
    if (e.get_exit_code() == 0) return app.exit(e);
    std::fprintf(stderr, "error: %s\nrun 'tessera --help' or 'tessera COMMAND --help' for usage\n", e.what());
    return 2;
  }
  try {
    for (auto& [sub, run] : runs)
      if (sub->parsed()) return run();
  } catch (const tessera::Error& e) {
    std::fprintf(stderr, "error: %s\n", e.what());
    return 1;
  } catch (const std::bad_alloc&) {
    std::fprintf(stderr, "error: out of memory\n");
    return 1;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "error: %s\n", e.what());
    return 1;
  }
  return 1;
}
