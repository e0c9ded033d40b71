// Operations: every gradient against central differences (first and second order, float64),
// the checker's ability to fail, stable evaluation at extreme inputs (closed forms, common
// practice), and shape errors that name the operation and both shapes.
#include <catch2/catch.hpp>
#include <cmath>
#include <limits>

#include "engine/error.h"
#include "engine/gradient_check.h"
#include "engine/kernels.h"
#include "engine/ops.h"
#include "engine/parallel.h"
#include "engine/random.h"
#include "engine/tape_detail.h"  // record() and nodes, for adjoints made wrong on purpose
#include "tests/support.h"

using namespace spar;
using D = Tensor<double>;
using V = Var<double>;

TEST_CASE("every operation's first-order gradient matches central differences", "[ops][gradient]") {
  for (const GradientCase& c : operation_gradient_cases()) {
    GradientCheckResult r = check_first_order(c);
    INFO(c.name << " " << r.shapes << " rel " << r.max_rel_error);
    CHECK(r.passed);
    CHECK(r.max_rel_error <= 1e-6);  // the bar
  }
}

TEST_CASE("every operation's second-order gradient matches differences of gradients",
          "[ops][gradient]") {
  for (const GradientCase& c : operation_gradient_cases()) {
    GradientCheckResult r = check_second_order(c);
    INFO(c.name << " " << r.shapes << " rel " << r.max_rel_error);
    CHECK(r.passed);
    CHECK(r.max_rel_error <= 1e-4);  // the bar
  }
}

namespace {
// A deliberately wrong adjoint (off by 10%) for x², to show the checker catches one.
void wrong_square_adjoint(const detail::Node<double>& n, const V&, const V& g,
                          const std::vector<bool>&, std::vector<V>& gi) {
  gi[0] = multiply(g, scale(n.inputs[0], 2.2));
}
// Right first derivative, but made of a constant: its own derivative is lost.
void flat_square_adjoint(const detail::Node<double>& n, const V&, const V& g,
                         const std::vector<bool>&, std::vector<V>& gi) {
  gi[0] = multiply(g, V(n.inputs[0].value().clone()) * 2.0);
}

TEST_CASE("first_non_finite finds the first NaN or infinity, in any chunk", "[ops]") {
  // IEEE 754: 0·±∞ and 0·NaN are NaN, which the vectorised test relies on.
  const int64_t n = 3 * kParallelGrain + 5;  // several chunks and a short last one
  Tensor<float> x = Tensor<float>::full({n}, 1e38f);
  CHECK(kernels::first_non_finite(x) == -1);
  for (const int64_t at : {int64_t{0}, kParallelGrain + 7, n - 1}) {
    for (const float bad :
         {std::numeric_limits<float>::infinity(), -std::numeric_limits<float>::infinity(),
          std::numeric_limits<float>::quiet_NaN()}) {
      Tensor<float> y = x.clone();
      y.mutable_data()[at] = bad;
      CHECK(kernels::first_non_finite(y) == at);
      if (at + 1 < n) {
        y.mutable_data()[n - 1] = bad;  // a later one does not hide the first
        CHECK(kernels::first_non_finite(y) == at);
      }
    }
  }
  CHECK(kernels::first_non_finite(Tensor<float>::zeros({0})) == -1);
}

TEMPLATE_TEST_CASE("blend is scale, scale and add in one pass, bit for bit", "[ops]", float,
                   double) {
  using T = TestType;
  // Several chunks and a short last one; every kind of value: normal, zero of either sign,
  // subnormal, infinite (∞ − ∞ gives NaN) and NaN in one operand at a time (which NaN two
  // NaNs give is the hardware's choice, IEEE 754 § 6.2.3, so they are not paired).
  const int64_t n = 3 * kParallelGrain + 5;
  Rng rng(11, 3);
  Tensor<T> a = rng.uniform<T>({n}, -10, 10), b = rng.uniform<T>({n}, -10, 10);
  const T inf = std::numeric_limits<T>::infinity(), nan = std::numeric_limits<T>::quiet_NaN();
  const T tiny = std::numeric_limits<T>::denorm_min();
  const T specials_a[] = {T(0), T(-0.0), tiny, -tiny, inf, -inf, nan, T(1), inf};
  const T specials_b[] = {T(-0.0), T(-0.0), tiny, T(3), T(1), inf, T(2), nan, -inf};
  for (int i = 0; i < 9; ++i) {
    a.mutable_data()[kParallelGrain - 4 + i] = specials_a[i];
    b.mutable_data()[kParallelGrain - 4 + i] = specials_b[i];
  }
  const double r = 0.1, unbiased = 64.0 / 63.0;
  const double weights[][2] = {{1 - r, r}, {1 - r, r * unbiased}, {0.999, 1 - 0.999}, {0, 1},
                               {1, 0},     {-2.5, 1e-3}};
  for (const auto& w : weights) {
    INFO("weights " << w[0] << ", " << w[1]);
    const Tensor<T> blended = kernels::blend(a, w[0], b, w[1]);
    const Tensor<T> composed = kernels::binary(kernels::Binary::kAdd, kernels::scale(a, w[0]),
                                               kernels::scale(b, w[1]), "composed");
    CHECK(testing::same_bits(blended, composed));
    // And it is the weighted sum: against exact products and sum in double, within the error
    // of three roundings of at most u = ε/2 each, |error| <= ε·(|wa·a| + |wb·b|) (the standard
    // model of floating-point arithmetic, Higham, docs/references.md; this form from memory).
    for (int64_t i = 0; i < n; i += 997) {
      const double p = static_cast<double>(static_cast<T>(w[0])) * a.data()[i];
      const double q = static_cast<double>(static_cast<T>(w[1])) * b.data()[i];
      const double bound = std::numeric_limits<T>::epsilon() * (std::abs(p) + std::abs(q));
      CHECK(std::abs(static_cast<double>(blended.data()[i]) - (p + q)) <= bound);
    }
  }
  std::string message;
  CHECK(testing::error_kind_of(
            [&] {
              kernels::blend(a, 0.5, Tensor<T>::zeros({n, 1}), 0.5);
            },
            &message) == ErrorKind::kBadShape);
  CHECK(message ==
        "blend: shapes [" + std::to_string(n) + "] and [" + std::to_string(n) + ", 1] differ");
}

}  // namespace

