// The adversarial objectives: for each, the discriminator's (critic's) loss and the
// generator's loss, written with engine operations, plus the two gradient penalties.
//
// All losses take the discriminator's raw outputs (logits, or critic scores), one per
// sample, shape [N, 1] or [N], and return a scalar to minimise. Sources:
//   minimax         Goodfellow et al. 2014: L_D = −E[log D(x)] − E[log(1 − D(G(z)))],
//                   L_G = E[log(1 − D(G(z)))] (the saturating form); D = σ(logit).
//   non-saturating  the same paper's heuristic: L_G = −E[log D(G(z))].
//   least squares   Mao et al. 2017: L_D = ½E[(D(x) − b)²] + ½E[(D(G(z)) − a)²],
//                   L_G = ½E[(D(G(z)) − c)²], with a = −1, b = 1, c = 0 by default.
//   hinge           Miyato et al. 2018: L_D = E[max(0, 1 − D(x))] + E[max(0, 1 + D(G(z)))],
//                   L_G = −E[D(G(z))].
//   wasserstein     Arjovsky et al. 2017 / Gulrajani et al. 2017: L_D = E[D(G(z))] − E[D(x)],
//                   L_G = −E[D(G(z))]; use with the gradient penalty below.
// log σ and log(1 − σ) are computed as −softplus(∓logit), stable for any logit.
//
// Thread safety: pure functions of their inputs (the penalties record on the given tape).
#pragma once

#include <functional>
#include <string>
#include <type_traits>
#include <vector>

#include "engine/ops.h"
#include "engine/random.h"

namespace spar {

enum class Objective { kMinimax, kNonSaturating, kLeastSquares, kHinge, kWasserstein };

// Targets of the least-squares objective: fake a, real b, and c, what G wants D to say.
struct LeastSquaresTargets {
  double fake = -1, real = 1, generator = 0;
};

// An objective's two losses for one element type, from the critic's scores.
template <class T>
struct ObjectiveLosses {
  Var<T> (*critic)(const Var<T>& real_scores, const Var<T>& fake_scores,
                   const LeastSquaresTargets& targets);
  Var<T> (*generator)(const Var<T>& fake_scores, const LeastSquaresTargets& targets);
};

// Every objective, declared once (the table in objectives.cpp): the recipe reader takes the
// accepted values of objective.name and their documentation from it, training its losses
// and how to report scores, `spar check-gradients` its cases. A new objective is one entry
// there (an enum value, its losses) plus its closed-form test in tests/test_objectives.cpp.
struct ObjectiveInfo {
  Objective objective;
  const char* name;   // in recipes: "non-saturating"
  const char* about;  // a phrase for the documentation, without parentheses
  bool logistic;      // scores are logits: σ(score) is the critic's probability of "real"
  double kink;        // |score| at which a loss has a kink (hinge: 1), 0 for none
  ObjectiveLosses<float> float_losses;
  ObjectiveLosses<double> double_losses;

  template <class T>
  const ObjectiveLosses<T>& losses() const {
    if constexpr (std::is_same_v<T, float>)
      return float_losses;
    else
      return double_losses;
  }
};

// Every objective, in the order the documentation lists them.
const std::vector<ObjectiveInfo>& objectives();
const ObjectiveInfo& objective_info(Objective objective);
// By its name in recipes; raises kBadRecipe for an unknown name, listing the valid ones.
const ObjectiveInfo& objective_named(const std::string& name);

template <class T>
Var<T> discriminator_loss(Objective objective, const Var<T>& real_scores, const Var<T>& fake_scores,
                          const LeastSquaresTargets& targets = {});
template <class T>
Var<T> generator_loss(Objective objective, const Var<T>& fake_scores,
                      const LeastSquaresTargets& targets = {});

// A critic as a function of its input batch, returning one score per sample.
template <class T>
using Critic = std::function<Var<T>(const Var<T>& x)>;

// Gulrajani et al. 2017: weight·E[(‖∇_x̂ D(x̂)‖₂ − 1)²] at x̂ = εx + (1 − ε)x̃, one ε ~ U[0, 1]
// per sample drawn from `rng`; real and fake are batches of equal shape [N, ...]. The norm
// is √(Σ g² + 1e-12), finite where g = 0. The gradient is recorded on `tape`, so the
// penalty can be differentiated with respect to the critic's parameters.
template <class T>
Var<T> gradient_penalty(const Critic<T>& critic, const Tensor<T>& real, const Tensor<T>& fake,
                        Tape<T>& tape, Rng& rng, double weight);

// Mescheder et al. 2018, R1: (γ/2)·E[‖∇_x D(x)‖²] on real data.
template <class T>
Var<T> r1_penalty(const Critic<T>& critic, const Tensor<T>& real, Tape<T>& tape, double gamma);

}  // namespace spar
