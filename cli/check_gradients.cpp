// `spar check-gradients`: verifies every gradient against central differences in float64.
#include <CLI/CLI.hpp>
#include <iostream>

#include "cli/commands.h"
#include "cli/output.h"
#include "engine/gradient_check.h"
#include "layers/gradient_cases.h"
#include "recipes/gradient_cases.h"

namespace spar {
namespace cli {
namespace {

struct Options {
  bool json = false;
  std::string only;
};

int run(const Options& o) {
  std::vector<GradientCheckResult> results;
  std::vector<GradientCase> cases = operation_gradient_cases();
  for (GradientCase& c : layer_gradient_cases()) cases.push_back(std::move(c));
  for (GradientCase& c : objective_gradient_cases()) cases.push_back(std::move(c));
  for (const GradientCase& c : cases) {
    if (!o.only.empty() && c.name.find(o.only) == std::string::npos) continue;
    results.push_back(check_first_order(c));
    results.push_back(check_second_order(c));
  }
  int failed = 0;
  for (const auto& r : results) failed += !r.passed;
  const int passed = static_cast<int>(results.size()) - failed;
  if (o.json) {
    std::cout << "{\"checks\": [\n";
    for (size_t i = 0; i < results.size(); ++i) {
      const auto& r = results[i];
      std::cout << "  {\"name\": " << json_string(r.name)
                << ", \"shapes\": " << json_string(r.shapes) << ", \"order\": " << r.order
                << ", \"max_abs_error\": " << json_number(r.max_abs_error)
                << ", \"max_rel_error\": " << json_number(r.max_rel_error)
                << ", \"passed\": " << (r.passed ? "true" : "false") << "}"
                << (i + 1 < results.size() ? "," : "") << "\n";
    }
    std::cout << "], \"passed\": " << passed << ", \"failed\": " << failed << "}\n";
  } else {
    std::vector<std::vector<std::string>> rows;
    for (const auto& r : results)
      rows.push_back({r.name, r.order == 1 ? "first" : "second", r.shapes,
                      format_number(r.max_abs_error, 2), format_number(r.max_rel_error, 2),
                      r.passed ? "pass" : "FAIL"});
    print_table({"check", "order", "input shapes", "max abs error", "max rel error", "result"},
                rows);
    std::cout << "\n" << passed << " passed, " << failed << " failed\n";
  }
  if (results.empty()) {
    std::cerr << "spar: check-gradients: no check matches '" << o.only << "'\n";
    return 2;
  }
  return failed == 0 ? 0 : 1;
}

}  // namespace

Subcommand add_check_gradients(CLI::App& parent) {
  auto options = std::make_shared<Options>();
  CLI::App* app = parent.add_subcommand(
      "check-gradients",
      "Verify the gradient of every operation, layer and objective, first and second "
      "order, against central differences in float64.\n"
      "Exits 1 if any check fails.\n"
      "Example: spar check-gradients --only matmul");
  app->add_flag("--json", options->json, "Print the results as JSON instead of a table");
  app->add_option("--only", options->only, "Run only the checks whose name contains this text");
  add_threads_option(*app);
  return {app, [options] { return run(*options); }};
}

}  // namespace cli
}  // namespace spar
