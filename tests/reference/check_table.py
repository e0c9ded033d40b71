#!/usr/bin/python3
"""Checks load_table (recipes/datasets.h) on the digits table against numpy.loadtxt.

Usage: /usr/bin/python3 check_table.py PATH_TO_SPAR_TABLE_REFERENCE

The digits table is python3-sklearn's copy of the UCI optical digits set (docs/references.md):
1,797 rows of 64 pixel values 0 to 16, then the class label 0 to 9. spar_table_reference
(tests/table_reference.cpp) loads it with the label in the last column and the range [0, 16]
mapped to [-1, 1], and prints the shape, the labels, per-column means, minima and maxima,
the samples per class and every sample. numpy.loadtxt reads the same gzipped file; the
reference values are 2 (v - 0) / (16 - 0) - 1 in float64.

Tolerances. The loader stores float32: each value is the float32 rounding of the float64
reference, so values, minima and maxima must equal numpy.float32 of the reference exactly.
A column mean of N stored values differs from the float64 reference by at most the float32
rounding of the values (unit roundoff 2^-24, |v| <= 1) plus the rounding of two float64
sums of N terms (gamma_N 2^-53 sum |v| / N each, Higham 2nd ed. 4.2; from memory). Shape,
labels and class counts must agree exactly.

Output: one line per group, then "N passed, M failed". Exit status 0 when all pass, 1 when a
check fails, 2 for bad usage or when the program fails.
"""
import os
import subprocess
import sys

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from check_ops import U32, U64, DumpError, Group, gamma, run_checks  # noqa: E402

DIGITS = "/usr/lib/python3/dist-packages/sklearn/datasets/data/digits.csv.gz"


def load_with_spar(program):
    cmd = [program, DIGITS, "-1", "0", "16"]
    r = subprocess.run(cmd, capture_output=True, text=True, check=False)
    if r.returncode != 0:
        raise DumpError(f"{' '.join(cmd)}: exit {r.returncode}: {r.stderr.strip()}")
    fields, rows = {}, []
    for line in r.stdout.splitlines():
        tok = line.split()
        if not tok:
            continue
        if tok[0] == "row":
            rows.append([float(t) for t in tok[2:]])
        else:
            fields[tok[0]] = np.array([float(t) for t in tok[1:]])
    fields["rows"] = np.array(rows)
    return fields


def check_digits(program):
    got = load_with_spar(program)
    table = np.loadtxt(DIGITS, delimiter=",")  # numpy opens .gz files itself
    x = 2.0 * (table[:, :-1] - 0.0) / (16.0 - 0.0) - 1.0
    labels = table[:, -1].astype(np.int64)
    n, f = x.shape
    k = int(labels.max()) + 1

    g = Group("digits table: shape, labels, class counts",
              "numpy.loadtxt; exact; docs/references.md: 1,797 rows, 64 features, 10 classes")
    g.compare("shape", got["shape"], np.array([n, f], dtype=np.float64), 0)
    g.compare("published shape", got["shape"], np.array([1797, 64], dtype=np.float64), 0)
    g.compare("classes", got["classes"], np.array([float(k)]), 0)
    g.compare("published classes", got["classes"], np.array([10.0]), 0)
    g.compare("labels", got["labels"], labels.astype(np.float64), 0)
    g.compare("samples per class", got["count"], np.bincount(labels).astype(np.float64), 0)

    stored = x.astype(np.float32).astype(np.float64)
    v = Group("digits table: every value, column minima and maxima",
              "equal to numpy.float32 of 2 v / 16 - 1 from numpy.loadtxt")
    v.compare("values", got["rows"], stored, 0)
    v.compare("column minima", got["min"], stored.min(axis=0), 0)
    v.compare("column maxima", got["max"], stored.max(axis=0), 0)

    m = Group("digits table: column means",
              "float64 mean of numpy.loadtxt; |error| <= u32 max|v| + 2 gamma_N(u64) mean|v|")
    tol = U32 * np.abs(x).max(axis=0) + 2 * gamma(n, U64) * np.abs(x).mean(axis=0)
    m.compare("means", got["mean"], x.mean(axis=0), tol)
    return [g, v, m]


def main(argv):
    return run_checks("check_table.py", argv,
                      lambda rng: [("digits table", lambda dump: check_digits(dump.program))])


if __name__ == "__main__":
    sys.exit(main(sys.argv))
