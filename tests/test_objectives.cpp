// The adversarial objectives against their closed forms on hand-picked scores, and the
// gradient penalties against an independent finite-difference computation.
#include <catch2/catch.hpp>
#include <cmath>

#include "recipes/gradient_cases.h"
#include "recipes/objectives.h"
#include "tests/support.h"

using namespace spar;
using D = Tensor<double>;
using V = Var<double>;

namespace {
V scores(std::vector<double> v) {
  return V(D::from_values({static_cast<int64_t>(v.size()), 1}, v));
}
double log_sigmoid_ref(double x) {
  return -std::log1p(std::exp(-x));
}  // log(1/(1+e^−x)), moderate x
}  // namespace

TEST_CASE("minimax at D = 1/2 everywhere gives V = −log 4 (Goodfellow et al. 2014, Theorem 1)",
          "[objectives]") {
  const V zero = scores({0, 0, 0});
  // V(D, G) = −L_D.
  CHECK(-discriminator_loss(Objective::kMinimax, zero, zero).as_scalar() ==
        Approx(-std::log(4.0)).epsilon(1e-15));
}

TEST_CASE("each objective's losses match their closed forms on hand-picked scores",
          "[objectives]") {
  const V r = scores({2, -1}), f = scores({0.5, -3});
  SECTION("minimax and non-saturating (Goodfellow et al. 2014)") {
    const double ld =
        -(log_sigmoid_ref(2) + log_sigmoid_ref(-1)) / 2 -
        (std::log(1 - 1 / (1 + std::exp(-0.5))) + std::log(1 - 1 / (1 + std::exp(3.0)))) / 2;
    CHECK(discriminator_loss(Objective::kMinimax, r, f).as_scalar() == Approx(ld).epsilon(1e-14));
    CHECK(discriminator_loss(Objective::kNonSaturating, r, f).as_scalar() ==
          Approx(ld).epsilon(1e-14));
    const double saturating =
        (std::log(1 - 1 / (1 + std::exp(-0.5))) + std::log(1 - 1 / (1 + std::exp(3.0)))) / 2;
    CHECK(generator_loss(Objective::kMinimax, f).as_scalar() == Approx(saturating).epsilon(1e-14));
    const double non_saturating = -(log_sigmoid_ref(0.5) + log_sigmoid_ref(-3)) / 2;
    CHECK(generator_loss(Objective::kNonSaturating, f).as_scalar() ==
          Approx(non_saturating).epsilon(1e-14));
  }
  SECTION("least squares (Mao et al. 2017), a = −1, b = 1, c = 0 and a = 0, b = c = 1") {
    const V lr = scores({1, 0}), lf = scores({-1, 1});
    CHECK(discriminator_loss(Objective::kLeastSquares, lr, lf).as_scalar() ==
          Approx(0.5 * 0.5 + 0.5 * 2.0));
    CHECK(generator_loss(Objective::kLeastSquares, lf).as_scalar() == Approx(0.5));
    const LeastSquaresTargets zero_one{0, 1, 1};
    CHECK(discriminator_loss(Objective::kLeastSquares, lr, lf, zero_one).as_scalar() ==
          Approx(0.5 * 0.5 + 0.5 * 1.0));
    CHECK(generator_loss(Objective::kLeastSquares, lf, zero_one).as_scalar() == Approx(0.5 * 2.0));
  }
  SECTION("hinge (Miyato et al. 2018)") {
    const V hr = scores({0.5, 2}), hf = scores({-2, 0.3});
    CHECK(discriminator_loss(Objective::kHinge, hr, hf).as_scalar() == Approx(0.25 + 0.65));
    CHECK(generator_loss(Objective::kHinge, hf).as_scalar() == Approx(-(-2 + 0.3) / 2));
  }
  SECTION("wasserstein (Arjovsky et al. 2017)") {
    CHECK(discriminator_loss(Objective::kWasserstein, r, f).as_scalar() ==
          Approx((0.5 - 3) / 2 - (2 - 1) / 2.0));
    CHECK(generator_loss(Objective::kWasserstein, f).as_scalar() == Approx(-(0.5 - 3) / 2));
  }
  SECTION("stable at extreme logits") {
    const V big = scores({200, -200});
    CHECK(std::isfinite(discriminator_loss(Objective::kMinimax, big, big).as_scalar()));
    CHECK(generator_loss(Objective::kNonSaturating, scores({-200})).as_scalar() == Approx(200));
  }
  CHECK(objective_named("hinge").objective == Objective::kHinge);
  CHECK_THROWS_WITH(objective_named("hing"), Catch::Contains("'hing'") && Catch::Contains("hinge"));
  // The table holds each objective once, under its own enum value, and says which are logistic
  // (their scores are logits: Goodfellow et al. 2014's D = σ(score)).
  std::vector<std::string> names;
  for (const ObjectiveInfo& o : objectives()) {
    names.push_back(o.name);
    CHECK(&objective_info(o.objective) == &o);
    CHECK(o.logistic ==
          (o.objective == Objective::kMinimax || o.objective == Objective::kNonSaturating));
  }
  CHECK(names == std::vector<std::string>{"minimax", "non-saturating", "least-squares", "hinge",
                                          "wasserstein"});
}

