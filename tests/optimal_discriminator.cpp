// Trains only a discriminator against a fixed generator distribution and prints what
// tests/reference/check_optimal_discriminator.py compares with Goodfellow et al. 2014,
// Proposition 1 (D*(x) = p_data/(p_data + p_g)) and Theorem 1 (max_D V = −log 4 + 2·JSD).
//
// p_data = N(0, 1) and p_g = N(1.5, 0.6²), both sampled fresh at every step from spar's Rng;
// D is a small MLP trained with the minimax discriminator loss and Adam.
// Output lines: "grid x D(x)" for x on a grid, then "value V" — V(D, G) estimated by Monte
// Carlo over 2·10⁶ samples — and "value_stderr s", its standard error.
// Usage: spar_optimal_discriminator [steps]
#include <cmath>
#include <cstdio>
#include <cstdlib>

#include "engine/optimizer.h"
#include "layers/activation.h"
#include "layers/dense.h"
#include "layers/layer_stack.h"
#include "recipes/objectives.h"

using namespace spar;

int main(int argc, char** argv) {
  const int steps = argc > 1 ? std::atoi(argv[1]) : 10000;
  const int64_t batch = 512;
  Rng init(1, derive_stream(1, "initialisation")), data(1, derive_stream(1, "data"));
  LayerStack<double> d;
  DenseOptions dense;
  dense.init = Init::kGlorotUniform;
  d.emplace<Dense<double>>("hidden1", 1, 32, dense, init);
  d.emplace<Nonlinearity<double>>("act1", NonlinearityKind::kTanh);
  d.emplace<Dense<double>>("hidden2", 32, 32, dense, init);
  d.emplace<Nonlinearity<double>>("act2", NonlinearityKind::kTanh);
  d.emplace<Dense<double>>("out", 32, 1, dense, init);
  auto params = d.all_parameters("d");
  AdamOptions adam_options;
  adam_options.learning_rate = 2e-3;
  Adam<double> adam(adam_options);
  Tape<double> tape;
  for (int step = 0; step < steps; ++step) {
    if (step == steps / 2) adam.set_learning_rate(5e-4);  // settle the last half
    if (step == 3 * steps / 4) adam.set_learning_rate(1e-4);
    tape.clear();
    Context<double> ctx(&tape, true);
    const Var<double> real(data.normal<double>({batch, 1}, 0.0, 1.0));
    const Var<double> fake(data.normal<double>({batch, 1}, 1.5, 0.6));
    const Var<double> loss =
        discriminator_loss(Objective::kMinimax, d.run(real, ctx), d.run(fake, ctx));
    std::vector<Tensor<double>> grads = parameter_gradients(loss, ctx, params);
    std::vector<Tensor<double>*> tensors;
    for (auto& p : params) tensors.push_back(p.tensor);
    adam.step(tensors, grads);
  }
  NoRecordScope evaluation;
  Context<double> eval(nullptr, false);
  const int64_t points = 121;
  Tensor<double> grid = Tensor<double>::uninitialised({points, 1});
  for (int64_t i = 0; i < points; ++i)
    grid.mutable_data()[i] = -3.0 + 6.0 * static_cast<double>(i) / (points - 1);
  const Tensor<double> dx = sigmoid(d.run(Var<double>(grid), eval)).value();
  for (int64_t i = 0; i < points; ++i)
    std::printf("grid %.6f %.10f\n", grid.data()[i], dx.data()[i]);
  // V = E_data[log D] + E_g[log(1 − D)], with log D = log σ(logit), log(1 − D) = log σ(−logit).
  const int64_t n = 1000000;
  const Tensor<double> a =
      log_sigmoid(d.run(Var<double>(data.normal<double>({n, 1}, 0.0, 1.0)), eval)).value();
  const Tensor<double> b =
      log_sigmoid(negate(d.run(Var<double>(data.normal<double>({n, 1}, 1.5, 0.6)), eval))).value();
  double ma = 0, mb = 0, va = 0, vb = 0;
  for (int64_t i = 0; i < n; ++i) ma += a.data()[i], mb += b.data()[i];
  ma /= n, mb /= n;
  for (int64_t i = 0; i < n; ++i)
    va += std::pow(a.data()[i] - ma, 2), vb += std::pow(b.data()[i] - mb, 2);
  std::printf("value %.10f\nvalue_stderr %.10f\n", ma + mb, std::sqrt(va / n / n + vb / n / n));
  return 0;
}
