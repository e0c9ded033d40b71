// spar_reference_dump: evaluates one engine operation on tensors read from a text file and
// writes its value and its tape gradients, so that python scripts in tests/reference/ can
// compare them with numpy and scipy. Also writes normal draws from spar::Rng.
//
// Usage:
//   spar_reference_dump f64|f32 CASE INPUT OUTPUT [INTEGER...]
//   spar_reference_dump normal SEED STREAM COUNT OUTPUT
//   spar_reference_dump cases          (lists the cases and their integer parameters)
//
// Tensor text format, one tensor per line, fields separated by spaces:
//   rank d0 .. d(rank-1) v0 v1 .. v(element_count-1)
// Values are row-major decimals; "inf", "-inf" and "nan" are allowed. Output values are
// printed with %.17g, which reads back as the same double exactly.
//
// Operation cases: INPUT holds the operands x1 .. xk followed by one weight tensor w shaped
// like the result y. The operands are cast to the element type (f32 requires each value to
// be exactly representable as a float), recorded on a tape, and the case is evaluated.
// OUTPUT then receives k + 1 lines: y, and the gradient of sum(w * y) with respect to each
// operand in order (through Tape::gradient). The integer parameters (axes, flags, ranges)
// follow OUTPUT on the command line.
//
// Normal case: COUNT float64 draws of Rng(SEED, STREAM).normal<double>(Shape{COUNT}), one
// per line. OUTPUT may be "-" for standard output in both forms.
//
// Exit status: 0 done; 1 the engine raised an error; 2 bad usage or a bad input file. One
// line on stderr in the failing cases. Files are written to OUTPUT.part, then renamed.
#include <cerrno>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "engine/error.h"
#include "engine/ops.h"
#include "engine/random.h"
#include "engine/tape.h"

