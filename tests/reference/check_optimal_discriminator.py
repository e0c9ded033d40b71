"""Goodfellow et al. 2014, Proposition 1 and Theorem 1, checked on a trained discriminator.

With the generator held fixed (p_data = N(0, 1), p_g = N(1.5, 0.6^2)), spar trains only D
(tests/optimal_discriminator.cpp). Then:
  Proposition 1: D*(x) = p_data(x) / (p_data(x) + p_g(x)); compared on the grid points where
    p_data + p_g >= 0.05 (elsewhere hardly any samples constrain D). Tolerance 0.03 in
    probability: D is a finite MLP fitted by stochastic gradients on batches of 512, and its
    error is largest where the densities thin out (0.014 measured with 10,000 steps).
  Theorem 1: C(G) = max_D V(D, G) = -log 4 + 2 JSD(p_data || p_g), with the JSD integrated by
    scipy.integrate.quad. The trained D's value must not exceed C(G) beyond Monte Carlo error
    (no D can), and must come within 0.005 of it (a near-optimal D; the value is flat near the
    optimum, so small errors in D cost second-order amounts).
Usage: check_optimal_discriminator.py <spar_optimal_discriminator>
"""
import math
import subprocess
import sys

import numpy as np
from scipy import integrate, stats

p_data = stats.norm(0.0, 1.0)  # reference densities: scipy.stats.norm
p_g = stats.norm(1.5, 0.6)


def jsd():
    def kl_to_mixture(p):
        def f(x):
            a, m = p.pdf(x), 0.5 * (p_data.pdf(x) + p_g.pdf(x))
            return a * math.log(a / m) if a > 0 else 0.0
        return integrate.quad(f, -12, 12, limit=200)[0]
    return 0.5 * kl_to_mixture(p_data) + 0.5 * kl_to_mixture(p_g)


def main():
    out = subprocess.run([sys.argv[1]], check=True, capture_output=True, text=True).stdout.split("\n")
    grid = np.array([[float(v) for v in line.split()[1:]] for line in out if line.startswith("grid ")])
    fields = dict(line.split() for line in out if line.startswith("value"))
    value, stderr = float(fields["value"]), float(fields["value_stderr"])
    x, d = grid[:, 0], grid[:, 1]
    pd, pg = p_data.pdf(x), p_g.pdf(x)
    mask = pd + pg >= 0.05
    worst = float(np.max(np.abs(d[mask] - pd[mask] / (pd[mask] + pg[mask]))))
    best_value = -math.log(4) + 2 * jsd()
    failures = 0
    print(f"Proposition 1: max |D - D*| over {mask.sum()} grid points = {worst:.4f} (tolerance 0.03)")
    failures += worst > 0.03
    print(f"Theorem 1: V(D) = {value:.5f} ± {stderr:.5f}, -log 4 + 2 JSD = {best_value:.5f} (quad)")
    failures += value > best_value + 4 * stderr
    failures += abs(value - best_value) > 0.005
    print(f"{2 - failures} passed, {failures} failed")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
