// Tests of engine/optimizer.h against re-derivations written plainly in this file: Adam from
// Kingma & Ba 2015, Algorithm 1; decoupled weight decay from Loshchilov & Hutter 2019;
// heavy-ball momentum and RMSProp from their update rules (see each test). The reference
// loops work in double on std::vector and share no code with the implementation.
#include <algorithm>
#include <catch2/catch.hpp>
#include <cmath>
#include <cstring>
#include <functional>
#include <limits>
#include <memory>
#include <string>
#include <vector>

#include "engine/archive.h"
#include "engine/error.h"
#include "engine/optimizer.h"
#include "engine/tensor.h"
#include "tests/support.h"

namespace {

using spar::testing::error_kind_of;
using spar::testing::same_bits;

using spar::Adam;
using spar::AdamOptions;
using spar::ErrorKind;
using spar::MomentumSgd;
using spar::MomentumSgdOptions;
using spar::Optimizer;
using spar::RmsProp;
using spar::RmsPropOptions;
using spar::Shape;
using spar::Tensor;

// The test problem: f(θ) = ½ Σ a_k (θ_k − c_k)², gradient a_k (θ_k − c_k), over six values
// split into two parameter tensors of shapes [2, 2] and [2]. All constants are exact in
// float, so float and double runs start from identical values.
const std::vector<double> kCurvature = {0.5, 2, 8, 0.125, 32, 1};
const std::vector<double> kCentre = {1, -2, 0.25, 3, -0.5, 4};
const std::vector<double> kStart = {-1, 1, 2, -2, 0.75, 0.5};

template <class T>
std::vector<Tensor<T>> start_params() {
  return {
      Tensor<T>::from_values(Shape{2, 2}, {T(kStart[0]), T(kStart[1]), T(kStart[2]), T(kStart[3])}),
      Tensor<T>::from_values(Shape{2}, {T(kStart[4]), T(kStart[5])})};
}

// The gradient of the test problem at the current parameters, computed in T.
template <class T>
std::vector<Tensor<T>> quadratic_grads(const std::vector<Tensor<T>>& params) {
  std::vector<Tensor<T>> grads;
  size_t k = 0;
  for (const Tensor<T>& p : params) {
    Tensor<T> g = Tensor<T>::uninitialised(p.shape());
    for (int64_t i = 0; i < p.element_count(); ++i, ++k)
      g.mutable_data()[i] = T(kCurvature[k]) * (p.data()[i] - T(kCentre[k]));
    grads.push_back(g);
  }
  return grads;
}

template <class T>
std::vector<Tensor<T>*> pointers(std::vector<Tensor<T>>& params) {
  std::vector<Tensor<T>*> out;
  for (Tensor<T>& p : params) out.push_back(&p);
  return out;
}

template <class T>
std::vector<double> flatten(const std::vector<Tensor<T>>& params) {
  std::vector<double> out;
  for (const Tensor<T>& p : params)
    for (int64_t i = 0; i < p.element_count(); ++i) out.push_back(static_cast<double>(p.data()[i]));
  return out;
}

template <class T>
void run_steps(Optimizer<T>& opt, std::vector<Tensor<T>>& params, int steps) {
  for (int s = 0; s < steps; ++s) opt.step(pointers(params), quadratic_grads(params));
}

// Kingma & Ba 2015, Algorithm 1, re-derived in double, with decoupled weight decay
// (θ ← θ − α·λ·θ, using θ before the step) when lambda > 0. Also reports the figures the
// float tolerance below is built from.
struct AdamTrajectory {
  std::vector<double> theta;
  double max_abs_theta = 0;     // over all steps
  double max_step = 0;          // largest |θ_t − θ_{t−1}|
  double min_distance = 1e300;  // smallest |θ − c| at which a gradient was taken
};

AdamTrajectory adam_reference(double alpha, double beta1, double beta2, double eps, double lambda,
                              int steps) {
  AdamTrajectory r;
  std::vector<double> theta = kStart, m(theta.size(), 0.0), v(theta.size(), 0.0);
  for (int t = 1; t <= steps; ++t) {
    for (size_t k = 0; k < theta.size(); ++k) {
      r.min_distance = std::min(r.min_distance, std::abs(theta[k] - kCentre[k]));
      const double g = kCurvature[k] * (theta[k] - kCentre[k]);
      m[k] = beta1 * m[k] + (1 - beta1) * g;
      v[k] = beta2 * v[k] + (1 - beta2) * g * g;
      const double m_hat = m[k] / (1 - std::pow(beta1, t));
      const double v_hat = v[k] / (1 - std::pow(beta2, t));
      const double next =
          theta[k] - alpha * m_hat / (std::sqrt(v_hat) + eps) - alpha * lambda * theta[k];
      r.max_step = std::max(r.max_step, std::abs(next - theta[k]));
      theta[k] = next;
      r.max_abs_theta = std::max(r.max_abs_theta, std::abs(next));
    }
  }
  r.theta = theta;
  return r;
}

// A fixed gradient sequence for the momentum and RMSProp comparisons: it does not depend on
// θ, so rounding errors do not feed back into it. Multiples of 0.25 in [−0.75, 1.75]: exact
// in float, with zeros and sign changes, positive on average so that θ drifts.
double fixed_gradient(int t, size_t k) {
  return (static_cast<int>((7 * t + 3 * k) % 11) - 3) * 0.25;
}

template <class T>
std::vector<Tensor<T>> fixed_grads(int t) {
  std::vector<T> g(kStart.size());
  for (size_t k = 0; k < g.size(); ++k) g[k] = T(fixed_gradient(t, k));
  return {Tensor<T>::from_values(Shape{2, 2}, {g[0], g[1], g[2], g[3]}),
          Tensor<T>::from_values(Shape{2}, {g[4], g[5]})};
}

constexpr double kFloatRounding = 1.0 / (1 << 24);  // u = 2^-24, float's unit roundoff

}  // namespace