namespace {

using spar::Shape;
using spar::Tensor;
using spar::Var;

// Bad usage or a malformed input file (exit status 2).
struct UsageError {
  std::string message;
};

[[noreturn]] void usage_error(const std::string& message) {
  throw UsageError{message};
}

// ---- cases -------------------------------------------------------------------------------

struct CaseInfo {
  const char* name;
  int operands;    // -1: one or more
  int min_params;  // integer parameters after OUTPUT
  int max_params;
  const char* params;  // their meaning, for `cases` and error messages
};

const CaseInfo kCases[] = {
    {"add", 2, 0, 0, ""},
    {"subtract", 2, 0, 0, ""},
    {"multiply", 2, 0, 0, ""},
    {"divide", 2, 0, 0, ""},
    {"exp", 1, 0, 0, ""},
    {"log", 1, 0, 0, ""},
    {"tanh", 1, 0, 0, ""},
    {"sigmoid", 1, 0, 0, ""},
    {"softplus", 1, 0, 0, ""},
    {"log_sigmoid", 1, 0, 0, ""},
    {"matmul", 2, 2, 2, "TRANSPOSE_A(0|1) TRANSPOSE_B(0|1)"},
    {"transpose", 1, 0, 0, ""},
    {"permute", 1, 0, spar::kMaxRank, "AXIS..."},
    {"concat", -1, 1, 1, "AXIS"},
    {"slice", 1, 3, 3, "AXIS BEGIN END"},
    {"pad", 1, 3, 3, "AXIS BEFORE AFTER"},
    {"sum", 1, 0, 2, "[AXIS KEEP(0|1)], none for all elements"},
    {"mean", 1, 0, 2, "[AXIS KEEP(0|1)], none for all elements"},
    {"max", 1, 2, 2, "AXIS KEEP(0|1)"},
    {"log_sum_exp", 1, 2, 2, "AXIS KEEP(0|1)"},
    {"softmax", 1, 1, 1, "AXIS"},
    {"class_cross_entropy", 2, 1, 1, "AXIS (operands: logits, targets)"},
    {"logistic_cross_entropy", 2, 0, 0, "(operands: logits, targets)"},
    {"convolution", 2, 4, 4,
     "STRIDE_H STRIDE_W PAD_H PAD_W (operands: x [N,C,H,W], w [O,C,KH,KW])"},
    {"transposed_convolution", 2, 6, 6,
     "STRIDE_H STRIDE_W PAD_H PAD_W OUT_H OUT_W (operands: z [N,O,OH,OW], w [O,C,KH,KW])"},
};

const CaseInfo* find_case(const std::string& name) {
  for (const CaseInfo& c : kCases)
    if (name == c.name) return &c;
  return nullptr;
}

bool flag(long long v) {
  if (v != 0 && v != 1) usage_error("a flag must be 0 or 1, got " + std::to_string(v));
  return v == 1;
}

// The first four integer parameters of a convolution case: stride_rows stride_cols pad_rows
// pad_cols.
spar::ConvGeometry geometry(const std::vector<long long>& p) {
  spar::ConvGeometry g;
  g.stride_rows = p[0];
  g.stride_cols = p[1];
  g.pad_rows = p[2];
  g.pad_cols = p[3];
  return g;
}

template <class T>
Var<T> evaluate(const std::string& c, const std::vector<Var<T>>& x,
                const std::vector<long long>& p) {
  const int np = static_cast<int>(p.size());
  if (c == "add") return spar::add(x[0], x[1]);
  if (c == "subtract") return spar::subtract(x[0], x[1]);
  if (c == "multiply") return spar::multiply(x[0], x[1]);
  if (c == "divide") return spar::divide(x[0], x[1]);
  if (c == "exp") return spar::exp(x[0]);
  if (c == "log") return spar::log(x[0]);
  if (c == "tanh") return spar::tanh(x[0]);
  if (c == "sigmoid") return spar::sigmoid(x[0]);
  if (c == "softplus") return spar::softplus(x[0]);
  if (c == "log_sigmoid") return spar::log_sigmoid(x[0]);
  if (c == "matmul") return spar::matmul(x[0], x[1], flag(p[0]), flag(p[1]));
  if (c == "transpose") return spar::transpose(x[0]);
  if (c == "permute") return spar::permute(x[0], std::vector<int>(p.begin(), p.end()));
  if (c == "concat") return spar::concat(x, static_cast<int>(p[0]));
  if (c == "slice") return spar::slice(x[0], static_cast<int>(p[0]), p[1], p[2]);
  if (c == "pad") return spar::pad(x[0], static_cast<int>(p[0]), p[1], p[2]);
  if (c == "sum" && np == 0) return spar::sum(x[0]);
  if (c == "sum") return spar::sum(x[0], static_cast<int>(p[0]), flag(p[1]));
  if (c == "mean" && np == 0) return spar::mean(x[0]);
  if (c == "mean") return spar::mean(x[0], static_cast<int>(p[0]), flag(p[1]));
  if (c == "max") return spar::max(x[0], static_cast<int>(p[0]), flag(p[1]));
  if (c == "log_sum_exp") return spar::log_sum_exp(x[0], static_cast<int>(p[0]), flag(p[1]));
  if (c == "softmax") return spar::softmax(x[0], static_cast<int>(p[0]));
  if (c == "class_cross_entropy")
    return spar::class_cross_entropy(x[0], x[1], static_cast<int>(p[0]));
  if (c == "logistic_cross_entropy") return spar::logistic_cross_entropy(x[0], x[1]);
  if (c == "convolution") return spar::convolution(x[0], x[1], geometry(p));
  if (c == "transposed_convolution")
    return spar::transposed_convolution(x[0], x[1], geometry(p), p[4], p[5]);
  usage_error("case '" + c + "' has no evaluation");  // kCases and this list disagree
}

// ---- text tensors ------------------------------------------------------------------------

struct TextTensor {
  Shape shape;
  std::vector<double> values;
};

long long parse_integer(const std::string& s, const std::string& what) {
  errno = 0;
  char* end = nullptr;
  const long long v = std::strtoll(s.c_str(), &end, 10);
  if (s.empty() || *end != '\0' || errno != 0) usage_error(what + " '" + s + "' is not an integer");
  return v;
}

uint64_t parse_unsigned(const std::string& s, const std::string& what) {
  errno = 0;
  char* end = nullptr;
  const unsigned long long v = std::strtoull(s.c_str(), &end, 10);
  if (s.empty() || s[0] == '-' || *end != '\0' || errno != 0)
    usage_error(what + " '" + s + "' is not an unsigned integer");
  return v;
}

double parse_double(const std::string& s, const std::string& where) {
  errno = 0;
  char* end = nullptr;
  const double v = std::strtod(s.c_str(), &end);
  if (s.empty() || *end != '\0' || (errno == ERANGE && std::isinf(v)))
    usage_error(where + ": '" + s + "' is not a number");
  return v;
}

std::vector<TextTensor> read_tensors(const std::string& path) {
  std::ifstream in(path);
  if (!in) usage_error(path + ": cannot open for reading");
  std::vector<TextTensor> out;
  std::string line;
  for (int number = 1; std::getline(in, line); ++number) {
    std::istringstream fields(line);
    std::vector<std::string> tok;
    for (std::string t; fields >> t;) tok.push_back(t);
    if (tok.empty()) continue;
    const std::string where = path + ": line " + std::to_string(number);
    const long long rank = parse_integer(tok[0], where + ": rank");
    if (rank < 0 || rank > spar::kMaxRank)
      usage_error(where + ": rank " + std::to_string(rank) + " outside 0.." +
                  std::to_string(spar::kMaxRank));
    if (static_cast<long long>(tok.size()) < 1 + rank) usage_error(where + ": missing extents");
    TextTensor t;
    for (long long i = 0; i < rank; ++i) {
      const long long e = parse_integer(tok[1 + i], where + ": extent");
      if (e < 0) usage_error(where + ": negative extent " + std::to_string(e));
      t.shape.push_back(e);
    }
    const size_t count = tok.size() - 1 - static_cast<size_t>(rank);
    if (static_cast<int64_t>(count) != t.shape.element_count())
      usage_error(where + ": shape " + t.shape.str() + " needs " +
                  std::to_string(t.shape.element_count()) + " values, found " +
                  std::to_string(count));
    t.values.reserve(count);
    for (size_t i = 0; i < count; ++i) t.values.push_back(parse_double(tok[1 + rank + i], where));
    out.push_back(std::move(t));
  }
  if (in.bad()) usage_error(path + ": read error");
  return out;
}

template <class T>
Tensor<T> to_tensor(const TextTensor& t, const std::string& what) {
  std::vector<T> v(t.values.size());
  for (size_t i = 0; i < v.size(); ++i) {
    v[i] = static_cast<T>(t.values[i]);
    const double back = static_cast<double>(v[i]);
    if (!(back == t.values[i]) && !(std::isnan(back) && std::isnan(t.values[i])))
      usage_error(what + ": value " + std::to_string(t.values[i]) +
                  " is not exactly representable in the element type");
  }
  return Tensor<T>::from_values(t.shape, v);
}

// Collects output and writes it to OUTPUT.part, renamed to OUTPUT once complete.
class Output {
 public:
  explicit Output(std::string path) : path_(std::move(path)) {}

