// Small helpers the subcommands share: table, JSON, number and duration printing.
#pragma once

#include <string>
#include <vector>

namespace spar {
namespace cli {

// Prints rows as a left-aligned text table with a header and a rule under it.
void print_table(const std::vector<std::string>& header,
                 const std::vector<std::vector<std::string>>& rows);

// A JSON string literal for `s` (quotes included), escaping what JSON requires.
std::string json_string(const std::string& s);
// A JSON number; non-finite values become null (JSON has no NaN or infinity).
std::string json_number(double v);
// Formats a number for a table, e.g. "3.2e-09" or "187.4".
std::string format_number(double v, int significant = 3);
// A duration for people: "42s", "3m05s", "2h10m"; "?" when unknown.
std::string format_duration(double seconds);

}  // namespace cli
}  // namespace spar
