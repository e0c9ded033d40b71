// The subcommands of `spar`. Each add_* registers a subcommand with its options and help
// (with an example) on the parent parser, and returns the function that runs it. A run
// returns the exit code: 0 success, 1 the work failed, 2 bad usage or bad input, 130/143
// training stopped by SIGINT/SIGTERM; library errors it does not catch are mapped to those codes
// by main.cpp. Options with numbers and --threads go through the helpers in cli/output.h, so a
// bad value is refused in our words.
#pragma once

#include <functional>
#include <vector>

namespace CLI {
class App;
}

namespace spar {
namespace cli {

struct Subcommand {
  CLI::App* parser;
  std::function<int()> run;
};

Subcommand add_check_gradients(CLI::App& parent);
Subcommand add_export(CLI::App& parent);  // cli/export.cpp
Subcommand add_bench(CLI::App& parent);   // bench.cpp, or bench_absent.cpp without benchmarks
std::vector<Subcommand> add_training_commands(CLI::App& parent);  // demo, train, resume
std::vector<Subcommand> add_run_commands(CLI::App& parent);       // sample, evaluate, inspect

}  // namespace cli
}  // namespace spar