  template <class T>
  void tensor(const Tensor<T>& t) {
    text_ += std::to_string(t.rank());
    for (int i = 0; i < t.rank(); ++i) text_ += " " + std::to_string(t.dim(i));
    for (int64_t i = 0; i < t.element_count(); ++i) {
      text_ += ' ';
      number(static_cast<double>(t.data()[i]));
    }
    text_ += '\n';
  }
  void line_of(double v) {
    number(v);
    text_ += '\n';
  }

  void commit() {
    if (path_ == "-") {
      if (std::fwrite(text_.data(), 1, text_.size(), stdout) != text_.size() ||
          std::fflush(stdout) != 0)
        usage_error("standard output: write failed");
      return;
    }
    const std::string part = path_ + ".part";
    std::FILE* f = std::fopen(part.c_str(), "wb");
    if (!f) usage_error(part + ": cannot open for writing");
    const bool ok = std::fwrite(text_.data(), 1, text_.size(), f) == text_.size();
    if (std::fclose(f) != 0 || !ok) {
      std::remove(part.c_str());
      usage_error(part + ": write failed");
    }
    if (std::rename(part.c_str(), path_.c_str()) != 0) {
      std::remove(part.c_str());
      usage_error(path_ + ": cannot rename " + part + " into place");
    }
  }

