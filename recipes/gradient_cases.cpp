// Each objective's two losses as functions of the scores; the gradient penalty and R1 as
// functions of a small critic's weights and the data, so that their second-order path (the
// gradient of a recorded gradient) is checked against differences of gradients.
#include "recipes/gradient_cases.h"

#include "recipes/objectives.h"

namespace spar {
namespace {
using V = Var<double>;
using Vs = std::vector<V>;
using D = Tensor<double>;
}  // namespace

std::vector<GradientCase> objective_gradient_cases() {
  Rng rng(20240613, 1);
  std::vector<GradientCase> cases;
  const D real = rng.uniform<double>({5, 1}, -2, 2), fake = rng.uniform<double>({5, 1}, -2, 2);
  for (const ObjectiveInfo& info : objectives()) {
    // A loss with kinks (hinge's at scores ±1) gets scores within 0.8 of the kink's size.
    const Objective o = info.objective;
    const double k = 0.8 * info.kink;
    const D r = info.kink > 0 ? rng.uniform<double>({5, 1}, -k, k) : real;
    const D f = info.kink > 0 ? rng.uniform<double>({5, 1}, -k, k) : fake;
    cases.push_back({std::string(info.name) + " critic loss",
                     [o](const Vs& x) { return discriminator_loss(o, x[0], x[1]); },
                     {r, f}});
    cases.push_back({std::string(info.name) + " generator loss",
                     [o](const Vs& x) { return generator_loss(o, x[0]); },
                     {f}});
  }
  // A critic D(x) = tanh(x·W1)·w2 on [N, 3] data; the inputs are its weights W1 and w2 (the
  // penalties treat the data as constants). Finite-difference evaluations see constant
  // weights, so the penalty then runs on a tape of its own.
  const D w1 = rng.uniform<double>({3, 4}, -1, 1), w2 = rng.uniform<double>({4, 1}, -1, 1);
  const D xr = rng.uniform<double>({4, 3}, -1, 1), xf = rng.uniform<double>({4, 3}, -1, 1);
  using Penalty = std::function<V(const Critic<double>&, Tape<double>&)>;
  auto penalty_case = [&](const std::string& name, const Penalty& penalty) {
    cases.push_back({name,
                     [penalty](const Vs& x) {
                       auto critic = [](const V& a, const V& b) {
                         return Critic<double>(
                             [a, b](const V& in) { return matmul(tanh(matmul(in, a)), b); });
                       };
                       if (x[0].tape()) return penalty(critic(x[0], x[1]), *x[0].tape());
                       Tape<double> local;
                       const V a = local.variable(x[0].value()), b = local.variable(x[1].value());
                       return V(penalty(critic(a, b), local).value());
                     },
                     {w1, w2}});
  };
  penalty_case("gradient penalty (λ = 10)", [xr, xf](const Critic<double>& c, Tape<double>& tape) {
    Rng same(5, 5);  // the same mixing weights at every evaluation
    return gradient_penalty<double>(c, xr, xf, tape, same, 10.0);
  });
  penalty_case("R1 penalty (γ = 10)", [xr](const Critic<double>& c, Tape<double>& tape) {
    return r1_penalty<double>(c, xr, tape, 10.0);
  });
  return cases;
}

}  // namespace spar
