// The engine's own gradient checks: every operation on random inputs.
#include <functional>

#include "engine/gradient_check.h"
#include "engine/ops.h"
#include "engine/random.h"

namespace spar {
namespace {

using V = Var<double>;
using Vs = std::vector<V>;
using D = Tensor<double>;
using Op = std::function<V(const Vs&)>;

class CaseList {
 public:
  // Registers `name`: see folded_case() in gradient_check.h.
  void check(const std::string& name, const Op& op, std::vector<D> inputs) {
    cases_.push_back(folded_case(name, op, std::move(inputs), rng_));
  }
  D any(const Shape& s, double lo = -2, double hi = 2) { return rng_.uniform<double>(s, lo, hi); }
  D positive(const Shape& s) { return rng_.uniform<double>(s, 0.5, 2.0); }
  // Magnitudes in [0.2, 1.5] with random signs: kinks at 0 stay far from ±h.
  D away_from_zero(const Shape& s) {
    D a = rng_.uniform<double>(s, 0.2, 1.5), b = rng_.uniform<double>(s, -1, 1);
    for (int64_t i = 0; i < a.element_count(); ++i) a.mutable_data()[i] *= b.data()[i] < 0 ? -1 : 1;
    return a;
  }
  std::vector<GradientCase> take() { return std::move(cases_); }