 private:
  void number(double v) {
    char buf[40];
    std::snprintf(buf, sizeof buf, "%.17g", v);
    text_ += buf;
  }
  std::string path_;
  std::string text_;
};

// ---- drivers -----------------------------------------------------------------------------

template <class T>
void run_case(const CaseInfo& info, const std::string& input, const std::string& output,
              const std::vector<long long>& params) {
  const std::vector<TextTensor> tensors = read_tensors(input);
  const int k = static_cast<int>(tensors.size()) - 1;  // the last tensor is the weight w
  if (k < 1 || (info.operands >= 0 && k != info.operands))
    usage_error(input + ": case " + info.name + " takes " +
                (info.operands < 0 ? std::string("one or more") : std::to_string(info.operands)) +
                " operand(s) and a weight tensor, found " + std::to_string(tensors.size()) +
                " tensor(s)");
  spar::Tape<T> tape;
  std::vector<Var<T>> x;
  for (int i = 0; i < k; ++i)
    x.push_back(
        tape.variable(to_tensor<T>(tensors[i], input + ": operand " + std::to_string(i + 1))));
  const Var<T> w(to_tensor<T>(tensors[k], input + ": weight"));

  const Var<T> y = evaluate<T>(info.name, x, params);
  if (w.shape() != y.shape())
    usage_error(input + ": the weight has shape " + w.shape().str() + " but " + info.name +
                " gives " + y.shape().str());
  const std::vector<Var<T>> grads = tape.gradient(spar::sum(spar::multiply(w, y)), x);

  Output out(output);
  out.tensor(y.value());
  for (const Var<T>& g : grads) out.tensor(g.value());
  out.commit();
}

void run_normal(const std::vector<std::string>& args) {
  if (args.size() != 5) usage_error("usage: spar_reference_dump normal SEED STREAM COUNT OUTPUT");
  const uint64_t seed = parse_unsigned(args[1], "SEED");
  const uint64_t stream = parse_unsigned(args[2], "STREAM");
  const long long count = parse_integer(args[3], "COUNT");
  if (count < 1) usage_error("COUNT must be at least 1, got " + args[3]);
  spar::Rng rng(seed, stream);
  const Tensor<double> z = rng.normal<double>(Shape{count});
  Output out(args[4]);
  for (int64_t i = 0; i < z.element_count(); ++i) out.line_of(z.data()[i]);
  out.commit();
}

void list_cases() {
  for (const CaseInfo& c : kCases)
    std::printf("%-34s operands %-3s  %s\n", c.name,
                c.operands < 0 ? "1+" : std::to_string(c.operands).c_str(), c.params);
}

int run(const std::vector<std::string>& args) {
  const char* kUsage =
      "usage: spar_reference_dump f64|f32 CASE INPUT OUTPUT [INTEGER...] | "
      "normal SEED STREAM COUNT OUTPUT | cases";
  if (args.empty()) usage_error(kUsage);
  if (args[0] == "normal") {
    run_normal(args);
    return 0;
  }
  if (args[0] == "cases" && args.size() == 1) {
    list_cases();
    return 0;
  }
  if ((args[0] != "f64" && args[0] != "f32") || args.size() < 4) usage_error(kUsage);
  const CaseInfo* info = find_case(args[1]);
  if (!info) usage_error("unknown case '" + args[1] + "' (see: spar_reference_dump cases)");
  std::vector<long long> params;
  for (size_t i = 4; i < args.size(); ++i) params.push_back(parse_integer(args[i], "parameter"));
  const int np = static_cast<int>(params.size());
  if (np < info->min_params || np > info->max_params ||
      ((args[1] == "sum" || args[1] == "mean") && np == 1))
    usage_error(std::string("case ") + info->name + " takes parameters: " + info->params);
  if (args[0] == "f64")
    run_case<double>(*info, args[2], args[3], params);
  else
    run_case<float>(*info, args[2], args[3], params);
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  try {
    return run(std::vector<std::string>(argv + 1, argv + argc));
  } catch (const UsageError& e) {
    std::fprintf(stderr, "spar_reference_dump: %s\n", e.message.c_str());
    return 2;
  } catch (const spar::Error& e) {
    std::fprintf(stderr, "spar_reference_dump: %s\n", e.what());
    return 1;
  }
}
