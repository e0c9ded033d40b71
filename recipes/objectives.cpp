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

// Each objective's losses (objectives.h gives the formulas), on scores already flattened to
// [N]. log σ(r) = −softplus(−r) and log(1 − σ(f)) = −softplus(f), stable for any logit.
struct Minimax {
  template <class T>
  static Var<T> critic(const Var<T>& r, const Var<T>& f, const LeastSquaresTargets&) {
    return add(mean(softplus(negate(r))), mean(softplus(f)));
  }
  template <class T>
  static Var<T> generator(const Var<T>& f, const LeastSquaresTargets&) {
    return negate(mean(softplus(f)));  // E[log(1 − σ(f))]
  }
};
struct NonSaturating {
  template <class T>
  static Var<T> critic(const Var<T>& r, const Var<T>& f, const LeastSquaresTargets& t) {
    return Minimax::critic(r, f, t);
  }
  template <class T>
  static Var<T> generator(const Var<T>& f, const LeastSquaresTargets&) {
    return mean(softplus(negate(f)));  // −E[log σ(f)]
  }
};
struct LeastSquares {
  template <class T>
  static Var<T> critic(const Var<T>& r, const Var<T>& f, const LeastSquaresTargets& t) {
    return scale(add(mean(square(add_scalar(r, -t.real))), mean(square(add_scalar(f, -t.fake)))),
                 0.5);
  }
  template <class T>
  static Var<T> generator(const Var<T>& f, const LeastSquaresTargets& t) {
    return scale(mean(square(add_scalar(f, -t.generator))), 0.5);
  }
};
struct Hinge {
  template <class T>
  static Var<T> critic(const Var<T>& r, const Var<T>& f, const LeastSquaresTargets&) {
    return add(mean(relu(add_scalar(negate(r), 1.0))), mean(relu(add_scalar(f, 1.0))));
  }
  template <class T>
  static Var<T> generator(const Var<T>& f, const LeastSquaresTargets&) {
    return negate(mean(f));
  }
};
struct Wasserstein {
  template <class T>
  static Var<T> critic(const Var<T>& r, const Var<T>& f, const LeastSquaresTargets&) {
    return subtract(mean(f), mean(r));
  }
  template <class T>
  static Var<T> generator(const Var<T>& f, const LeastSquaresTargets& t) {
    return Hinge::generator(f, t);
  }
};

template <class L, class T>
ObjectiveLosses<T> losses_of() {
  return {&L::template critic<T>, &L::template generator<T>};
}
template <class L>
ObjectiveInfo entry(Objective id, const char* name, const char* about, bool logistic, double kink) {
  return {id, name, about, logistic, kink, losses_of<L, float>(), losses_of<L, double>()};
}

}  // namespace

const std::vector<ObjectiveInfo>& objectives() {
  static const std::vector<ObjectiveInfo> all = {
      entry<Minimax>(Objective::kMinimax, "minimax", "the minimax game of Goodfellow et al. 2014",
                     true, 0),
      entry<NonSaturating>(Objective::kNonSaturating, "non-saturating",
                           "its non-saturating variant, from the same paper", true, 0),
      entry<LeastSquares>(Objective::kLeastSquares, "least-squares",
                          "least squares, Mao et al. 2017", false, 0),
      entry<Hinge>(Objective::kHinge, "hinge", "the hinge loss of Miyato et al. 2018", false, 1),
      entry<Wasserstein>(Objective::kWasserstein, "wasserstein",
                         "the Wasserstein critic of Arjovsky et al. 2017, to use with "
                         "objective.gradient_penalty",
                         false, 0),
  };
  return all;
}

const ObjectiveInfo& objective_info(Objective objective) {
  for (const ObjectiveInfo& o : objectives())
    if (o.objective == objective) return o;
  raise(ErrorKind::kBadArgument, "objective_info: an objective missing from the table");
}

const ObjectiveInfo& objective_named(const std::string& name) {
  std::string names;
  for (const ObjectiveInfo& o : objectives()) {
    if (name == o.name) return o;
    names += std::string(names.empty() ? "" : ", ") + o.name;
  }
  raise(ErrorKind::kBadRecipe, "objective '" + name + "' is not one of " + names);
}

template <class T>
Var<T> discriminator_loss(Objective objective, const Var<T>& real_scores, const Var<T>& fake_scores,
                          const LeastSquaresTargets& targets) {
  const Var<T> r = flat(real_scores), f = flat(fake_scores);
  return objective_info(objective).losses<T>().critic(r, f, targets);
}

template <class T>
Var<T> generator_loss(Objective objective, const Var<T>& fake_scores,
                      const LeastSquaresTargets& targets) {
  return objective_info(objective).losses<T>().generator(flat(fake_scores), targets);
}

// The penalties differentiate a recorded gradient: the backward pass is recorded too.
GradientOptions recorded_gradient() {
  GradientOptions o;
  o.record = true;
  return o;
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
  const Var<T> g = tape.gradient(sum(critic(mixed)), {mixed}, recorded_gradient())[0];
  const Var<T> norms = sqrt(add_scalar(squared_norms(g), 1e-12));
  return scale(mean(square(add_scalar(norms, -1.0))), weight);
}

template <class T>
Var<T> r1_penalty(const Critic<T>& critic, const Tensor<T>& real, Tape<T>& tape, double gamma) {
  const Var<T> x = tape.variable(real);
  const Var<T> g = tape.gradient(sum(critic(x)), {x}, recorded_gradient())[0];
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