TEMPLATE_TEST_CASE("adam's first step is -lr*g/(|g|+eps), about -lr*sign(g)", "[optimizer]", float,
                   double) {
  using T = TestType;
  // Kingma & Ba 2015, Algorithm 1, at t = 1: m̂ = g and v̂ = g², so the step is
  // −α·g/(|g| + ε) whatever β1 and β2 are.
  const std::vector<double> g = {3e-4, -2.5, 1e3, -7e-7, 40, -1e-2};
  // The defaults, and a GAN-style setting.
  AdamOptions gan_style;
  gan_style.learning_rate = 2e-4;
  gan_style.beta1 = 0.5;
  gan_style.beta2 = 0.9;
  gan_style.epsilon = 1e-8;
  gan_style.decoupled_weight_decay = 0;
  for (const AdamOptions options : {AdamOptions{}, gan_style}) {
    Adam<T> adam(options);
    std::vector<Tensor<T>> params = {Tensor<T>::zeros(Shape{2, 3})};
    std::vector<T> gt(g.begin(), g.end());
    adam.step(pointers(params), {Tensor<T>::from_values(Shape{2, 3}, gt)});
    CHECK(adam.steps_taken() == 1);
    const double lr = options.learning_rate;
    for (size_t k = 0; k < g.size(); ++k) {
      INFO("element " << k << ", g = " << g[k]);
      const double gk = static_cast<double>(gt[k]);
      const double expected = -lr * gk / (std::abs(gk) + options.epsilon);
      const double got = static_cast<double>(params[0].data()[k]);
      // About a dozen roundings in T of at most u = epsilon/2 relative each (≈ 6·epsilon).
      CHECK(std::abs(got - expected) <=
            10 * std::numeric_limits<T>::epsilon() * std::abs(expected));
      // ≈ −α·sign(g): off by α·ε/(|g| + ε) only.
      CHECK(std::abs(got + lr * (gk > 0 ? 1 : -1)) <=
            lr * options.epsilon / std::abs(gk) + 10 * std::numeric_limits<T>::epsilon() * lr);
    }
  }
}

