// `spar bench` in a spar built without its benchmarks (SPAR_BUILD_BENCHMARKS=OFF): the
// subcommand exists, so that asking for it gives a reason, not "unknown subcommand".
#include <CLI/CLI.hpp>
#include <iostream>

#include "cli/commands.h"

namespace spar {
namespace cli {

Subcommand add_bench(CLI::App& parent) {
  CLI::App* app = parent.add_subcommand(
      "bench",
      "Not in this spar: it was built without its benchmarks (SPAR_BUILD_BENCHMARKS=OFF).");
  app->allow_extras();
  return {app, [] {
            std::cerr << "spar: bench: this spar was built without its benchmarks; rebuild with "
                         "-DSPAR_BUILD_BENCHMARKS=ON\n";
            return 2;
          }};
}

}  // namespace cli
}  // namespace spar
