// Small helpers the subcommands share: options whose values spar checks itself (with messages
// of its own), table, JSON, number and duration printing.
#pragma once

#include <cstdint>
#include <functional>
#include <stdexcept>
#include <string>
#include <vector>

namespace CLI {
class App;
class Option;
}  // namespace CLI

namespace spar {
namespace cli {

// A bad command line, found while reading it. what() is the whole line to print, e.g.
// "spar train: --steps must be a positive integer, not -5"; main.cpp prints it and exits 2.
class ArgumentError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

// The most threads `--threads` accepts.
constexpr int64_t kMaxThreads = 1024;

// Adds an integer option `names` (e.g. "-n,--count") to `command`, shown in the help as N.
// A value that is not a whole number from `low` to `high` stops the reading of the command line
// with an ArgumentError naming the option, the values it takes and the one given; a good value
// is passed to `use`.
CLI::Option* add_integer_option(CLI::App& command, const std::string& names,
                                const std::string& help, int64_t low, int64_t high,
                                std::function<void(int64_t)> use);
// The same, storing the value in `value` (which must outlive the parsing).
CLI::Option* add_integer_option(CLI::App& command, const std::string& names, int64_t& value,
                                const std::string& help, int64_t low, int64_t high);
// Adds `--threads N` (1 to kMaxThreads) to a subcommand that computes: the thread count of the
// whole process is set as soon as the option is read.
void add_threads_option(CLI::App& command);

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
