// Small helpers the subcommands share: table and JSON printing.
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

}  // namespace cli
}  // namespace spar
