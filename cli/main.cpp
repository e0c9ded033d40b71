// spar: train small GANs on a CPU. This file only wires subcommands to their handlers and
// maps errors to exit codes: 0 success, 1 the work failed, 2 bad usage or bad input (130 and
// 143: training stopped by SIGINT or SIGTERM, cli/train.cpp). Errors print one line on stderr:
// "spar: <what>: <why>"; a bad command line names the subcommand, "spar train: <what>: <why>".
// CLI11 only parses: every message about the command line is written here or in cli/output.cpp.
#include <unistd.h>

#include <CLI/CLI.hpp>
#include <cstdlib>
#include <iostream>
#include <new>
#include <vector>

#include "cli/arguments.h"
#include "cli/commands.h"
#include "cli/output.h"
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

// OpenMP threads that wait at the end of a parallel kernel spin for a long time by default.
// When another process holds one of the cores, the spinning thread keeps the descheduled one
// from running and every kernel waits a scheduler slice: on 2 shared cores a training run
// measured 8 times slower. A short spin (2,000 rounds, then sleep) costs about 5% on idle
// cores and removes that (docs/threading.md). GNU OpenMP reads the setting when the program
// loads, before main, so the command sets it and starts itself again, once; a value the user
// set (GOMP_SPINCOUNT or OMP_WAIT_POLICY) is left alone.
void use_short_openmp_spin(char** argv) {
#ifdef _OPENMP
  if (std::getenv("GOMP_SPINCOUNT") || std::getenv("OMP_WAIT_POLICY")) return;
  setenv("GOMP_SPINCOUNT", "2000", 0);
  execv("/proc/self/exe", argv);  // returns only on failure: then run on as we are
#else
  (void)argv;
#endif
}

}  // namespace

int main(int argc, char** argv) {
  use_short_openmp_spin(argv);
  CLI::App app{"spar: train small generative adversarial networks on a CPU", "spar"};
  app.require_subcommand(1);
  app.set_version_flag("--version", "spar 0.1.0");
  app.option_defaults()->disable_flag_override();  // "--force=3" is refused, not read as true
  std::vector<spar::cli::Subcommand> subcommands = spar::cli::add_training_commands(app);
  for (const spar::cli::Subcommand& s : spar::cli::add_run_commands(app)) subcommands.push_back(s);
  subcommands.push_back(spar::cli::add_export(app));
  subcommands.push_back(spar::cli::add_check_gradients(app));
  subcommands.push_back(spar::cli::add_bench(app));
  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    if (e.get_exit_code() == 0) return app.exit(e);  // --help, --version
    return spar::cli::refuse_arguments(app, spar::cli::argument_problem(app, &e, ""));
  } catch (const spar::cli::ArgumentError& e) {
    return spar::cli::refuse_arguments(app, spar::cli::argument_problem(app, nullptr, e.what()));
  }
  const std::string problem = spar::cli::argument_problem(app, nullptr, "");
  if (!problem.empty()) return spar::cli::refuse_arguments(app, problem);
  try {
    for (const spar::cli::Subcommand& s : subcommands)
      if (s.parser->parsed()) return s.run();
  } catch (const spar::Error& e) {
    std::cerr << "spar: " << e.what() << '\n';
    return exit_code_for(e.kind());
  } catch (const std::bad_alloc&) {
    std::cerr << "spar: out of memory (the data, the batch or the networks are too large for "
                 "this machine)\n";
    return 1;
  } catch (const std::exception& e) {
    std::cerr << "spar: " << e.what() << '\n';
    return 1;
  }
  return 2;
}