TEMPLATE_TEST_CASE("adam follows Algorithm 1 over 50 steps", "[optimizer]", float, double) {
  using T = TestType;
  const int steps = 50;
  // Two settings: the paper's β1, β2 and ε at a larger step, and a GAN-style one with decay.
  AdamOptions paper;
  paper.learning_rate = 1e-2;
  paper.beta1 = 0.9;
  paper.beta2 = 0.999;
  paper.epsilon = 1e-8;
  paper.decoupled_weight_decay = 0;
  AdamOptions gan_style;
  gan_style.learning_rate = 1e-2;
  gan_style.beta1 = 0.5;
  gan_style.beta2 = 0.9;
  gan_style.epsilon = 1e-8;
  gan_style.decoupled_weight_decay = 0.1;
  for (const AdamOptions options : {paper, gan_style}) {
    INFO("beta1 " << options.beta1 << ", weight decay " << options.decoupled_weight_decay);
    Adam<T> adam(options);
    std::vector<Tensor<T>> params = start_params<T>();
    run_steps(adam, params, steps);
    CHECK(adam.steps_taken() == steps);
    const std::vector<double> got = flatten(params);
    const AdamTrajectory ref =
        adam_reference(options.learning_rate, options.beta1, options.beta2, options.epsilon,
                       options.decoupled_weight_decay, steps);
    // Float tolerance. Each step rounds the stored θ (at most u·max|θ|) and computes the
    // step Δ through about a dozen float operations (at most 12·u·max|Δ|). Earlier errors feed
    // back through the gradient: Adam's step α·m̂/√v̂ is unchanged when all gradients are
    // scaled together, so a shift δ in θ changes the next step by about α·δ/|θ − c|; with
    // |θ − c| ≥ 0.5 (required below) and α = 0.01 that is ≤ 0.02·δ per step, a growth of at
    // most 1.02^50 ≈ 2.7 over 50 steps, rounded up to 3.
    REQUIRE(ref.min_distance >= 0.5);
    const double tol_float = 3.0 * steps * (ref.max_abs_theta + 12 * ref.max_step) * kFloatRounding;
    for (size_t k = 0; k < ref.theta.size(); ++k) {
      const double want = ref.theta[k];
      INFO("element " << k << ": got " << got[k] << ", want " << want << ", float tolerance "
                      << tol_float);
      REQUIRE(std::abs(want) > 0.1);              // so that a relative tolerance is meaningful
      REQUIRE(std::abs(want - kStart[k]) > 0.2);  // θ really moved
      if (std::is_same<T, double>::value)
        CHECK(std::abs(got[k] - want) <= 1e-12 * std::abs(want));
      else
        CHECK(std::abs(got[k] - want) <= tol_float);
    }
  }
}

TEMPLATE_TEST_CASE("decoupled weight decay with a zero gradient shrinks by exactly (1 - lr*lambda)",
                   "[optimizer]", float, double) {
  using T = TestType;
  // Loshchilov & Hutter 2019: the decay is applied to θ directly, not through the moments,
  // so with g = 0 (m = v = 0, and the Adam term 0/(0 + ε) = 0) only the decay acts.
  const double lr = 0.01, lambda = 0.5;
  AdamOptions options;
  options.learning_rate = lr;
  options.beta1 = 0.9;
  options.beta2 = 0.999;
  options.epsilon = 1e-8;
  options.decoupled_weight_decay = lambda;
  Adam<T> adam(options);
  std::vector<Tensor<T>> params = {
      Tensor<T>::from_values(Shape{4}, {T(1), T(-3), T(1e-20), T(12345)})};
  const std::vector<Tensor<T>> zero = {Tensor<T>::zeros(Shape{4})};
  const std::vector<double> start = flatten(params);
  const double factor = 1 - lr * lambda;
  const double u = std::numeric_limits<T>::epsilon();
  for (int s = 1; s <= 20; ++s) {
    const std::vector<double> before = flatten(params);
    adam.step(pointers(params), zero);
    const std::vector<double> after = flatten(params);
    for (size_t k = 0; k < after.size(); ++k) {
      // Rounding the factor to T and rounding the product: at most one epsilon relative.
      CHECK(std::abs(after[k] - before[k] * factor) <= u * std::abs(before[k]));
      CHECK(std::abs(after[k] - start[k] * std::pow(factor, s)) <= s * u * std::abs(start[k]));
    }
  }
}

