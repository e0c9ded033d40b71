#include "recipes/objectives.h"

#include "engine/error.h"

namespace spar {
namespace {

template <class T>
Var<T> flat(const Var<T>& scores) {
  return reshape(scores, {scores.element_count()});
}

// Per-sample squared norm of g over all axes but the first: [N, ...] → [N].
template <class T>
Var<T> squared_norms(const Var<T>& g) {
  const int64_t n = g.shape()[0];
  return sum(square(reshape(g, {n, g.element_count() / n})), 1);
}

}  // namespace

const char* to_string(Objective objective) {
  switch (objective) {
    case Objective::kMinimax:
      return "minimax";
    case Objective::kNonSaturating:
      return "non-saturating";
    case Objective::kLeastSquares:
      return "least-squares";
    case Objective::kHinge:
      return "hinge";
    case Objective::kWasserstein:
      return "wasserstein";
  }
  return "?";
}

Objective objective_from_string(const std::string& name) {
  for (Objective o : {Objective::kMinimax, Objective::kNonSaturating, Objective::kLeastSquares,
                      Objective::kHinge, Objective::kWasserstein})
    if (name == to_string(o)) return o;
  raise(ErrorKind::kBadRecipe,
        "objective '" + name +
            "' is not one of minimax, non-saturating, least-squares, hinge, wasserstein");
}

template <class T>
Var<T> discriminator_loss(Objective objective, const Var<T>& real_scores, const Var<T>& fake_scores,
                          const LeastSquaresTargets& targets) {
  const Var<T> r = flat(real_scores), f = flat(fake_scores);
  switch (objective) {
    case Objective::kMinimax:
    case Objective::kNonSaturating:
      // −log σ(r) = softplus(−r); −log(1 − σ(f)) = softplus(f).
      return add(mean(softplus(negate(r))), mean(softplus(f)));
    case Objective::kLeastSquares:
      return scale(add(mean(square(add_scalar(r, -targets.real))),
                       mean(square(add_scalar(f, -targets.fake)))),
                   0.5);
    case Objective::kHinge:
      return add(mean(relu(add_scalar(negate(r), 1.0))), mean(relu(add_scalar(f, 1.0))));
    case Objective::kWasserstein:
      return subtract(mean(f), mean(r));
  }
  raise(ErrorKind::kBadArgument, "discriminator_loss: unknown objective");
}

template <class T>
Var<T> generator_loss(Objective objective, const Var<T>& fake_scores,
                      const LeastSquaresTargets& targets) {
  const Var<T> f = flat(fake_scores);
  switch (objective) {
    case Objective::kMinimax:
      return negate(mean(softplus(f)));  // log(1 − σ(f)) = −softplus(f)
    case Objective::kNonSaturating:
      return mean(softplus(negate(f)));  // −log σ(f)
    case Objective::kLeastSquares:
      return scale(mean(square(add_scalar(f, -targets.generator))), 0.5);
    case Objective::kHinge:
    case Objective::kWasserstein:
      return negate(mean(f));
  }
  raise(ErrorKind::kBadArgument, "generator_loss: unknown objective");
}

template <class T>
Var<T> gradient_penalty(const Critic<T>& critic, const Tensor<T>& real, const Tensor<T>& fake,
                        Tape<T>& tape, Rng& rng, double weight) {
  if (real.shape() != fake.shape() || real.rank() < 1)
    raise(ErrorKind::kBadShape, "gradient penalty: real " + real.shape().str() + " and fake " +
                                    fake.shape().str() + " batches differ");
  Shape per_sample = real.shape();
  for (int i = 1; i < per_sample.rank(); ++i) per_sample = per_sample.with(i, 1);
  Tensor<T> mixed_value;
  {
    NoRecordScope constant;  // x̂ is an input of the critic, not a function of anything trained
    const Var<T> eps(rng.uniform<T>(per_sample));
    mixed_value =
        add(multiply(eps, Var<T>(real)), multiply(add_scalar(negate(eps), 1.0), Var<T>(fake)))
            .value();
  }
  const Var<T> mixed = tape.variable(mixed_value);
  const Var<T> g = tape.gradient(sum(critic(mixed)), {mixed}, GradientOptions{true})[0];
  const Var<T> norms = sqrt(add_scalar(squared_norms(g), 1e-12));
  return scale(mean(square(add_scalar(norms, -1.0))), weight);
}

template <class T>
Var<T> r1_penalty(const Critic<T>& critic, const Tensor<T>& real, Tape<T>& tape, double gamma) {
  const Var<T> x = tape.variable(real);
  const Var<T> g = tape.gradient(sum(critic(x)), {x}, GradientOptions{true})[0];
  return scale(mean(squared_norms(g)), gamma / 2);
}

#define SPAR_INSTANTIATE(T)                                                                        \
  template Var<T> discriminator_loss(Objective, const Var<T>&, const Var<T>&,                      \
                                     const LeastSquaresTargets&);                                  \
  template Var<T> generator_loss(Objective, const Var<T>&, const LeastSquaresTargets&);            \
  template Var<T> gradient_penalty(const Critic<T>&, const Tensor<T>&, const Tensor<T>&, Tape<T>&, \
                                   Rng&, double);                                                  \
  template Var<T> r1_penalty(const Critic<T>&, const Tensor<T>&, Tape<T>&, double);
SPAR_INSTANTIATE(float)
SPAR_INSTANTIATE(double)
#undef SPAR_INSTANTIATE

}  // namespace spar
