// `spar bench`: speed figures as ratios to a ceiling measured in the same run.
#include "benchmarks/bench.h"

#include <CLI/CLI.hpp>
#include <iostream>

#include "cli/commands.h"
#include "cli/output.h"
#include "engine/parallel.h"

namespace spar {
namespace cli {
namespace {

struct Options {
  bench::BenchOptions bench;
  bool json = false;
  std::string only;
};

// The figure compared with the target: ours over the ceiling, or ours alone.
double judged(const bench::BenchRow& r) {
  return r.ceiling > 0 ? r.value / r.ceiling : r.value;
}
bool meets(const bench::BenchRow& r) {
  if (r.target <= 0) return true;
  return r.higher_is_better ? judged(r) >= r.target : judged(r) <= r.target;
}

int run(const Options& o) {
  const std::vector<bench::BenchRow> rows = bench::run_all(o.bench, o.only);
  const int threads = o.bench.threads > 0 ? o.bench.threads : thread_count();
  if (o.json) {
    std::cout << "{\"threads\": " << threads
              << ", \"quick\": " << (o.bench.quick ? "true" : "false") << ", \"rows\": [\n";
    for (size_t i = 0; i < rows.size(); ++i) {
      const auto& r = rows[i];
      std::cout << "  {\"name\": " << json_string(r.name) << ", \"size\": " << json_string(r.size)
                << ", \"unit\": " << json_string(r.unit) << ", \"value\": " << json_number(r.value)
                << ", \"ceiling\": " << json_number(r.ceiling)
                << ", \"ratio\": " << (r.ceiling > 0 ? json_number(r.value / r.ceiling) : "null")
                << ", \"target\": " << json_number(r.target)
                << ", \"meets_target\": " << (meets(r) ? "true" : "false") << "}"
                << (i + 1 < rows.size() ? "," : "") << "\n";
    }
    std::cout << "]}\n";
    return 0;
  }
  std::cout << "threads: " << threads
            << (o.bench.quick ? " (quick run: figures are not measurements)" : "") << "\n\n";
  std::vector<std::vector<std::string>> table;
  for (const auto& r : rows) {
    const std::string target = r.target <= 0
                                   ? ""
                                   : (r.higher_is_better ? "≥ " : "≤ ") +
                                         format_number(r.target, 2) + (r.ceiling > 0 ? "×" : "");
    table.push_back({r.name, r.size, format_number(r.value, 4) + " " + r.unit,
                     r.ceiling > 0 ? format_number(r.ceiling, 4) + " " + r.unit : "-",
                     r.ceiling > 0 ? format_number(r.value / r.ceiling, 3) : "-", target,
                     meets(r) ? "yes" : "no"});
  }
  print_table({"benchmark", "size", "spar", "raw Eigen GEMM", "ratio", "target", "met"}, table);
  return 0;
}

}  // namespace

Subcommand add_bench(CLI::App& parent) {
  auto options = std::make_shared<Options>();
  CLI::App* app = parent.add_subcommand(
      "bench",
      "Measure spar's kernels against a raw Eigen GEMM of the same FLOPs, in the same run.\n"
      "Example: spar bench --threads 2");
  app->add_flag("--json", options->json, "Print the results as JSON instead of a table");
  app->add_flag("--quick", options->bench.quick, "Small sizes and short timings (a smoke run)");
  add_threads_option(*app);
  app->add_option("--only", options->only, "Run only the benchmarks whose name contains this text");
  return {app, [options] { return run(*options); }};
}

}  // namespace cli
}  // namespace spar