TEMPLATE_TEST_CASE("momentum SGD and RMSProp follow their update rules", "[optimizer]", float,
                   double) {
  using T = TestType;
  const double u = std::numeric_limits<T>::epsilon();

  SECTION("heavy ball, hand-computed: g = 1 constant, mu = 0.5, lr = 0.1") {
    // velocity: 1, 1.5, 1.75; θ: 1 − 0.1, − 0.15, − 0.175 = 0.9, 0.75, 0.575 (by hand).
    MomentumSgdOptions options;
    options.learning_rate = 0.1;
    options.momentum = 0.5;
    MomentumSgd<T> sgd(options);
    std::vector<Tensor<T>> params = {Tensor<T>::scalar(T(1))};
    const std::vector<Tensor<T>> one = {Tensor<T>::scalar(T(1))};
    for (double want : {0.9, 0.75, 0.575}) {
      sgd.step(pointers(params), one);
      CHECK(std::abs(static_cast<double>(params[0].as_scalar()) - want) <= 4 * u);
    }
  }
  SECTION("RMSProp, hand-computed: g = 2 constant, rho = 0.75, lr = 0.1") {
    // s1 = 0.25·4 = 1, θ1 = 1 − 0.2/(1 + ε) ≈ 0.8; s2 = 0.75 + 1 = 1.75,
    // θ2 = 0.8 − 0.2/√1.75 ≈ 0.6488142 (by hand; ε = 1e-8 shifts these by < 1e-8).
    RmsPropOptions options;
    options.learning_rate = 0.1;
    options.decay = 0.75;
    options.epsilon = 1e-8;
    RmsProp<T> rms(options);
    std::vector<Tensor<T>> params = {Tensor<T>::scalar(T(1))};
    const std::vector<Tensor<T>> two = {Tensor<T>::scalar(T(2))};
    for (double want : {0.8, 0.6488142}) {
      rms.step(pointers(params), two);
      CHECK(std::abs(static_cast<double>(params[0].as_scalar()) - want) <= 1e-7 + 4 * u);
    }
  }
  SECTION("30 steps of a fixed gradient sequence against re-derivations in double") {
    const int steps = 30;
    const double lr = 0.01, mu = 0.9, rho = 0.9, eps = 1e-8;
    // Heavy ball: velocity ← μ·velocity + g; θ ← θ − lr·velocity.
    std::vector<double> sgd_theta = kStart, velocity(kStart.size(), 0.0);
    // RMSProp (Tieleman & Hinton 2012): s ← ρs + (1−ρ)g²; θ ← θ − lr·g/(√s + ε).
    std::vector<double> rms_theta = kStart, s(kStart.size(), 0.0);
    double max_theta = 0, max_velocity = 0, max_rms_step = 0;
    for (int t = 0; t < steps; ++t) {
      for (size_t k = 0; k < kStart.size(); ++k) {
        const double g = fixed_gradient(t, k);
        velocity[k] = mu * velocity[k] + g;
        sgd_theta[k] -= lr * velocity[k];
        s[k] = rho * s[k] + (1 - rho) * g * g;
        const double rms_step = lr * g / (std::sqrt(s[k]) + eps);
        rms_theta[k] -= rms_step;
        max_velocity = std::max(max_velocity, std::abs(velocity[k]));
        max_rms_step = std::max(max_rms_step, std::abs(rms_step));
        max_theta = std::max({max_theta, std::abs(sgd_theta[k]), std::abs(rms_theta[k])});
      }
    }
    MomentumSgdOptions sgd_options;
    sgd_options.learning_rate = lr;
    sgd_options.momentum = mu;
    RmsPropOptions rms_options;
    rms_options.learning_rate = lr;
    rms_options.decay = rho;
    rms_options.epsilon = eps;
    MomentumSgd<T> sgd(sgd_options);
    RmsProp<T> rms(rms_options);
    std::vector<Tensor<T>> p_sgd = start_params<T>(), p_rms = start_params<T>();
    for (int t = 0; t < steps; ++t) {
      sgd.step(pointers(p_sgd), fixed_grads<T>(t));
      rms.step(pointers(p_rms), fixed_grads<T>(t));
    }
    // Float tolerances, first-order rounding analysis with u = 2^-24, doubled to cover the
    // second-order terms dropped:
    //  momentum: velocity ← fl(μ)·velocity + g makes three roundings of size ≤ u·V (V the
    //    largest |velocity|) and contracts earlier ones by μ, so its error stays below
    //    3uV/(1 − μ); each θ update adds lr times that plus 3u·lr·V (lr, product) and u·max|θ|.
    //  RMSProp: s is a sum of non-negative terms, so its relative error grows by ≤ 3u a step
    //    (≤ 3nu after n); the step lr·g/(√s + ε) then has relative error ≤ 1.5nu + 4u, and
    //    storing θ adds u·max|θ|.
    const double r = kFloatRounding;
    const double tol_sgd =
        2 * steps *
        (lr * 3 * r * max_velocity / (1 - mu) + 3 * r * lr * max_velocity + r * max_theta);
    const double tol_rms = 2 * steps * (max_rms_step * (1.5 * steps + 4) * r + r * max_theta);
    const std::vector<double> got_sgd = flatten(p_sgd), got_rms = flatten(p_rms);
    for (size_t k = 0; k < kStart.size(); ++k) {
      INFO("element " << k << ": sgd " << got_sgd[k] << " vs " << sgd_theta[k] << ", rmsprop "
                      << got_rms[k] << " vs " << rms_theta[k]);
      REQUIRE(std::abs(sgd_theta[k] - kStart[k]) > 0.01);  // both really moved
      REQUIRE(std::abs(rms_theta[k] - kStart[k]) > 0.01);
      if (std::is_same<T, double>::value) {
        CHECK(std::abs(got_sgd[k] - sgd_theta[k]) <= 1e-12 * std::max(1.0, std::abs(sgd_theta[k])));
        CHECK(std::abs(got_rms[k] - rms_theta[k]) <= 1e-12 * std::max(1.0, std::abs(rms_theta[k])));
      } else {
        CHECK(std::abs(got_sgd[k] - sgd_theta[k]) <= tol_sgd);
        CHECK(std::abs(got_rms[k] - rms_theta[k]) <= tol_rms);
      }
    }
  }
}

