#!/usr/bin/python3
"""Checks that a file of draws from spar's normal generator looks like N(0, 1).

Usage: /usr/bin/python3 normal_draws.py DRAWS_FILE

DRAWS_FILE holds whitespace-separated float64 values, as written by
`spar_reference_dump normal <seed> <stream> <n> <file>`. Checks, each against N(0, 1):

  * sample mean within 5 standard errors of 0 (standard error 1/sqrt(n));
  * sample variance within 5 standard errors of 1 (standard error about sqrt(2/n)
    for normal data);
  * neighbours independent: the correlation of x[i] with x[i+1], and of x[i]^2 with
    x[i+1]^2, within 5 standard errors of 0 (standard error 1/sqrt(n-1) for independent
    draws). Box-Muller pairs share a radius yet are independent, so a correct generator
    passes; a broken pairing (a repeated or mirrored partner) fails;
  * Kolmogorov-Smirnov test, scipy.stats.kstest(x, 'norm'): p > 1e-3;
  * Cramer-von Mises test, scipy.stats.cramervonmises(x, 'norm'): p > 1e-3.

Why p > 1e-3: the draws come from a fixed seed, so the outcome is deterministic and the
test never flickers; a correct generator fails each test with probability 1e-3 per seed,
while a wrong transform (bad word mapping, lost bits, wrong scale) drives p far below it
for a million draws. (The Cramer-von Mises test stands in for Anderson-Darling because
scipy.stats.anderson in this scipy tabulates critical values only down to the 1% level.)

Exit status: 0 when every check passes (one summary line on stdout); 1 when a check fails;
2 for bad usage or an unreadable file (message on stderr).
"""
import math
import sys

import numpy as np
from scipy import stats

P_THRESHOLD = 1e-3
STANDARD_ERRORS = 5.0
MIN_DRAWS = 1000


def main(argv):
    if len(argv) != 2:
        print("normal_draws.py: usage: normal_draws.py DRAWS_FILE", file=sys.stderr)
        return 2
    path = argv[1]
    try:
        with open(path, "r", encoding="ascii") as f:
            x = np.array(f.read().split(), dtype=np.float64)
    except (OSError, ValueError, UnicodeDecodeError) as e:
        print(f"normal_draws.py: {path}: cannot read draws: {e}", file=sys.stderr)
        return 2
    n = x.size
    if n < MIN_DRAWS:
        print(f"normal_draws.py: {path}: {n} draws, need at least {MIN_DRAWS}", file=sys.stderr)
        return 2

    failures = []
    if not np.all(np.isfinite(x)):
        failures.append(f"{np.count_nonzero(~np.isfinite(x))} non-finite draws")
        x = x[np.isfinite(x)]
        n = x.size

    mean = float(np.mean(x))
    var = float(np.var(x, ddof=1))
    mean_se = 1.0 / math.sqrt(n)
    var_se = math.sqrt(2.0 / n)
    if abs(mean) > STANDARD_ERRORS * mean_se:
        failures.append(f"mean {mean:.6g} is more than {STANDARD_ERRORS:g} standard errors "
                        f"({mean_se:.3g}) from 0")
    if abs(var - 1.0) > STANDARD_ERRORS * var_se:
        failures.append(f"variance {var:.6g} is more than {STANDARD_ERRORS:g} standard errors "
                        f"({var_se:.3g}) from 1")

    corr_se = 1.0 / math.sqrt(n - 1)
    corr = float(np.corrcoef(x[:-1], x[1:])[0, 1])
    corr_sq = float(np.corrcoef(x[:-1] ** 2, x[1:] ** 2)[0, 1])
    for label, r in (("x[i], x[i+1]", corr), ("x[i]^2, x[i+1]^2", corr_sq)):
        if abs(r) > STANDARD_ERRORS * corr_se:
            failures.append(f"correlation of {label} is {r:.4g}, more than "
                            f"{STANDARD_ERRORS:g} standard errors ({corr_se:.3g}) from 0")

    ks = stats.kstest(x, "norm")
    if not ks.pvalue > P_THRESHOLD:
        failures.append(f"Kolmogorov-Smirnov p = {ks.pvalue:.3g} (statistic {ks.statistic:.4g}) "
                        f"is not above {P_THRESHOLD:g}")
    cvm = stats.cramervonmises(x, "norm")
    if not cvm.pvalue > P_THRESHOLD:
        failures.append(f"Cramer-von Mises p = {cvm.pvalue:.3g} (statistic {cvm.statistic:.4g}) "
                        f"is not above {P_THRESHOLD:g}")

    summary = (f"n={n} mean={mean:.5f} (se {mean_se:.2g}) var={var:.5f} (se {var_se:.2g}) "
               f"lag1_corr={corr:.2g} ks_p={ks.pvalue:.3g} cvm_p={cvm.pvalue:.3g}")
    if failures:
        print(f"normal_draws.py: {path}: FAIL: " + "; ".join(failures) + f" [{summary}]",
              file=sys.stderr)
        return 1
    print(f"normal_draws.py: PASS {summary}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
