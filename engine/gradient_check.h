// Numerical verification of gradients: the tape's first- and second-order derivatives
// against central differences, in float64.
//
// First order: every element of every input is moved by ±h and
//   (f(x + h·e) − f(x − h·e)) / 2h
// is compared with the tape's gradient. Second order: for a random direction v, the
// Hessian-vector product obtained by differentiating the recorded backward pass,
//   ∇(Σ ∇f(x)·v),
// is compared with the difference of tape gradients (∇f(x + εv) − ∇f(x − εv)) / 2ε.
//
// Errors are reported per check as the largest absolute difference and the largest
// relative difference |a − n| / max(|a|, |n|, 1): relative for large values, absolute
// below 1, so entries that are zero up to rounding do not produce meaningless ratios.
//
// Thread safety: each call uses its own tape; distinct calls may run on distinct threads.
#pragma once

#include <functional>
#include <string>
#include <vector>

#include "engine/random.h"
#include "engine/tape.h"

namespace spar {

struct GradientCheckOptions {
  double step = 1e-6;                    // h for first order; rounding error ~1e-16/h
  double direction_step = 1e-4;          // ε for second order (differences of gradients)
  double first_order_tolerance = 1e-6;   // pass bar for the relative error, first order
  double second_order_tolerance = 1e-4;  // pass bar for the relative error, second order
};

// A scalar function of several tensors, written with the operations of ops.h.
using ScalarFunction = std::function<Var<double>(const std::vector<Var<double>>&)>;

// One named check: a function and the point at which it is verified.
struct GradientCase {
  std::string name;  // e.g. "multiply (per-channel)"
  ScalarFunction function;
  std::vector<Tensor<double>> inputs;
};

struct GradientCheckResult {
  std::string name;
  std::string shapes;  // input shapes, e.g. "[2, 3] [3]"
  int order = 1;       // 1 or 2
  double max_abs_error = 0;
  double max_rel_error = 0;
  bool passed = false;
};

GradientCheckResult check_first_order(const GradientCase& c,
                                      const GradientCheckOptions& options = {});
GradientCheckResult check_second_order(const GradientCase& c,
                                       const GradientCheckOptions& options = {});

// A case for an operation `op` whose output is folded into a scalar as Σ(w₁·y + w₂·y²) with
// w₁ ~ U(−1, 1) and w₂ ~ U(−0.5, 0.5) drawn once from `rng`, so that second-order checks also
// differentiate through op's adjoint. Evaluates op once (unrecorded) to learn its output shape.
GradientCase folded_case(const std::string& name,
                         const std::function<Var<double>(const std::vector<Var<double>>&)>& op,
                         std::vector<Tensor<double>> inputs, Rng& rng);

// Every engine operation, on random inputs of several shapes (including size-1 and
// broadcast axes), each output folded into a scalar by a fixed nonlinear random weighting
// so that second derivatives pass through the operation's adjoint.
std::vector<GradientCase> operation_gradient_cases();

}  // namespace spar
