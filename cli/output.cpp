#include "cli/output.h"

#include <CLI/CLI.hpp>
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <iostream>
#include <limits>
#include <sstream>

#include "engine/parallel.h"

namespace spar {
namespace cli {
namespace {

// The name an option is spoken of by: the long one of "-n,--count", else the first.
std::string display_name(const std::string& names) {
  std::string first, part;
  std::stringstream in(names);
  while (std::getline(in, part, ',')) {
    if (first.empty()) first = part;
    if (part.rfind("--", 0) == 0) return part;
  }
  return first;
}

// "must be ..." for values under `low`: "a positive integer" for 1.
std::string at_least(int64_t low) {
  if (low == 1) return "a positive integer";
  if (low == 0) return "zero or a positive integer";
  return "an integer of at least " + std::to_string(low);
}

enum class Reading { kNumber, kNotANumber, kTooLarge, kTooSmall };

// Reads decimal digits with an optional leading '-', and nothing else ("+5", "5.0", "1e3" and
// " 5" are not integers here). kTooLarge and kTooSmall: past the range of int64_t.
Reading read_integer(const std::string& text, int64_t& value) {
  const bool negative = !text.empty() && text[0] == '-';
  size_t i = negative ? 1 : 0;
  if (i == text.size()) return Reading::kNotANumber;
  constexpr uint64_t kLargest = std::numeric_limits<int64_t>::max();
  uint64_t magnitude = 0;
  bool overflow = false;
  for (; i < text.size(); ++i) {
    if (text[i] < '0' || text[i] > '9') return Reading::kNotANumber;
    const uint64_t digit = static_cast<uint64_t>(text[i] - '0');
    if (overflow || magnitude > (kLargest + 1 - digit) / 10)
      overflow = true;
    else
      magnitude = magnitude * 10 + digit;
  }
  if (overflow || magnitude > kLargest + (negative ? 1 : 0))
    return negative ? Reading::kTooSmall : Reading::kTooLarge;
  value = negative ? static_cast<int64_t>(0 - magnitude) : static_cast<int64_t>(magnitude);
  return Reading::kNumber;
}

}  // namespace

CLI::Option* add_integer_option(CLI::App& command, const std::string& names,
                                const std::string& help, int64_t low, int64_t high,
                                std::function<void(int64_t)> use) {
  const std::string must = "spar " + command.get_name() + ": " + display_name(names) + " must be ";
  CLI::Option* option = command.add_option_function<std::string>(
      names,
      [must, low, high, use](const std::string& text) {
        int64_t v = 0;
        const Reading r = read_integer(text, v);
        if (r == Reading::kNotANumber)
          throw ArgumentError(must + at_least(low) + ", not '" + text + "'");
        if (r == Reading::kTooSmall || (r == Reading::kNumber && v < low))
          throw ArgumentError(must + at_least(low) + ", not " + text);
        if (r == Reading::kTooLarge || v > high)
          throw ArgumentError(must + "at most " + std::to_string(high) + ", not " + text);
        use(v);
      },
      help);
  option->type_name("N");
  return option;
}

CLI::Option* add_integer_option(CLI::App& command, const std::string& names, int64_t& value,
                                const std::string& help, int64_t low, int64_t high) {
  int64_t* target = &value;
  return add_integer_option(command, names, help, low, high, [target](int64_t v) { *target = v; });
}

void add_threads_option(CLI::App& command) {
  add_integer_option(command, "--threads", "Threads to use (default: all cores)", 1, kMaxThreads,
                     [](int64_t n) { set_thread_count(static_cast<int>(n)); });
}

void print_table(const std::vector<std::string>& header,
                 const std::vector<std::vector<std::string>>& rows) {
  std::vector<size_t> width(header.size());
  auto measure = [&](const std::vector<std::string>& r) {
    for (size_t i = 0; i < r.size() && i < width.size(); ++i) {
      // Count code points, not bytes, so "ᵀ" and "±" do not skew the columns.
      size_t n = 0;
      for (unsigned char ch : r[i]) n += (ch & 0xC0) != 0x80;
      width[i] = std::max(width[i], n);
    }
  };
  measure(header);
  for (const auto& r : rows) measure(r);
  auto print = [&](const std::vector<std::string>& r) {
    std::string line;
    for (size_t i = 0; i < r.size(); ++i) {
      size_t n = 0;
      for (unsigned char ch : r[i]) n += (ch & 0xC0) != 0x80;
      line += r[i];
      if (i + 1 < r.size()) line += std::string(width[i] - n + 2, ' ');
    }
    std::cout << line << '\n';
  };
  print(header);
  size_t total = 0;
  for (size_t w : width) total += w + 2;
  std::cout << std::string(total > 2 ? total - 2 : 0, '-') << '\n';
  for (const auto& r : rows) print(r);
}

std::string json_string(const std::string& s) {
  std::string out = "\"";
  for (unsigned char ch : s) {
    switch (ch) {
      case '"':
        out += "\\\"";
        break;
      case '\\':
        out += "\\\\";
        break;
      case '\n':
        out += "\\n";
        break;
      case '\t':
        out += "\\t";
        break;
      default:
        if (ch < 0x20) {
          char buf[8];
          std::snprintf(buf, sizeof buf, "\\u%04x", ch);
          out += buf;
        } else {
          out += static_cast<char>(ch);
        }
    }
  }
  return out + "\"";
}

std::string json_number(double v) {
  if (!std::isfinite(v)) return "null";
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.6g", v);
  return buf;
}

std::string format_number(double v, int significant) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.*g", significant, v);
  return buf;
}

std::string format_duration(double seconds) {
  if (!(seconds >= 0) || seconds > 1e8) return "?";
  const long long s = static_cast<long long>(seconds + 0.5);
  char buf[32];
  if (s < 60)
    std::snprintf(buf, sizeof buf, "%llds", s);
  else if (s < 3600)
    std::snprintf(buf, sizeof buf, "%lldm%02llds", s / 60, s % 60);
  else
    std::snprintf(buf, sizeof buf, "%lldh%02lldm", s / 3600, s / 60 % 60);
  return buf;
}

}  // namespace cli
}  // namespace spar