TEMPLATE_TEST_CASE("save, restore through bytes, continue: bit-identical", "[optimizer]", float,
                   double) {
  using T = TestType;
  using Factory = std::function<std::unique_ptr<Optimizer<T>>()>;
  const std::vector<std::pair<std::string, Factory>> methods = {
      {"adam",
       [] {
         AdamOptions options;
         options.learning_rate = 1e-2;
         options.beta1 = 0.5;
         options.beta2 = 0.9;
         options.epsilon = 1e-8;
         options.decoupled_weight_decay = 0.01;
         return std::make_unique<Adam<T>>(options);
       }},
      {"momentum-sgd",
       [] {
         MomentumSgdOptions options;
         options.learning_rate = 1e-2;
         options.momentum = 0.9;
         return std::make_unique<MomentumSgd<T>>(options);
       }},
      {"rmsprop",
       [] {
         RmsPropOptions options;
         options.learning_rate = 1e-3;
         options.decay = 0.9;
         options.epsilon = 1e-8;
         return std::make_unique<RmsProp<T>>(options);
       }},
  };
  const int before = 7, after = 5;
  for (const auto& method : methods) {
    INFO(method.first);
    auto original = method.second();
    std::vector<Tensor<T>> params = start_params<T>();
    run_steps(*original, params, before);
    original->set_learning_rate(original->learning_rate() * 0.5);  // state beyond the options

    spar::Archive saved;
    saved.put_text("other", "records of other owners are left alone");
    original->save(saved, "opt/" + method.first);
    const spar::Archive restored = spar::Archive::from_bytes(saved.to_bytes(), "restored");

    std::vector<Tensor<T>> params_copy = {params[0].clone(), params[1].clone()};
    auto resumed = method.second();
    resumed->load(restored, "opt/" + method.first);
    CHECK(resumed->steps_taken() == before);
    CHECK(resumed->learning_rate() == original->learning_rate());

    // Control: a fresh optimiser that did not load the state goes elsewhere, so the
    // comparison below can tell restored state from lost state.
    auto fresh = method.second();
    fresh->set_learning_rate(original->learning_rate());
    std::vector<Tensor<T>> params_fresh = {params[0].clone(), params[1].clone()};

    run_steps(*original, params, after);
    run_steps(*resumed, params_copy, after);
    run_steps(*fresh, params_fresh, after);
    CHECK(same_bits(params[0], params_copy[0]));
    CHECK(same_bits(params[1], params_copy[1]));
    CHECK_FALSE((same_bits(params[0], params_fresh[0]) && same_bits(params[1], params_fresh[1])));
    CHECK(resumed->steps_taken() == before + after);

    // State saved under one method does not load into another.
    std::unique_ptr<Optimizer<T>> other;
    if (method.first == "adam")
      other = std::make_unique<RmsProp<T>>();
    else
      other = std::make_unique<Adam<T>>();
    std::string message;
    CHECK(error_kind_of([&] { other->load(restored, "opt/" + method.first); }, &message) ==
          ErrorKind::kCorruptCheckpoint);
    CHECK(message.find("method") != std::string::npos);
    // A missing record names itself, and a failed load changes nothing.
    const int64_t steps_before = other->steps_taken();
    CHECK(error_kind_of([&] { other->load(restored, "nowhere"); }, &message) ==
          ErrorKind::kCorruptCheckpoint);
    CHECK(message.find("'nowhere/method'") != std::string::npos);
    CHECK(other->steps_taken() == steps_before);
  }
}