TEST_CASE("the checker fails a wrong adjoint, and a first-order-only adjoint at second order",
          "[ops][gradient]") {
  const D x = D::from_values({3}, {0.3, -1.2, 2.0});
  auto with_adjoint = [](detail::AdjointFn<double> adjoint) {
    return [adjoint](const std::vector<V>& v) {
      V y = detail::record<double>("square", adjoint, {v[0]},
                                   kernels::unary(kernels::Unary::kSquare, v[0].value()));
      return sum(y * y);  // nonlinear on top, so second order passes through the adjoint
    };
  };
  const GradientCase wrong{"wrong", with_adjoint(wrong_square_adjoint), {x}};
  const GradientCase flat{"flat", with_adjoint(flat_square_adjoint), {x}};
  CHECK_FALSE(check_first_order(wrong).passed);
  CHECK(check_first_order(flat).passed);
  CHECK_FALSE(check_second_order(flat).passed);
}

TEST_CASE("softplus, log_sigmoid, sigmoid and the cross-entropies are finite and exact at ±100",
          "[ops][stability]") {
  // Closed forms (common practice): softplus(x) = x + log1p(e^-x) for x > 0, e^x·(1 − ...) for
  // x ≪ 0; log σ(x) = −softplus(−x).
  const V x(D::from_values({4}, {-100, 100, -800, 800}));
  const D sp = softplus(x).value(), ls = log_sigmoid(x).value(), sg = sigmoid(x).value();
  CHECK(sp.at({0}) == Approx(std::exp(-100.0)).epsilon(1e-14));
  CHECK(sp.at({1}) == 100.0);
  CHECK(sp.at({2}) == 0.0);
  CHECK(sp.at({3}) == 800.0);
  CHECK(ls.at({0}) == -100.0);
  CHECK(ls.at({1}) == Approx(-std::exp(-100.0)).epsilon(1e-14));
  CHECK(ls.at({3}) == 0.0);
  CHECK(sg.at({2}) == 0.0);
  CHECK(sg.at({3}) == 1.0);
  const Var<float> xf(Tensor<float>::from_values({2}, {-100.0f, 100.0f}));
  CHECK(softplus(xf).value().at({1}) == 100.0f);
  CHECK(log_sigmoid(xf).value().at({0}) == -100.0f);
  CHECK(std::isfinite(log_sigmoid(xf).value().at({1})));
  // The logistic cross-entropy with target 1 at z = −100 is 100 (−log σ(−100)); at z = 100 it is ≈
  // e^−100.
  const D loss =
      logistic_cross_entropy(V(D::from_values({2}, {-100, 100})), V(D::from_values({2}, {1, 0})))
          .value();
  CHECK(loss.at({0}) == Approx(100.0).epsilon(1e-15));
  CHECK(loss.at({1}) == Approx(100.0).epsilon(1e-15));
  // log Σ exp of [1000, 1000] = 1000 + log 2; softmax cross-entropy of a confident, right row ≈ 0.
  const D lse = log_sum_exp(V(D::from_values({1, 2}, {1000, 1000})), 1).value();
  CHECK(lse.at({0}) == Approx(1000 + std::log(2.0)).epsilon(1e-15));
  const D ce = class_cross_entropy(V(D::from_values({1, 3}, {500, -500, 0})),
                                   V(D::from_values({1, 3}, {1, 0, 0})), 1)
                   .value();
  CHECK(ce.at({0}) == Approx(0.0).margin(1e-200));
}

