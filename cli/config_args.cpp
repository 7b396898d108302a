// config_args.cpp — the --config / --set options shared by subcommands.
#include "cli/command.h"

namespace tessera::cli {

void ConfigArgs::add_to(CLI::App& cmd) {
  cmd.add_option("--config", config, "YAML experiment file (default: built-in settings)")
      ->check(CLI::ExistingFile);
  cmd.add_option("--set", overrides, "override one setting, e.g. --set audio.n_fft=512 (repeatable)")
      ->take_all();
}

}  // namespace tessera::cli