TEST_CASE("optimiser state of the other dtype is refused", "[optimizer]") {
  Adam<float> f;
  std::vector<Tensor<float>> params = start_params<float>();
  run_steps(f, params, 2);
  spar::Archive a;
  f.save(a, "g");
  Adam<double> d;
  std::string message;
  CHECK(error_kind_of([&] { d.load(a, "g"); }, &message) == ErrorKind::kCorruptCheckpoint);
  CHECK(message.find("'g/m/0'") != std::string::npos);
  CHECK(d.steps_taken() == 0);
}

TEMPLATE_TEST_CASE("step leaves tensors that shared the old parameter storage unchanged",
                   "[optimizer]", float, double) {
  using T = TestType;
  std::vector<std::unique_ptr<Optimizer<T>>> methods;
  methods.push_back(std::make_unique<Adam<T>>());
  MomentumSgdOptions with_momentum;
  with_momentum.learning_rate = 0.1;
  with_momentum.momentum = 0.9;
  methods.push_back(std::make_unique<MomentumSgd<T>>(with_momentum));
  methods.push_back(std::make_unique<RmsProp<T>>());
  for (auto& opt : methods) {
    std::vector<Tensor<T>> params = start_params<T>();
    const Tensor<T> shared = params[0];  // shares storage, as a recorded tape would
    const Tensor<T> snapshot = params[0].clone();
    const std::vector<Tensor<T>> grads = quadratic_grads(params);
    opt->step(pointers(params), grads);
    CHECK(same_bits(shared, snapshot));
    CHECK(params[0].data() != shared.data());
    CHECK_FALSE(same_bits(params[0], snapshot));  // the parameter did move
    CHECK(shared.use_count() == 1);               // the parameter let go of the old storage
  }
}

TEMPLATE_TEST_CASE("mismatched lists and shapes raise kBadShape and change nothing", "[optimizer]",
                   float, double) {
  using T = TestType;
  Adam<T> adam;
  std::vector<Tensor<T>> params = {Tensor<T>::zeros(Shape{2, 3}), Tensor<T>::zeros(Shape{4})};
  std::string message;

  CHECK(error_kind_of(
            [&] {
              adam.step(pointers(params),
                        {Tensor<T>::zeros(Shape{2, 3}), Tensor<T>::zeros(Shape{3, 2})});
            },
            &message) == ErrorKind::kBadShape);
  CHECK(message.find("parameter 1") != std::string::npos);
  CHECK(message.find("[4]") != std::string::npos);
  CHECK(message.find("[3, 2]") != std::string::npos);
  CHECK(error_kind_of([&] {
          adam.step(pointers(params), {Tensor<T>::zeros(Shape{2, 3})});
        }) == ErrorKind::kBadShape);
  CHECK(adam.steps_taken() == 0);

  const std::vector<Tensor<T>> grads = {Tensor<T>::full(Shape{2, 3}, T(1)),
                                        Tensor<T>::full(Shape{4}, T(1))};
  adam.step(pointers(params), grads);
  const Tensor<T> after_one = params[0];
  // The list must keep its shapes once the state exists.
  std::vector<Tensor<T>> reshaped = {Tensor<T>::zeros(Shape{3, 2}), params[1]};
  CHECK(error_kind_of(
            [&] {
              adam.step(pointers(reshaped), {Tensor<T>::zeros(Shape{3, 2}), grads[1]});
            },
            &message) == ErrorKind::kBadShape);
  CHECK(message.find("parameter 0") != std::string::npos);
  CHECK(message.find("[3, 2]") != std::string::npos);
  CHECK(message.find("[2, 3]") != std::string::npos);
  std::vector<Tensor<T>> shorter = {params[0]};
  CHECK(error_kind_of([&] { adam.step(pointers(shorter), {grads[0]}); }) == ErrorKind::kBadShape);
  CHECK(adam.steps_taken() == 1);
  CHECK(params[0].data() == after_one.data());
}

