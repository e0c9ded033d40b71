#include "cli/output.h"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <iostream>

namespace spar {
namespace cli {

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
