// d/dx Σ tanh(x)² at x = 0.5 is 2·tanh(0.5)·(1 − tanh²(0.5)) (calculus); prints both.
#include <cmath>
#include <cstdio>

#include "engine/ops.h"

int main() {
  spar::Tape<double> tape;
  spar::Var<double> x = tape.variable(spar::Tensor<double>::scalar(0.5));
  spar::Var<double> y = spar::sum(spar::square(spar::tanh(x)));
  const double got = tape.gradient(y, {x})[0].as_scalar();
  const double t = std::tanh(0.5), want = 2 * t * (1 - t * t);
  std::printf("gradient %.17g, expected %.17g\n", got, want);
  return std::abs(got - want) < 1e-15 ? 0 : 1;
}