TEST_CASE("option values outside their ranges raise kBadArgument", "[optimizer]") {
  std::string message;
  CHECK(error_kind_of(
            [] {
              AdamOptions options;
              options.learning_rate = 1e-3;
              options.beta1 = 1.0;  // out of range
              options.beta2 = 0.999;
              options.epsilon = 1e-8;
              options.decoupled_weight_decay = 0;
              Adam<float>{options};
            },
            &message) == ErrorKind::kBadArgument);
  CHECK(message.find("beta1") != std::string::npos);
  CHECK(error_kind_of([] {
          AdamOptions options;
          options.learning_rate = -1;  // out of range
          options.beta1 = 0.9;
          options.beta2 = 0.999;
          options.epsilon = 1e-8;
          options.decoupled_weight_decay = 0;
          Adam<float>{options};
        }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([] {
          AdamOptions options;
          options.learning_rate = 1e-3;
          options.beta1 = 0.9;
          options.beta2 = 0.999;
          options.epsilon = 0;  // out of range
          options.decoupled_weight_decay = 0;
          Adam<float>{options};
        }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([] {
          AdamOptions options;
          options.learning_rate = 1e-3;
          options.beta1 = 0.9;
          options.beta2 = 0.999;
          options.epsilon = 1e-8;
          options.decoupled_weight_decay = -1;  // out of range
          Adam<float>{options};
        }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([] {
          MomentumSgdOptions options;
          options.learning_rate = 0.1;
          options.momentum = 1.5;  // out of range
          MomentumSgd<double>{options};
        }) == ErrorKind::kBadArgument);
  CHECK(error_kind_of([] {
          RmsPropOptions options;
          options.learning_rate = 0.1;
          options.decay = -0.1;  // out of range
          options.epsilon = 1e-8;
          RmsProp<double>{options};
        }) == ErrorKind::kBadArgument);
  RmsProp<double> rms;
  CHECK(error_kind_of([&] { rms.set_learning_rate(std::nan("")); }) == ErrorKind::kBadArgument);
  CHECK(rms.learning_rate() == 1e-3);
}

namespace {
// One optimiser type's learning rate, through options() and learning_rate(), after
// set_learning_rate and load: one value, and the one the steps use.
template <class Method, class Options>
void check_learning_rate_has_one_home(const Options& constructed) {
  Method method(constructed);
  CHECK(method.options().learning_rate == constructed.learning_rate);
  method.set_learning_rate(0.25);
  CHECK(method.learning_rate() == 0.25);
  CHECK(method.options().learning_rate == 0.25);
  // A refused value changes nothing.
  CHECK(error_kind_of([&] { method.set_learning_rate(-1); }) == ErrorKind::kBadArgument);
  CHECK(method.options().learning_rate == 0.25);

  // The steps use it: bit for bit those of an optimiser constructed with 0.25.
  Options quarter = constructed;
  quarter.learning_rate = 0.25;
  Method reference(quarter);
  std::vector<Tensor<double>> a = start_params<double>(), b = start_params<double>();
  run_steps(method, a, 3);
  run_steps(reference, b, 3);
  CHECK(same_bits(a[0], b[0]));
  CHECK(same_bits(a[1], b[1]));

  // load brings the saved learning rate into the options; the other options stay as
  // constructed.
  spar::Archive saved;
  method.save(saved, "opt");
  Method loaded(constructed);
  loaded.load(saved, "opt");
  CHECK(loaded.learning_rate() == 0.25);
  CHECK(loaded.options().learning_rate == 0.25);
  // A load that fails leaves the learning rate as it was.
  Method untouched(constructed);
  spar::Archive damaged = saved;
  damaged.put_int("opt/parameters", -1);
  CHECK(error_kind_of([&] { untouched.load(damaged, "opt"); }) == ErrorKind::kCorruptCheckpoint);
  CHECK(untouched.options().learning_rate == constructed.learning_rate);
}
}  // namespace

TEST_CASE("options() reports the learning rate that set_learning_rate or load gave",
          "[optimizer]") {
  {
    INFO("adam");
    AdamOptions options;
    options.learning_rate = 1e-3;
    options.beta1 = 0.5;
    options.beta2 = 0.99;
    options.epsilon = 1e-8;
    options.decoupled_weight_decay = 0.1;
    check_learning_rate_has_one_home<Adam<double>>(options);
    Adam<double> adam(options);
    adam.set_learning_rate(0.25);
    CHECK(adam.options().beta1 == 0.5);  // the other options stay
    CHECK(adam.options().beta2 == 0.99);
    CHECK(adam.options().decoupled_weight_decay == 0.1);
  }
  {
    INFO("momentum-sgd");
    MomentumSgdOptions options;
    options.learning_rate = 1e-2;
    options.momentum = 0.9;
    check_learning_rate_has_one_home<MomentumSgd<double>>(options);
  }
  {
    INFO("rmsprop");
    RmsPropOptions options;
    options.learning_rate = 1e-3;
    options.decay = 0.9;
    options.epsilon = 1e-8;
    check_learning_rate_has_one_home<RmsProp<double>>(options);
  }
}

TEMPLATE_TEST_CASE("large tensors (threaded path) match small ones (serial path) bit for bit",
                   "[optimizer]", float, double) {
  using T = TestType;
  // 4 × 20000 elements: one tensor above the 2^15 threshold versus four below it, whose joint
  // chunks (parallel_for_chunks_of) cross from one tensor into the next.
  const int64_t part = 20000, n = 4 * part;
  std::vector<T> theta(n), grad(n);
  for (int64_t i = 0; i < n; ++i) {
    theta[i] = T(std::sin(0.001 * i));
    grad[i] = T(std::cos(0.0007 * i) * (1 + i % 7));
  }
  const auto slice = [](const std::vector<T>& v, int64_t begin, int64_t count) {
    return Tensor<T>::from_values(Shape{count},
                                  std::vector<T>(v.begin() + begin, v.begin() + begin + count));
  };
  std::vector<std::unique_ptr<Optimizer<T>>> big, small;
  AdamOptions adam_options;
  adam_options.learning_rate = 1e-2;
  adam_options.beta1 = 0.9;
  adam_options.beta2 = 0.999;
  adam_options.epsilon = 1e-8;
  adam_options.decoupled_weight_decay = 0.1;
  MomentumSgdOptions sgd_options;
  sgd_options.learning_rate = 1e-2;
  sgd_options.momentum = 0.9;
  big.push_back(std::make_unique<Adam<T>>(adam_options));
  small.push_back(std::make_unique<Adam<T>>(adam_options));
  big.push_back(std::make_unique<MomentumSgd<T>>(sgd_options));
  small.push_back(std::make_unique<MomentumSgd<T>>(sgd_options));
  big.push_back(std::make_unique<RmsProp<T>>());
  small.push_back(std::make_unique<RmsProp<T>>());
  for (size_t o = 0; o < big.size(); ++o) {
    std::vector<Tensor<T>> whole = {slice(theta, 0, n)};
    std::vector<Tensor<T>> parts, part_grads;
    for (int64_t b = 0; b < n; b += part) {
      parts.push_back(slice(theta, b, part));
      part_grads.push_back(slice(grad, b, part));
    }
    for (int s = 0; s < 3; ++s) {
      big[o]->step(pointers(whole), {slice(grad, 0, n)});
      small[o]->step(pointers(parts), part_grads);
    }
    for (int64_t b = 0; b < 4; ++b)
      CHECK(std::memcmp(whole[0].data() + b * part, parts[b].data(), part * sizeof(T)) == 0);
  }
}