namespace {
// A small nonlinear critic on [N, 3] inputs: D(x) = Σ_j tanh(x·W)_j·v_j, one score per row.
struct TinyCritic {
  D w = D::from_values({3, 2}, {0.7, -0.4, 0.2, 0.9, -0.5, 0.3});
  D v = D::from_values({2, 1}, {1.3, -0.8});
  double at(const double* x) const {  // plain C++ evaluation for finite differences
    double s = 0;
    for (int j = 0; j < 2; ++j) {
      double z = 0;
      for (int i = 0; i < 3; ++i) z += x[i] * w.at({i, j});
      s += std::tanh(z) * v.at({j, 0});
    }
    return s;
  }
  // ‖∇D(x)‖² by central differences with h = 1e-6.
  double squared_gradient_norm(double* x) const {
    double total = 0;
    for (int i = 0; i < 3; ++i) {
      const double h = 1e-6, keep = x[i];
      x[i] = keep + h;
      const double up = at(x);
      x[i] = keep - h;
      const double down = at(x);
      x[i] = keep;
      total += std::pow((up - down) / (2 * h), 2);
    }
    return total;
  }
};
}  // namespace

TEST_CASE(
    "the gradient penalty equals an independent finite-difference computation (Gulrajani et al. "
    "2017)",
    "[objectives][second-order]") {
  TinyCritic critic;
  const D real = D::from_values({2, 3}, {0.5, -1.0, 0.3, 1.2, 0.4, -0.7});
  const D fake = D::from_values({2, 3}, {-0.2, 0.8, 1.1, 0.1, -0.9, 0.6});
  Tape<double> tape;
  const V w = tape.variable(critic.w);
  Critic<double> fn = [&](const V& x) { return matmul(tanh(matmul(x, w)), V(critic.v)); };
  Rng rng(7, 3);
  const V penalty = gradient_penalty(fn, real, fake, tape, rng, 10.0);

  // Independent: the same ε (the first draw of the same stream), central differences for ∇D.
  Rng same(7, 3);
  const D eps = same.uniform<double>({2, 1});
  double expected = 0;
  for (int n = 0; n < 2; ++n) {
    double x[3];
    for (int i = 0; i < 3; ++i)
      x[i] = eps.at({n, 0}) * real.at({n, i}) + (1 - eps.at({n, 0})) * fake.at({n, i});
    expected += std::pow(std::sqrt(critic.squared_gradient_norm(x)) - 1, 2) / 2;
  }
  CHECK(penalty.as_scalar() == Approx(10 * expected).epsilon(1e-7));

  // The penalty's gradient with respect to the critic's weights flows through the recorded
  // backward pass; compare one entry with a difference of penalties.
  const double analytic = tape.gradient(penalty, {w})[0].value().at({1, 0});
  auto penalty_with = [&](double delta) {
    Tape<double> t;
    D moved = critic.w.clone();
    moved.mutable_data()[2] += delta;  // entry (1, 0)
    const V wm = t.variable(moved);
    Critic<double> f2 = [&](const V& x) { return matmul(tanh(matmul(x, wm)), V(critic.v)); };
    Rng again(7, 3);
    return gradient_penalty(f2, real, fake, t, again, 10.0).as_scalar();
  };
  CHECK(analytic == Approx((penalty_with(1e-6) - penalty_with(-1e-6)) / 2e-6).epsilon(1e-6));
}

TEST_CASE("R1 equals (γ/2)·E‖∇D(x)‖² by finite differences (Mescheder et al. 2018)",
          "[objectives][second-order]") {
  TinyCritic critic;
  const D real = D::from_values({2, 3}, {0.5, -1.0, 0.3, 1.2, 0.4, -0.7});
  Tape<double> tape;
  Critic<double> fn = [&](const V& x) { return matmul(tanh(matmul(x, V(critic.w))), V(critic.v)); };
  const double r1 = r1_penalty(fn, real, tape, 10.0).as_scalar();
  double expected = 0;
  for (int n = 0; n < 2; ++n) {
    double x[3] = {real.at({n, 0}), real.at({n, 1}), real.at({n, 2})};
    expected += critic.squared_gradient_norm(x) / 2;
  }
  CHECK(r1 == Approx(5 * expected).epsilon(1e-7));
}

TEST_CASE(
    "every objective's losses and both penalties pass first- and second-order gradient checks",
    "[objectives][gradient]") {
  for (const GradientCase& c : objective_gradient_cases()) {
    const GradientCheckResult first = check_first_order(c), second = check_second_order(c);
    INFO(c.name << ": first " << first.max_rel_error << ", second " << second.max_rel_error);
    CHECK(first.max_rel_error <= 1e-6);
    CHECK(second.max_rel_error <= 1e-4);
  }
}
