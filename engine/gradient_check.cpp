#include "engine/gradient_check.h"

#include <algorithm>
#include <cmath>

#include "engine/ops.h"
#include "engine/random.h"

namespace spar {
namespace {

std::string shapes_of(const std::vector<Tensor<double>>& xs) {
  std::string s;
  for (const Tensor<double>& x : xs) s += (s.empty() ? "" : " ") + x.shape().str();
  return s;
}

// The inputs are constants, so nothing the function computes from them is recorded (a
// function may still record on a tape of its own, as the gradient penalties do).
double value_at(const ScalarFunction& f, const std::vector<Tensor<double>>& xs) {
  std::vector<Var<double>> vars;
  for (const Tensor<double>& x : xs) vars.emplace_back(x);
  return f(vars).as_scalar();
}

std::vector<Tensor<double>> gradient_at(const ScalarFunction& f,
                                        const std::vector<Tensor<double>>& xs) {
  Tape<double> tape;
  std::vector<Var<double>> vars;
  for (const Tensor<double>& x : xs) vars.push_back(tape.variable(x));
  std::vector<Tensor<double>> out;
  for (const Var<double>& g : tape.gradient(f(vars), vars)) out.push_back(g.value());
  return out;
}

void compare(double analytic, double numeric, GradientCheckResult& r) {
  const double abs_err = std::abs(analytic - numeric);
  const double rel_err = abs_err / std::max({std::abs(analytic), std::abs(numeric), 1.0});
  // NaN in either fails the check (the comparisons below are false for NaN).
  if (!(abs_err <= r.max_abs_error)) r.max_abs_error = std::isnan(abs_err) ? NAN : abs_err;
  if (!(rel_err <= r.max_rel_error)) r.max_rel_error = std::isnan(rel_err) ? NAN : rel_err;
}

// x + t·v for every input.
std::vector<Tensor<double>> moved(const std::vector<Tensor<double>>& xs,
                                  const std::vector<Tensor<double>>& v, double t) {
  std::vector<Tensor<double>> out;
  for (size_t i = 0; i < xs.size(); ++i) {
    Tensor<double> y = xs[i].clone();
    for (int64_t j = 0; j < y.element_count(); ++j) y.mutable_data()[j] += t * v[i].data()[j];
    out.push_back(y);
  }
  return out;
}

}  // namespace

GradientCheckResult check_first_order(const GradientCase& c, const GradientCheckOptions& options) {
  GradientCheckResult r{c.name, shapes_of(c.inputs), 1, 0, 0, false};
  const std::vector<Tensor<double>> analytic = gradient_at(c.function, c.inputs);
  std::vector<Tensor<double>> xs;
  for (const Tensor<double>& x : c.inputs) xs.push_back(x.clone());
  const double h = options.step;
  for (size_t i = 0; i < xs.size(); ++i) {
    double* p = xs[i].mutable_data();  // our own clone: safe to move element by element
    for (int64_t j = 0; j < xs[i].element_count(); ++j) {
      const double x0 = p[j];
      p[j] = x0 + h;
      const double up = value_at(c.function, xs);
      p[j] = x0 - h;
      const double down = value_at(c.function, xs);
      p[j] = x0;
      compare(analytic[i].data()[j], (up - down) / (2 * h), r);
    }
  }
  r.passed = r.max_rel_error <= options.first_order_tolerance;
  return r;
}

GradientCheckResult check_second_order(const GradientCase& c, const GradientCheckOptions& options) {
  GradientCheckResult r{c.name, shapes_of(c.inputs), 2, 0, 0, false};
  Rng rng(20240611, 2);
  std::vector<Tensor<double>> v;
  for (const Tensor<double>& x : c.inputs) v.push_back(rng.uniform<double>(x.shape(), -1, 1));

  // Analytic: differentiate Σ_i ∇_i f · v_i through the recorded backward pass.
  std::vector<Tensor<double>> analytic;
  {
    Tape<double> tape;
    std::vector<Var<double>> vars;
    for (const Tensor<double>& x : c.inputs) vars.push_back(tape.variable(x));
    GradientOptions recorded;
    recorded.record = true;  // the backward pass is differentiated again below
    std::vector<Var<double>> g = tape.gradient(c.function(vars), vars, recorded);
    Var<double> s;
    for (size_t i = 0; i < g.size(); ++i) {
      Var<double> term = sum(multiply(g[i], Var<double>(v[i])));
      s = s.has_value() ? add(s, term) : term;
    }
    for (const Var<double>& hv : tape.gradient(s, vars)) analytic.push_back(hv.value());
  }
  const double e = options.direction_step;
  const std::vector<Tensor<double>> up = gradient_at(c.function, moved(c.inputs, v, e));
  const std::vector<Tensor<double>> down = gradient_at(c.function, moved(c.inputs, v, -e));
  for (size_t i = 0; i < analytic.size(); ++i)
    for (int64_t j = 0; j < analytic[i].element_count(); ++j)
      compare(analytic[i].data()[j], (up[i].data()[j] - down[i].data()[j]) / (2 * e), r);
  r.passed = r.max_rel_error <= options.second_order_tolerance;
  return r;
}

}  // namespace spar
