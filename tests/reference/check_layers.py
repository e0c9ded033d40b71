"""Batch and spectral normalisation recomputed with numpy from the papers' formulas.

Usage: check_layers.py <spar_layer_reference>
"""
import subprocess
import sys

import numpy as np


def read(program):
    out = {}
    for line in subprocess.run([program], check=True, capture_output=True, text=True).stdout.splitlines():
        parts = line.split()
        rank = int(parts[1])
        dims = [int(v) for v in parts[2:2 + rank]]
        out[parts[0]] = np.array([float(v) for v in parts[2 + rank:]]).reshape(dims)
    return out


def main():
    t = read(sys.argv[1])
    results = []

    def check(name, got, want, rtol, atol, why):
        ok = np.allclose(got, want, rtol=rtol, atol=atol)
        err = float(np.max(np.abs(np.asarray(got) - np.asarray(want))))
        results.append(ok)
        print(f"{'pass' if ok else 'FAIL'}  {name}: max abs difference {err:.3g} ({why})")

    # Ioffe & Szegedy 2015, Algorithm 1 (training) and Algorithm 2 (inference), per channel
    # over the batch and spatial axes; ε = 1e-5, running rate 0.1 from initial 0 and 1.
    x, g, b = t["bn_x"], t["bn_scale"].reshape(1, 3, 1, 1), t["bn_shift"].reshape(1, 3, 1, 1)
    mu = x.mean(axis=(0, 2, 3), keepdims=True)
    var = x.var(axis=(0, 2, 3), keepdims=True)  # biased, as in Algorithm 1
    m = x.size // 3
    tol = "float64 arithmetic on the same formula: 1e-12 relative"
    check("batch norm, training step", t["bn_train_y"], g * (x - mu) / np.sqrt(var + 1e-5) + b, 1e-12, 1e-12, tol)
    running_mean = 0.1 * mu.ravel()
    running_var = 0.9 * 1.0 + 0.1 * var.ravel() * m / (m - 1)  # unbiased, Algorithm 2
    check("batch norm, running mean", t["bn_running_mean"], running_mean, 1e-12, 1e-14, tol)
    check("batch norm, running variance", t["bn_running_variance"], running_var, 1e-12, 1e-14, tol)
    xe = t["bn_eval_x"]
    want = g * (xe - running_mean.reshape(1, 3, 1, 1)) / np.sqrt(running_var.reshape(1, 3, 1, 1) + 1e-5) + b
    check("batch norm, evaluation step", t["bn_eval_y"], want, 1e-12, 1e-12, tol)

    # Miyato et al. 2018: σ(W) of the weight viewed as out × (in·kh·kw), by power iteration,
    # against numpy.linalg.svd's largest singular value.
    w = t["sn_w"].reshape(5, 27)
    sigma = np.linalg.svd(w, compute_uv=False)[0]
    check("spectral norm after 60 iterations", t["sn_sigma"], sigma, 1e-9, 0,
          "power iteration converges as (σ2/σ1)^(2k); 1e-9 relative after 60 steps")
    first = float(t["sn_sigma_first"])
    ok = first <= sigma * (1 + 1e-12)
    results.append(ok)
    print(f"{'pass' if ok else 'FAIL'}  first estimate {first:.6f} <= σ1 {sigma:.6f} (uᵀWv <= σ1 for unit u, v)")
    normalised = np.linalg.svd(t["sn_normalised"].reshape(5, 27), compute_uv=False)[0]
    check("largest singular value of W/σ is 1", normalised, 1.0, 1e-9, 0, "same convergence bound")

    failed = results.count(False)
    print(f"{len(results) - failed} passed, {failed} failed")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