TEST_CASE("the gradients of the stable functions stay finite at ±100", "[ops][stability]") {
  Tape<double> tape;
  V x = tape.variable(D::from_values({2}, {-100, 100}));
  const D g = tape.gradient(sum(softplus(x) + log_sigmoid(x)), {x})[0].value();
  // d/dx softplus = σ(x), d/dx log σ(x) = σ(−x): the sum is 1 everywhere (calculus).
  CHECK(g.at({0}) == Approx(1.0));
  CHECK(g.at({1}) == Approx(1.0));
}

TEST_CASE("shape errors name the operation and both shapes", "[ops][errors]") {
  const V a(D::zeros({2, 3})), b(D::zeros({4, 3}));
  CHECK_THROWS_WITH(add(a, b), "add: shapes [2, 3] and [4, 3] do not broadcast");
  CHECK_THROWS_WITH(multiply(a, b), Catch::Contains("multiply") && Catch::Contains("[4, 3]"));
  CHECK_THROWS_WITH(matmul(a, a), Catch::Contains("matmul") && Catch::Contains("[2, 3]"));
  CHECK_THROWS_WITH(reshape(a, {5}), "reshape: cannot view shape [2, 3] as [5]");
  CHECK_THROWS_WITH(sum(a, 2), Catch::Contains("axis 2"));
  CHECK_THROWS_WITH(concat<double>({a, V(D::zeros({2, 2}))}, 0), Catch::Contains("concat"));
  try {
    add(a, b);
  } catch (const Error& e) {
    CHECK(e.kind() == ErrorKind::kBadShape);
  }
}

TEST_CASE("broadcasting covers scalar, per-row, per-column and per-channel operands", "[ops]") {
  // Values recomputed by hand from the definition (numpy's broadcasting rule).
  const V m(D::from_values({2, 3}, {1, 2, 3, 4, 5, 6}));
  CHECK(add(m, V(D::scalar(10))).value().at({1, 2}) == 16);
  CHECK(subtract(m, V(D::from_values({2, 1}, {1, 4}))).value().at({1, 0}) == 0);
  CHECK(multiply(m, V(D::from_values({3}, {1, 0, 2}))).value().at({1, 2}) == 12);
  const V nchw(D::full({2, 3, 2, 2}, 1.0));
  const D per_channel = divide(nchw, V(D::from_values({1, 3, 1, 1}, {1, 2, 4}))).value();
  CHECK(per_channel.at({1, 2, 1, 0}) == 0.25);
  CHECK(sum_into_shape(V(D::full({2, 3, 2, 2}, 1.0)), {1, 3, 1, 1}).value().at({0, 1, 0, 0}) == 8);
}

TEST_CASE("regression: max marks the first NaN of a lane, as numpy.argmax does",
          "[ops][regression]") {
  // Broke: for [nan, 7, nan, 1] the mask pointed at index 2 instead of 0.
  Tape<double> tape;
  const double nan = std::numeric_limits<double>::quiet_NaN();
  V x = tape.variable(D::from_values({1, 4}, {nan, 7, nan, 1}));
  const D g = tape.gradient(sum(max(x, 1)), {x})[0].value();
  CHECK(g.at({0, 0}) == 1.0);
  CHECK(g.at({0, 2}) == 0.0);
}

TEST_CASE("regression: log_sum_exp of a lane holding NaN is NaN, even beside ±inf",
          "[ops][regression]") {
  // Broke: std::max skipped NaN, so [inf, nan, 0] gave inf (scipy.special.logsumexp: nan).
  const double nan = std::numeric_limits<double>::quiet_NaN(),
               inf = std::numeric_limits<double>::infinity();
  const D y = log_sum_exp(V(D::from_values({2, 3}, {inf, nan, 0, -inf, nan, -inf})), 1).value();
  CHECK(std::isnan(y.at({0})));
  CHECK(std::isnan(y.at({1})));
}