 private:
  Rng rng_{20240611, 1};
  std::vector<GradientCase> cases_;
};

}  // namespace

GradientCase folded_case(const std::string& name, const Op& op, std::vector<D> inputs, Rng& rng) {
  Shape out_shape;
  {
    NoRecordScope no_record;
    Vs xs(inputs.begin(), inputs.end());
    out_shape = op(xs).shape();
  }
  V w1(rng.uniform<double>(out_shape, -1, 1)), w2(rng.uniform<double>(out_shape, -0.5, 0.5));
  return {name,
          [op, w1, w2](const Vs& xs) {
            V y = op(xs);
            return sum(add(multiply(w1, y), multiply(w2, square(y))));
          },
          std::move(inputs)};
}

std::vector<GradientCase> operation_gradient_cases() {
  CaseList c;
  // Broadcast patterns: same shape, scalar, per-row, per-column, per-channel, both sides,
  // size-1 everywhere.
  const std::vector<std::pair<std::string, std::pair<Shape, Shape>>> patterns = {
      {"same shape", {{3, 4}, {3, 4}}},
      {"scalar", {{3, 4}, {}}},
      {"per-row", {{3, 4}, {3, 1}}},
      {"per-column", {{3, 4}, {4}}},
      {"per-channel", {{2, 3, 2, 2}, {1, 3, 1, 1}}},
      {"both broadcast", {{3, 1}, {1, 4}}},
      {"size-1", {{1, 1}, {1}}},
  };
  for (const auto& p : patterns) {
    const Shape a = p.second.first, b = p.second.second;
    c.check("add (" + p.first + ")", [](const Vs& x) { return add(x[0], x[1]); },
            {c.any(a), c.any(b)});
    c.check("add (" + p.first + ", swapped)", [](const Vs& x) { return add(x[0], x[1]); },
            {c.any(b), c.any(a)});
    c.check("subtract (" + p.first + ")", [](const Vs& x) { return subtract(x[0], x[1]); },
            {c.any(a), c.any(b)});
    c.check("multiply (" + p.first + ")", [](const Vs& x) { return multiply(x[0], x[1]); },
            {c.any(a), c.any(b)});
    c.check("divide (" + p.first + ")", [](const Vs& x) { return divide(x[0], x[1]); },
            {c.any(a), c.away_from_zero(b)});
  }
  const Shape s{3, 4}, t{2, 1, 3};
  for (const Shape& sh : {s, t}) {
    c.check("negate", [](const Vs& x) { return negate(x[0]); }, {c.any(sh)});
    c.check("exp", [](const Vs& x) { return exp(x[0]); }, {c.any(sh)});
    c.check("log", [](const Vs& x) { return log(x[0]); }, {c.positive(sh)});
    c.check("sqrt", [](const Vs& x) { return sqrt(x[0]); }, {c.positive(sh)});
    c.check("square", [](const Vs& x) { return square(x[0]); }, {c.any(sh)});
    c.check("power 3", [](const Vs& x) { return power(x[0], 3.0); }, {c.any(sh)});
    c.check("power -1.5", [](const Vs& x) { return power(x[0], -1.5); }, {c.positive(sh)});
    c.check("abs", [](const Vs& x) { return abs(x[0]); }, {c.away_from_zero(sh)});
    c.check("tanh", [](const Vs& x) { return tanh(x[0]); }, {c.any(sh)});
    c.check("sigmoid", [](const Vs& x) { return sigmoid(x[0]); }, {c.any(sh, -6, 6)});
    c.check("relu", [](const Vs& x) { return relu(x[0]); }, {c.away_from_zero(sh)});
    c.check("leaky_relu 0.2", [](const Vs& x) { return leaky_relu(x[0], 0.2); },
            {c.away_from_zero(sh)});
    c.check("softplus", [](const Vs& x) { return softplus(x[0]); }, {c.any(sh, -6, 6)});
    c.check("log_sigmoid", [](const Vs& x) { return log_sigmoid(x[0]); }, {c.any(sh, -6, 6)});
    c.check("scale", [](const Vs& x) { return scale(x[0], -1.7); }, {c.any(sh)});
    c.check("add_scalar", [](const Vs& x) { return add_scalar(x[0], 0.3); }, {c.any(sh)});
  }
  c.check("matmul", [](const Vs& x) { return matmul(x[0], x[1]); }, {c.any({3, 4}), c.any({4, 5})});
  c.check("matmul (aᵀ)", [](const Vs& x) { return matmul(x[0], x[1], true, false); },
          {c.any({4, 3}), c.any({4, 5})});
  c.check("matmul (bᵀ)", [](const Vs& x) { return matmul(x[0], x[1], false, true); },
          {c.any({3, 4}), c.any({5, 4})});
  c.check("matmul (aᵀ bᵀ)", [](const Vs& x) { return matmul(x[0], x[1], true, true); },
          {c.any({4, 3}), c.any({5, 4})});
  c.check("matmul (outer)", [](const Vs& x) { return matmul(x[0], x[1]); },
          {c.any({3, 1}), c.any({1, 2})});
  c.check("matmul (1x1 result)", [](const Vs& x) { return matmul(x[0], x[1]); },
          {c.any({1, 4}), c.any({4, 1})});
  c.check("transpose", [](const Vs& x) { return transpose(x[0]); }, {c.any({3, 4})});
  c.check("permute", [](const Vs& x) { return permute(x[0], {2, 0, 1}); }, {c.any({2, 3, 4})});
  c.check("reshape", [](const Vs& x) { return reshape(x[0], {4, 3}); }, {c.any({2, 6})});
  c.check("concat axis 1",
          [](const Vs& x) {
            return concat<double>({x[0], x[1], x[2]}, 1);
          },
          {c.any({2, 1, 3}), c.any({2, 2, 3}), c.any({2, 3, 3})});
  c.check("concat axis 0",
          [](const Vs& x) {
            return concat<double>({x[0], x[1]}, 0);
          },
          {c.any({1, 3}), c.any({2, 3})});
  c.check("slice", [](const Vs& x) { return slice(x[0], 1, 1, 3); }, {c.any({2, 4, 2})});
  c.check("pad", [](const Vs& x) { return pad(x[0], -1, 2, 1); }, {c.any({2, 3})});
  c.check("broadcast_to",
          [](const Vs& x) {
            return broadcast_to(x[0], {2, 3, 4});
          },
          {c.any({3, 1})});
  c.check("sum_into_shape",
          [](const Vs& x) {
            return sum_into_shape(x[0], {3, 1});
          },
          {c.any({2, 3, 4})});
  c.check("sum", [](const Vs& x) { return sum(x[0]); }, {c.any({3, 4})});
  c.check("sum axis 1", [](const Vs& x) { return sum(x[0], 1); }, {c.any({2, 3, 4})});
  c.check("sum axis 0 (size 1)", [](const Vs& x) { return sum(x[0], 0); }, {c.any({1, 5})});
  c.check("mean", [](const Vs& x) { return mean(x[0]); }, {c.any({3, 4})});
  c.check("mean axis -1", [](const Vs& x) { return mean(x[0], -1, true); }, {c.any({3, 4})});
  c.check("max axis 1", [](const Vs& x) { return max(x[0], 1); }, {c.any({3, 5})});
  c.check("max axis 0", [](const Vs& x) { return max(x[0], 0, true); }, {c.any({4, 2, 3})});
  c.check("log_sum_exp axis 1", [](const Vs& x) { return log_sum_exp(x[0], 1); }, {c.any({3, 5})});
  c.check("log_sum_exp axis 0", [](const Vs& x) { return log_sum_exp(x[0], 0); }, {c.any({4, 2})});
  c.check("softmax", [](const Vs& x) { return softmax(x[0], -1); }, {c.any({3, 4})});
  c.check("class_cross_entropy", [](const Vs& x) { return class_cross_entropy(x[0], x[1], 1); },
          {c.any({3, 4}), c.positive({3, 4})});
  c.check("logistic_cross_entropy", [](const Vs& x) { return logistic_cross_entropy(x[0], x[1]); },
          {c.any({3, 4}, -5, 5), c.any({3, 4}, 0, 1)});
  // Batch normalisation with batch statistics: dense and image layouts, one value per
  // channel per sample and several.
  const auto normalise = [](const Vs& x) { return batch_normalise(x[0], x[1], x[2], 1e-3); };
  c.check("batch_normalise [N, C]", normalise, {c.any({11, 3}), c.any({3}), c.any({3})});
  c.check("batch_normalise [N, C, H, W]", normalise, {c.any({3, 2, 2, 3}), c.any({2}), c.any({2})});
  c.check("batch_normalise [N, C, 1, 1]", normalise, {c.any({4, 3, 1, 1}), c.any({3}), c.any({3})});
  // Convolutions: non-square inputs and kernels, strides 1 to 3, padding 0 to 2, 1×1 kernels,
  // batch 1 and 2, one channel and several.
  struct ConvCase {
    const char* label;
    Shape x, w;
    ConvGeometry g;
  };
  const std::vector<ConvCase> conv_cases = {
      {"3x3 s1 p1", {2, 2, 5, 4}, {3, 2, 3, 3}, {1, 1, 1, 1}},
      {"4x4 s2 p1", {1, 3, 6, 6}, {2, 3, 4, 4}, {2, 2, 1, 1}},
      {"3x2 s(3,1) p(2,0)", {2, 1, 7, 5}, {2, 1, 3, 2}, {3, 1, 2, 0}},
      {"1x1", {1, 3, 3, 2}, {4, 3, 1, 1}, {1, 1, 0, 0}},
  };
  for (const ConvCase& k : conv_cases) {
    const ConvGeometry g = k.g;
    const int64_t oh = conv_output_extent(k.x[2], k.w[2], g.stride_rows, g.pad_rows, "case");
    const int64_t ow = conv_output_extent(k.x[3], k.w[3], g.stride_cols, g.pad_cols, "case");
    const Shape y{k.x[0], k.w[0], oh, ow};
    const int64_t h = k.x[2], w = k.x[3], kh = k.w[2], kw = k.w[3];
    c.check(std::string("convolution ") + k.label,
            [g](const Vs& x) { return convolution(x[0], x[1], g); }, {c.any(k.x), c.any(k.w)});
    c.check(std::string("transposed_convolution ") + k.label,
            [g, h, w](const Vs& x) { return transposed_convolution(x[0], x[1], g, h, w); },
            {c.any(y), c.any(k.w)});
    c.check(std::string("convolution_weight_gradient ") + k.label,
            [g, kh, kw](const Vs& x) { return convolution_weight_gradient(x[0], x[1], g, kh, kw); },
            {c.any(k.x), c.any(y)});
  }
  return c.take();
}

}  // namespace spar
