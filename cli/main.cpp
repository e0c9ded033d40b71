// spar: train small GANs on a CPU. This file only wires subcommands to their handlers and
// maps errors to exit codes: 0 success, 1 the work failed, 2 bad usage or bad input.
// Errors print one line on stderr: "spar: <what>: <why>".
#include <CLI/CLI.hpp>
#include <iostream>
#include <vector>

#include "cli/commands.h"
#include "engine/error.h"

namespace {

int exit_code_for(spar::ErrorKind kind) {
  switch (kind) {
    case spar::ErrorKind::kNumericalFailure:
    case spar::ErrorKind::kIo:
      return 1;  // the work failed
    default:
      return 2;  // the input was bad
  }
}

}  // namespace

int main(int argc, char** argv) {
  CLI::App app{"spar: train small generative adversarial networks on a CPU"};
  app.require_subcommand(1);
  app.set_version_flag("--version", "spar 0.1.0");
  std::vector<spar::cli::Subcommand> subcommands = spar::cli::add_training_commands(app);
  for (const spar::cli::Subcommand& s : spar::cli::add_run_commands(app)) subcommands.push_back(s);
  subcommands.push_back(spar::cli::add_check_gradients(app));
  subcommands.push_back(spar::cli::add_bench(app));
  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    const int code = app.exit(e);
    return code == 0 ? 0 : 2;
  }
  try {
    for (const spar::cli::Subcommand& s : subcommands)
      if (s.parser->parsed()) return s.run();
  } catch (const spar::Error& e) {
    std::cerr << "spar: " << e.what() << '\n';
    return exit_code_for(e.kind());
  } catch (const std::exception& e) {
    std::cerr << "spar: " << e.what() << '\n';
    return 1;
  }
  return 2;
}
