#!/usr/bin/python3
"""Checks spar's engine operations and their tape gradients against numpy and scipy.

Usage: /usr/bin/python3 check_ops.py PATH_TO_SPAR_REFERENCE_DUMP

Inputs are drawn with numpy (fixed seed), written to a temporary file, evaluated by
spar_reference_dump (tests/reference_dump.cpp describes its protocol), and the results are
compared with numpy/scipy. For every case the dump returns the value y and the gradients of
sum(w * y) with respect to each operand, for a random weight w shaped like y; the expected
gradients are written out in closed form with numpy and scipy functions.

Tolerances. Where an operation is a single IEEE-754 operation or only moves values, the
result must be bit-identical. Elsewhere each tolerance is a forward error bound of the
computation, as a function of the unit roundoff u of the element type (u = 2^-53 for
float64, 2^-24 for float32) and of the data, stated beside each group; it covers the
engine's rounding and the reference's rounding, so it holds for any summation order.
The standard bound for a sum or dot product of K terms is |error| <= gamma_K * sum |terms|,
gamma_K = K u / (1 - K u) (Higham, Accuracy and Stability of Numerical Algorithms,
2nd ed., sections 3.1 and 4.2; from memory). Libm-class elementwise functions
(exp, log, log1p, tanh) are taken to be within 2 ulp each (from memory; glibc documents
at most 1-2 ulp for these, and numpy's vectorised versions claim below 4 ulp), which the
per-function bounds below round up.
Non-finite expected values must be matched exactly (same infinity, or NaN).

Output: one line per group ("PASS name: ..." or "FAIL name: ..."), then
"N passed, M failed". Exit status 0 when all pass, 1 when a check fails, 2 for bad usage
or when the dump program fails.
"""
import math
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy import special

SEED = 20240611
U64 = 2.0 ** -53  # unit roundoff of IEEE-754 binary64
U32 = 2.0 ** -24  # unit roundoff of IEEE-754 binary32
TINY64 = 2.0 ** -1074  # smallest positive subnormal binary64
TINY32 = 2.0 ** -149  # smallest positive subnormal binary32


def unit_roundoff(dtype):
    return U64 if dtype == "f64" else U32


def subnormal_step(dtype):
    return TINY64 if dtype == "f64" else TINY32


def gamma(k, u):
    """gamma_K of the summation bound (see the module docstring)."""
    return k * u / (1.0 - k * u)


class DumpError(Exception):
    pass


# ---- driving spar_reference_dump -- --------------------------------------------------------

def format_tensor(a):
    a = np.asarray(a, dtype=np.float64)
    head = [str(a.ndim)] + [str(d) for d in a.shape]
    return " ".join(head + [repr(float(v)) for v in a.ravel().tolist()])


def parse_tensors(text):
    out = []
    for line in text.splitlines():
        tok = line.split()
        if not tok:
            continue
        rank = int(tok[0])
        shape = tuple(int(t) for t in tok[1:1 + rank])
        values = np.array([float(t) for t in tok[1 + rank:]], dtype=np.float64)
        out.append(values.reshape(shape))
    return out


class Dump:
    def __init__(self, program, workdir):
        self.program = program
        self.workdir = workdir
        self.calls = 0

    def run(self, dtype, case, operands, w, params=()):
        """Returns [y, d sum(w*y)/d operand_1, ...] as float64 arrays."""
        if dtype == "f32":
            for a in list(operands) + [w]:
                if not np.array_equal(np.asarray(a, np.float64),
                                      np.asarray(a, np.float32).astype(np.float64),
                                      equal_nan=True):
                    raise DumpError(f"{case}: an f32 operand is not float32-representable")
        self.calls += 1
        src = os.path.join(self.workdir, f"in{self.calls}.txt")
        dst = os.path.join(self.workdir, f"out{self.calls}.txt")
        with open(src, "w", encoding="ascii") as f:
            for a in list(operands) + [w]:
                f.write(format_tensor(a) + "\n")
        cmd = [self.program, dtype, case, src, dst] + [str(int(p)) for p in params]
        r = subprocess.run(cmd, capture_output=True, text=True, check=False)
        if r.returncode != 0:
            raise DumpError(f"{' '.join(cmd[1:3])} {' '.join(cmd[5:])}: exit {r.returncode}: "
                            f"{r.stderr.strip()}")
        with open(dst, "r", encoding="ascii") as f:
            result = parse_tensors(f.read())
        os.remove(src)
        os.remove(dst)
        if len(result) != len(operands) + 1:
            raise DumpError(f"{case}: expected {len(operands) + 1} tensors, got {len(result)}")
        return result


# ---- comparison ------------------------------------------------------------------------------

class Group:
    """One reported line: a set of comparisons that pass or fail together."""

    def __init__(self, name, why):
        self.name = name
        self.why = why
        self.compared = 0
        self.worst = 0.0  # largest |got - expected| / tolerance seen (0 for exact checks)
        self.failures = []

    def compare(self, label, got, expected, tol):
        """Elementwise: non-finite expected values must match exactly; finite ones must be
        matched within tol (an array or a scalar, 0 for bit-identical)."""
        got = np.asarray(got, dtype=np.float64)
        expected = np.asarray(expected, dtype=np.float64)
        if got.shape != expected.shape:
            self.failures.append(f"{label}: shape {got.shape}, expected {expected.shape}")
            return
        tol = np.broadcast_to(np.asarray(tol, dtype=np.float64), expected.shape)
        self.compared += expected.size
        special_ref = ~np.isfinite(expected)
        if np.any(special_ref):
            same = (got == expected) | (np.isnan(got) & np.isnan(expected))
            bad = special_ref & ~same
            if np.any(bad):
                i = np.unravel_index(np.argmax(bad), bad.shape)
                self.failures.append(f"{label}: at {tuple(int(k) for k in i)} got {got[i]!r}, "
                                     f"expected {expected[i]!r}")
                return
        fin = ~special_ref
        if np.any(fin & ~(np.isfinite(tol) & (tol >= 0))):
            self.failures.append(f"{label}: the tolerance is not a finite bound (test error)")
            return
        with np.errstate(invalid="ignore", over="ignore"):
            err = np.where(fin, np.abs(got - expected), 0.0)
            err = np.where(fin & ~np.isfinite(got), np.inf, err)
            ratio = err / np.where(tol > 0, tol, TINY64)
        bad = fin & ~(err <= tol)
        if np.any(bad):
            ratio = np.where(bad, ratio, 0.0)
            i = np.unravel_index(np.argmax(ratio), ratio.shape)
            self.failures.append(
                f"{label}: at {tuple(int(k) for k in i)} got {got[i]!r}, expected "
                f"{expected[i]!r} (error {err[i]:.3g}, tolerance {tol[i]:.3g}; "
                f"{int(np.count_nonzero(bad))} of {bad.size} outside)")
            return
        positive = fin & (tol > 0)
        if np.any(positive):
            self.worst = max(self.worst, float(np.max(err[positive] / tol[positive])))

    def fail(self, message):
        self.failures.append(message)

    def report(self):
        if self.failures:
            print(f"FAIL {self.name}: " + "; ".join(self.failures[:4]) +
                  (f" (+{len(self.failures) - 4} more)" if len(self.failures) > 4 else ""))
            return False
        print(f"PASS {self.name}: {self.compared} values; worst error/tolerance "
              f"{self.worst:.2g}; {self.why}")
        return True


# ---- numpy helpers ---------------------------------------------------------------------------

def sum_to_shape(g, shape):
    """numpy's own reduction of a broadcast result back to an operand's shape: sum the
    leading axes the operand lacks, then (keeping them) the axes where it has extent 1."""
    g = np.asarray(g)
    lead = g.ndim - len(shape)
    if lead:
        g = g.sum(axis=tuple(range(lead)))
    axes = tuple(i for i, d in enumerate(shape) if d == 1 and g.shape[i] != 1)
    if axes:
        g = g.sum(axis=axes, keepdims=True)
    return g.reshape(shape)


def as_dtype(a, dtype):
    """Values of the element type, held as float64 (exact)."""
    np_type = np.float64 if dtype == "f64" else np.float32
    return np.asarray(a, dtype=np_type).astype(np.float64)


def round_to(a, dtype):
    """An expected value rounded to the element type (overflow becomes infinity, as it
    must in the engine)."""
    if dtype == "f64":
        return np.asarray(a, np.float64)
    with np.errstate(over="ignore"):
        return np.asarray(a, np.float64).astype(np.float32).astype(np.float64)


def keep_axis(a, axis, keep):
    return a if keep else np.expand_dims(a, axis)


# ---- groups ----------------------------------------------------------------------------------

def check_matmul(dump, rng, dtype):
    u = unit_roundoff(dtype)
    g = Group(f"matmul {dtype} (4 transpose combinations; shapes 5x7.7x3, 1x4.4x1, 6x1.1x5, "
              f"300x200.200x250) and its gradients",
              "reference numpy.matmul; |error| <= (gamma_K(u) + 2 gamma_K(u64)) (|A||B|)_ij "
              "per element, K the inner extent (dot-product bound)")
    for m, k, n in ((5, 7, 3), (1, 4, 1), (6, 1, 5), (300, 200, 250)):
        for ta in (0, 1):
            for tb in (0, 1):
                opa = as_dtype(rng.standard_normal((m, k)), dtype)
                opb = as_dtype(rng.standard_normal((k, n)), dtype)
                w = as_dtype(rng.standard_normal((m, n)), dtype)
                a = opa.T.copy() if ta else opa
                b = opb.T.copy() if tb else opb
                y, ga, gb = dump.run(dtype, "matmul", [a, b], w, (ta, tb))
                tag = f"{m}x{k}.{k}x{n} ta={ta} tb={tb}"

                def bound(kk, mag):
                    return (gamma(kk, u) + 2 * gamma(kk, U64)) * mag

                # reference: numpy.matmul; the gradients of sum(w * op(a) op(b)) are
                # w op(b)^T for op(a) and op(a)^T w for op(b), transposed back when op is.
                g.compare(f"value {tag}", y, np.matmul(opa, opb),
                          bound(k, np.matmul(np.abs(opa), np.abs(opb))))
                ref_ga = np.matmul(w, opb.T)
                tol_ga = bound(n, np.matmul(np.abs(w), np.abs(opb).T))
                ref_gb = np.matmul(opa.T, w)
                tol_gb = bound(m, np.matmul(np.abs(opa).T, np.abs(w)))
                g.compare(f"d/da {tag}", ga, ref_ga.T if ta else ref_ga,
                          tol_ga.T if ta else tol_ga)
                g.compare(f"d/db {tag}", gb, ref_gb.T if tb else ref_gb,
                          tol_gb.T if tb else tol_gb)
    return g


def check_sums(dump, rng, dtype):
    u = unit_roundoff(dtype)
    g = Group(f"sum and mean {dtype} (all elements, each axis, keep or drop; "
              f"shapes 4x5x6, 256x300, 16x8x32x32) and their gradients",
              "reference numpy.sum / numpy.mean; value |error| <= u|expected| + "
              "2 gamma_K(u64) sum|x| (the engine accumulates in float64 and rounds once); "
              "gradients are w broadcast, exact for sum, within 2u for mean's 1/n scaling")
    cases = [((4, 5, 6), [None, (0, 0), (1, 1), (2, 0), (-1, 1), (-3, 0)]),
             ((256, 300), [None, (0, 0), (1, 0), (0, 1)]),
             ((16, 8, 32, 32), [None, (1, 1), (0, 0), (3, 0)])]
    for shape, axes in cases:
        x = as_dtype(rng.standard_normal(shape), dtype)
        for spec in axes:
            for op in ("sum", "mean"):
                if spec is None:
                    params, ax, keep = (), None, False
                else:
                    ax, keep = spec
                    params = (ax, keep)
                ref = np.sum(x, axis=ax, keepdims=keep)
                mag = np.sum(np.abs(x), axis=ax, keepdims=keep)
                kk = x.size // np.asarray(ref).size
                if op == "mean":
                    ref, mag = ref / kk, mag / kk
                w = as_dtype(rng.standard_normal(np.shape(ref)), dtype)
                y, gx = dump.run(dtype, op, [x], w, params)
                tag = f"{op} {shape} axis={ax} keep={int(keep)}"
                extra = 2 * u * np.abs(ref) if op == "mean" else 0.0
                g.compare(f"value {tag}", y, ref,
                          u * np.abs(ref) + 2 * gamma(kk, U64) * mag + extra)
                wb = np.broadcast_to(w if ax is None else keep_axis(w, ax, keep), shape)
                if op == "sum":
                    g.compare(f"d/dx {tag}", gx, wb, 0.0)
                else:
                    g.compare(f"d/dx {tag}", gx, wb / kk, 2 * u * np.abs(wb / kk))
    return g


def first_max_mask(x, axis):
    """1 at numpy.argmax's position along axis (first occurrence; first NaN if any)."""
    idx = np.expand_dims(np.argmax(x, axis=axis), axis)
    mask = np.zeros_like(x)
    np.put_along_axis(mask, idx, 1.0, axis=axis)
    return mask


def check_max(dump, rng, dtype):
    g = Group(f"max {dtype} along each axis, with ties, infinities and NaN, and its gradient",
              "reference numpy.max, numpy.argmax (first occurrence, NaN propagates); "
              "exact: a maximum is one of the inputs, the gradient is w at the first maximum")
    x_ties = as_dtype(rng.integers(-2, 3, size=(4, 5, 6)), dtype)  # many ties
    x_special = np.array([[1.0, 3.0, 3.0, -np.inf],
                          [-np.inf, -np.inf, -np.inf, -np.inf],
                          [2.0, np.inf, 5.0, np.inf],
                          [np.nan, 7.0, np.nan, 1.0],
                          [4.0, 9.0, np.nan, 9.0]])
    cases = [(x_ties, a, k) for a in (0, 1, 2, -1) for k in (0, 1)]
    cases += [(x_special, 1, 0), (x_special, 0, 1)]
    for x, ax, keep in cases:
        ref = np.max(x, axis=ax, keepdims=bool(keep))
        w = as_dtype(rng.standard_normal(ref.shape), dtype)
        y, gx = dump.run(dtype, "max", [x], w, (ax, keep))
        tag = f"{x.shape} axis={ax} keep={keep}"
        g.compare(f"value {tag}", y, ref, 0.0)
        g.compare(f"d/dx {tag}", gx, first_max_mask(x, ax) * keep_axis(w, ax, keep), 0.0)
    return g


def lse_parts(x, axis, u):
    """Expected log_sum_exp (keepdims) and its forward error bound. With m the lane maximum,
    the value is m + log(sum exp(x - m)): rounding x - m costs u|x - m| in an exponent
    (D = the largest |x - m| of the lane bounds it), exp and log 2 ulp each, the sum
    gamma_K, adding m u|result|. Both the engine and scipy compute it this way, so the
    bound is doubled."""
    ref = special.logsumexp(x, axis=axis, keepdims=True)
    m = np.max(x, axis=axis, keepdims=True)
    k = x.shape[axis]
    with np.errstate(invalid="ignore"):
        d = np.max(np.abs(x - m), axis=axis, keepdims=True)
        e = 2 * u * (d + k + 4 + 2 * np.abs(ref - m) + np.abs(ref))
    return ref, e


def extreme_rows(dtype):
    big = 700.0 if dtype == "f64" else 80.0
    return np.array([[1000.0, 0.0, -1000.0, 1.0],
                     [big, -big, 0.0, big],
                     [100.0, -100.0, 0.0, 3.0],
                     [-big, -big - 1, -big - 2, -big - 30],
                     [0.0, 0.0, 0.0, 0.0],
                     [1e-300 if dtype == "f64" else 1e-30, -2.0, 2.0, 0.5]])


def check_log_sum_exp(dump, rng, dtype):
    u = unit_roundoff(dtype)
    g = Group(f"log_sum_exp {dtype} along each axis (normal data, logits up to +-1000) and "
              f"its gradient",
              "reference scipy.special.logsumexp, gradient w * scipy.special.softmax; "
              "|error| <= 2u (D + K + 4 + 2|lse - m| + |lse|) (see lse_parts), gradient "
              "relative error from the exponent's error plus 2 ulp")
    xs = [as_dtype(3 * rng.standard_normal((4, 5, 6)), dtype), as_dtype(extreme_rows(dtype), dtype)]
    for x in xs:
        for ax in range(-1, x.ndim):
            for keep in (0, 1):
                ref, e = lse_parts(x, ax, u)
                p = special.softmax(x, axis=ax)
                out_ref = ref if keep else np.squeeze(ref, axis=ax)
                w = as_dtype(rng.standard_normal(out_ref.shape), dtype)
                y, gx = dump.run(dtype, "log_sum_exp", [x], w, (ax, keep))
                tag = f"{x.shape} axis={ax} keep={keep}"
                g.compare(f"value {tag}", y, out_ref, e if keep else np.squeeze(e, axis=ax))
                # d/dx = w softmax(x); the engine forms exp(x - lse): relative error
                # e + u|x - lse| + 2u, doubled for the reference's own rounding.
                wk = keep_axis(w, ax, keep)
                rel = 2 * (e + u * (np.abs(x - ref) + 4))
                g.compare(f"d/dx {tag}", gx, wk * p,
                          rel * np.abs(wk * p) + 8 * subnormal_step(dtype))
    return g


def check_log_sum_exp_special(dump, rng, dtype):
    g = Group(f"log_sum_exp and softmax {dtype} on lanes with infinities and NaN",
              "reference scipy.special.logsumexp and scipy.special.softmax: all -inf gives "
              "-inf, +inf gives +inf, and any NaN gives NaN (exactly); the finite lane "
              "[-inf, 0, 1] within 8u(1 + |result|); values only")
    x = np.array([[-np.inf, -np.inf, -np.inf],
                  [np.inf, 1.0, 2.0],
                  [np.nan, 1.0, 2.0],
                  [np.inf, np.nan, 0.0],
                  [-np.inf, np.nan, -np.inf],
                  [-np.inf, 0.0, 1.0]])
    w = as_dtype(rng.standard_normal((6, 1)), dtype)
    with np.errstate(invalid="ignore"):
        ref = special.logsumexp(x, axis=1, keepdims=True)
        smax = special.softmax(x, axis=1)
    y, _ = dump.run(dtype, "log_sum_exp", [x], w, (1, 1))
    # Non-finite expectations exactly; the finite lane [-inf, 0, 1] (K = 3, D = 1) within
    # lse_parts' bound, which is below 8u(1 + |lse|) there.
    finite_tol = 8 * unit_roundoff(dtype) * (1 + np.abs(np.nan_to_num(ref)))
    g.compare("log_sum_exp value, lanes " + ", ".join(str(r.tolist()) for r in x), y, ref,
              finite_tol)
    # softmax: a lane holding NaN must come out all NaN, an all -inf lane is 0/0 = NaN, and
    # [-inf, 0, 1] is finite (8-ulp bound). The lane [inf, 1, 2] is left out: its value is a
    # matter of convention (scipy gives NaN throughout, exp(x - lse) gives [NaN, 0, 0]).
    lanes = [0, 2, 3, 4, 5]
    xs = x[lanes]
    y, _ = dump.run(dtype, "softmax", [xs], as_dtype(rng.standard_normal(xs.shape), dtype), (1,))
    g.compare("softmax value, lanes " + ", ".join(str(r.tolist()) for r in xs), y, smax[lanes],
              8 * unit_roundoff(dtype) * np.abs(np.nan_to_num(smax[lanes])))
    return g


def check_softmax(dump, rng, dtype):
    u = unit_roundoff(dtype)
    g = Group(f"softmax {dtype} along each axis (normal data, logits up to +-1000) and its "
              f"gradient",
              "reference scipy.special.softmax; relative error e + u(|x - lse| + K + 4), "
              "doubled, e the log_sum_exp bound; gradient y(w - sum w y) bounded by the same "
              "relative error times |w|y + y(|sum w y| + sum |w| y)")
    xs = [as_dtype(3 * rng.standard_normal((4, 5, 6)), dtype), as_dtype(extreme_rows(dtype), dtype)]
    for x in xs:
        for ax in range(-1, x.ndim):
            lse, e = lse_parts(x, ax, u)
            k = x.shape[ax]
            p = special.softmax(x, axis=ax)
            w = as_dtype(rng.standard_normal(x.shape), dtype)
            y, gx = dump.run(dtype, "softmax", [x], w, (ax,))
            tag = f"{x.shape} axis={ax}"
            rel = 2 * (e + u * (np.abs(x - lse) + k + 4))
            g.compare(f"value {tag}", y, p, rel * p + 8 * subnormal_step(dtype))
            s = np.sum(w * p, axis=ax, keepdims=True)
            s_abs = np.sum(np.abs(w) * p, axis=ax, keepdims=True)
            mag = np.abs(w) * p + p * (np.abs(s) + s_abs)
            g.compare(f"d/dx {tag}", gx, p * (w - s),
                      (rel + 2 * (k + 3) * u) * mag + 8 * subnormal_step(dtype))
    return g


BROADCAST_PAIRS = [
    ((), (3, 4), "scalar and matrix"),
    ((3, 4), (), "matrix and scalar"),
    ((3, 4), (3, 1), "per row"),
    ((3, 4), (4,), "per column, lower rank"),
    ((1, 4), (3, 4), "per column, size-1 axis"),
    ((2, 3, 4, 5), (1, 3, 1, 1), "per channel NCHW"),
    ((1, 3, 1, 1), (2, 3, 4, 5), "per channel NCHW, channel first"),
    ((3, 1), (1, 4), "both sides"),
    ((1, 1), (2, 3), "size-1 matrix"),
    ((1,), (1,), "size-1 both"),
    ((5, 1, 1), (1,), "size-1 against rank 3"),
    ((4, 1, 6), (5, 1), "rank 3 against rank 2, both sides"),
    ((3, 4), (3, 4), "equal shapes"),
    ((32, 16, 16, 16), (1, 16, 1, 1), "per channel NCHW, 131072 elements"),
    ((16, 1, 1), (64, 16, 8, 8), "per channel, lower rank, 65536 elements"),
    ((256, 1), (1, 300), "both sides, 76800 elements"),
]


def check_broadcast(dump, rng, dtype):
    u = unit_roundoff(dtype)
    g = Group(f"add, subtract, multiply, divide {dtype} with broadcasting "
              f"({len(BROADCAST_PAIRS)} shape pairs) and the gradients d sum(w op(a,b))/da, /db",
              "reference numpy broadcasting arithmetic (bit-identical: one IEEE-754 operation "
              "per element) and sum_to_shape (numpy.sum over broadcast axes); gradient "
              "|error| <= ((r+1)(u + u64) + 2 gamma_K(u64)) sum|terms|, r = roundings per term")
    np_type = np.float64 if dtype == "f64" else np.float32
    for sa, sb, label in BROADCAST_PAIRS:
        a = as_dtype(rng.standard_normal(sa), dtype)
        # divisors away from zero: |b| in [0.5, 2)
        b = as_dtype(rng.uniform(0.5, 2.0, sb) * rng.choice([-1.0, 1.0], sb), dtype)
        out_shape = np.broadcast_shapes(sa, sb)
        A = np.broadcast_to(a, out_shape)
        B = np.broadcast_to(b, out_shape)
        for op in ("add", "subtract", "multiply", "divide"):
            w = as_dtype(rng.standard_normal(out_shape), dtype)
            y, ga, gb = dump.run(dtype, op, [a, b], w)
            tag = f"{op} {sa} {sb} ({label})"
            # reference: numpy's own arithmetic in the element type
            ref = getattr(np, op)(a.astype(np_type), b.astype(np_type)).astype(np.float64)
            g.compare(f"value {tag}", y, ref, 0.0)
            if op == "add":
                terms = [(w, 0), (w, 0)]
            elif op == "subtract":
                terms = [(w, 0), (-w, 0)]
            elif op == "multiply":
                terms = [(w * B, 1), (w * A, 1)]
            else:
                terms = [(w / B, 1), (-w * A / B ** 2, 3)]
            for (term, r), grad, shape, name in ((terms[0], ga, sa, "a"), (terms[1], gb, sb, "b")):
                k = term.size // max(1, int(np.prod(shape)))
                mag = sum_to_shape(np.abs(term), shape)
                tol = ((r + 1) * (u + U64) + 2 * gamma(k, U64)) * mag
                g.compare(f"d/d{name} {tag}", grad, sum_to_shape(term, shape), tol)
    return g


def check_shapes(dump, rng, dtype):
    g = Group(f"transpose, permute, concat, slice, pad {dtype} and their gradients",
              "reference numpy.transpose, numpy.concatenate, basic slicing, numpy.pad; "
              "exact: values are only moved (gradients are the inverse moves of w)")

    def run(case, operands, params, ref, grads_ref, tag):
        w = as_dtype(rng.standard_normal(ref.shape), dtype)
        out = dump.run(dtype, case, operands, w, params)
        g.compare(f"{case} value {tag}", out[0], ref, 0.0)
        for i, (got, expect) in enumerate(zip(out[1:], grads_ref(w))):
            g.compare(f"{case} d/dx{i + 1} {tag}", got, expect, 0.0)

    for shape in ((5, 7), (300, 257), (1, 4)):
        x = as_dtype(rng.standard_normal(shape), dtype)
        run("transpose", [x], (), x.T, lambda w: [w.T], str(shape))
    for shape, perm in (((2, 3, 4, 5), (0, 2, 3, 1)), ((2, 3, 4, 5), (3, 1, 0, 2)),
                        ((3, 4, 5), (2, 0, 1)), ((2, 1, 3, 1), (3, 2, 1, 0)),
                        ((16, 8, 32, 16), (0, 2, 3, 1)), ((2, 1, 3, 2, 1, 2), (5, 0, 4, 2, 1, 3))):
        x = as_dtype(rng.standard_normal(shape), dtype)
        inv = tuple(int(i) for i in np.argsort(perm))
        run("permute", [x], perm, np.transpose(x, perm),
            lambda w, inv=inv: [np.transpose(w, inv)], f"{shape} {perm}")
    for shapes, axis in ((((2, 3), (4, 3), (1, 3)), 0), (((2, 3), (2, 1), (2, 5)), 1),
                         (((2, 3, 4), (2, 3, 2)), -1), (((3, 4),), 0),
                         (((2, 0, 3), (2, 2, 3)), 1)):
        xs = [as_dtype(rng.standard_normal(s), dtype) for s in shapes]
        ax = axis % len(shapes[0])
        cuts = np.cumsum([s[ax] for s in shapes])[:-1]
        run("concat", xs, (axis,), np.concatenate(xs, axis=axis),
            lambda w, ax=ax, cuts=cuts: np.split(w, cuts, axis=ax), f"{shapes} axis={axis}")
    for shape, axis, begin, end in (((5, 6), 0, 1, 4), ((5, 6), 1, 0, 6), ((5, 6), -1, 5, 6),
                                    ((2, 3, 4), 1, 1, 2), ((5, 6), 0, 2, 2)):
        x = as_dtype(rng.standard_normal(shape), dtype)
        ax = axis % len(shape)
        index = [slice(None)] * len(shape)
        index[ax] = slice(begin, end)
        index = tuple(index)

        def grads(w, index=index, shape=shape):
            z = np.zeros(shape)
            z[index] = w
            return [z]

        run("slice", [x], (axis, begin, end), x[index], grads, f"{shape} axis={axis} {begin}:{end}")
    for shape, axis, before, after in (((3, 4), 0, 1, 2), ((3, 4), 1, 0, 3), ((2, 3, 4), -1, 2, 0),
                                       ((2, 3, 4), 1, 0, 0)):
        x = as_dtype(rng.standard_normal(shape), dtype)
        ax = axis % len(shape)
        widths = [(0, 0)] * len(shape)
        widths[ax] = (before, after)
        index = [slice(None)] * len(shape)
        index[ax] = slice(before, before + shape[ax])
        run("pad", [x], (axis, before, after), np.pad(x, widths),
            lambda w, index=tuple(index): [w[index]], f"{shape} axis={axis} {before},{after}")
    return g


# Elementwise functions: (case, reference value, reference derivative, finite inputs, special
# inputs, value bound in ulp, derivative bound as a function (x, ref value, w, u) -> tol).
def unary_table(dtype):
    big = 700.0 if dtype == "f64" else 80.0
    edge = 709.0 if dtype == "f64" else 88.0        # exp just below overflow
    under = -745.0 if dtype == "f64" else -103.0    # exp in the subnormal range
    sat = 30.0 if dtype == "f64" else 12.0          # sigmoid and tanh round to +-1 beyond
    tiny = 1e-300 if dtype == "f64" else 1e-38
    huge = 1e300 if dtype == "f64" else 3e38
    # beyond: e^|x| overflows the element type (float64 above ~709.8, float32 above ~88.7),
    # so a formula that forms e^x unguarded fails there.
    beyond = 1000.0
    mids = [-beyond, -big, -100.0, -sat, -1.0, -1e-10, 0.0, 1e-10, 0.5, 1.0, sat, 100.0, big,
            beyond]
    magnitudes = np.geomspace(1e-8, 12.0, 2000).tolist()
    sweep = magnitudes + [-m for m in magnitudes]
    rel = lambda k: (lambda x, y, w, u: k * u * np.abs(y))
    return [
        # exp: value 8 ulp (libm exp, 2 ulp each side, doubled for the float rounding of the
        # reference); d/dx = w e^x, one more rounding.
        ("exp", np.exp, lambda x: np.exp(x),
         [under, -big, -100.0, -1.0, -1e-10, 0.0, 1e-10, 1.0, 100.0, big, edge],
         [np.inf, -np.inf, np.nan, edge + 1.0],
         8, rel(10)),
        # log: 8 ulp; d/dx = w / x, one rounding each side.
        ("log", np.log, lambda x: 1.0 / x,
         [5e-324 if dtype == "f64" else 1e-45, tiny, 1e-10, 0.5, 1.0, 2.0, 100.0, big, huge],
         [0.0, -1.0, np.inf, -np.inf, np.nan],
         8, rel(4)),
        # tanh: 8 ulp; the engine's derivative w(1 - y^2) rounds y^2 and the difference:
        # |error| <= |w| (18 u y^2 + 4 u |1 - y^2|) + u|result|, doubled for the reference
        # w / cosh(x)^2. Besides the extremes, a sweep of 4,000 magnitudes from 1e-8 to 12
        # of both signs: float tanh is a rational approximation evaluated in vector registers
        # (engine/kernels.cpp, tanh_run), not libm, so it is checked across its whole range.
        ("tanh", np.tanh, lambda x: 1.0 / np.cosh(x) ** 2,
         mids + sweep, [np.inf, -np.inf, np.nan], 8,
         lambda x, y, w, u: 2 * (np.abs(w) * (18 * u * np.tanh(x) ** 2 +
                                             4 * u * np.abs(1 - np.tanh(x) ** 2)) + u * np.abs(y))),
        # sigmoid: 8 ulp; engine derivative w y (1 - y): |error| <= |w| y ((1 - y) 20u + 8u y),
        # doubled; reference w expit(x) expit(-x).
        ("sigmoid", special.expit, lambda x: special.expit(x) * special.expit(-x),
         mids, [np.inf, -np.inf, np.nan], 8,
         lambda x, y, w, u: 2 * np.abs(w) * special.expit(x) *
         (special.expit(-x) * 20 * u + 8 * u * special.expit(x)) + 2 * u * np.abs(y)),
        # softplus: reference numpy.logaddexp(0, x) (log(e^0 + e^x)); 8 ulp; d/dx = w expit(x).
        ("softplus", lambda x: np.logaddexp(0.0, x), special.expit,
         mids, [np.inf, -np.inf, np.nan], 8, rel(12)),
        # log_sigmoid: reference scipy.special.log_expit; 8 ulp; d/dx = w expit(-x).
        ("log_sigmoid", special.log_expit, lambda x: special.expit(-x),
         mids, [np.inf, -np.inf, np.nan], 8, rel(12)),
    ]


def check_unary(dump, rng, dtype):
    u = unit_roundoff(dtype)
    groups = []
    for case, f, df, finite, specials, ulps, dtol in unary_table(dtype):
        why = {
            "exp": "reference numpy.exp",
            "log": "reference numpy.log",
            "tanh": "reference numpy.tanh, derivative 1/numpy.cosh^2",
            "sigmoid": "reference scipy.special.expit, derivative expit(x) expit(-x)",
            "softplus": "reference numpy.logaddexp(0, x), derivative scipy.special.expit",
            "log_sigmoid": "reference scipy.special.log_expit, derivative expit(-x)",
        }[case]
        g = Group(f"{case} {dtype} at extreme inputs {min(finite):g}..{max(finite):g}, "
                  f"specials {specials} and its gradient",
                  f"{why}; value {ulps} ulp + {ulps} subnormal steps; bound on the derivative "
                  f"in the derivative table (check_ops.py, unary_table)")
        x = as_dtype(np.array(finite), dtype)
        w = as_dtype(rng.standard_normal(x.shape), dtype)
        with np.errstate(all="ignore"):
            ref = round_to(f(x), dtype)
            dref = w * df(x)
        y, gx = dump.run(dtype, case, [x], w)
        step = subnormal_step(dtype)
        at = x.tolist() if x.size <= 20 else f"{x.size} inputs in {x.min():g}..{x.max():g}"
        g.compare(f"value at {at}", y, ref, ulps * u * np.abs(ref) + ulps * step)
        with np.errstate(all="ignore"):
            dt = dtol(x, dref, w, u) + ulps * step
        g.compare(f"derivative at {at}", gx, round_to(dref, dtype), dt)
        xs = as_dtype(np.array(specials), dtype)
        with np.errstate(all="ignore"):
            ref_s = round_to(f(xs), dtype)
        y, _ = dump.run(dtype, case, [xs], as_dtype(np.ones(xs.shape), dtype))
        g.compare(f"value at {xs.tolist()}", y, ref_s, ulps * u * np.abs(np.nan_to_num(ref_s)))
        groups.append(g)
    return groups


def check_logistic_cross_entropy(dump, rng, dtype):
    u = unit_roundoff(dtype)
    big = 700.0 if dtype == "f64" else 80.0
    g = Group(f"logistic_cross_entropy {dtype} at logits +-1000, +-{big:g}, +-100, +-30 "
              f"with targets 0, 0.3, 1, and its gradients",
              "reference -(t scipy.special.log_expit(z) + (1-t) log_expit(-z)); the engine's "
              "softplus(z) - t z subtracts terms of size |z|: |error| <= 16u (softplus(z) + "
              "|t z|); d/dz = w(expit(z) - t) within 16u|w|(expit(z) + |t|); both plus 8 "
              "subnormal steps; d/dt = -w z within 2u|w z|")
    zs = np.array([-1000.0, -big, -100.0, -30.0, -1.0, 0.0, 1.0, 30.0, 100.0, big, 1000.0])
    z, t = np.meshgrid(zs, np.array([0.0, 0.3, 1.0]))
    z = as_dtype(z, dtype)
    t = as_dtype(t, dtype)
    w = as_dtype(rng.standard_normal(z.shape), dtype)
    y, gz, gt = dump.run(dtype, "logistic_cross_entropy", [z, t], w)
    ref = -(t * special.log_expit(z) + (1 - t) * special.log_expit(-z))
    step = 8 * subnormal_step(dtype)  # softplus(-100) = 3.7e-44 is subnormal in float32
    g.compare("value", y, ref, 16 * u * (np.logaddexp(0.0, z) + np.abs(t * z)) + step)
    g.compare("d/dz", gz, w * (special.expit(z) - t),
              16 * u * np.abs(w) * (special.expit(z) + np.abs(t)) + step)
    g.compare("d/dt", gt, -w * z, 2 * u * np.abs(w * z))
    return g


def check_softmax_cross_entropy(dump, rng, dtype):
    u = unit_roundoff(dtype)
    g = Group(f"class_cross_entropy {dtype} (one-hot and soft targets; logits up to +-1000; "
              f"last and first axis) and its gradients",
              "reference -sum t scipy.special.log_softmax(z); |error| <= sum |t|(2e + "
              "4(K+4)u(|lse| + |z|)), e the log_sum_exp bound; d/dz = w((sum t) softmax - t), "
              "d/dt = -w log_softmax(z), bounded the same way")
    rows = extreme_rows(dtype)
    onehot = np.eye(4)[[2, 3, 1, 0, 3, 2]]
    soft = special.softmax(rng.standard_normal(rows.shape), axis=1)
    cases = [(rows, onehot, -1), (rows, soft, 1), (rows.T.copy(), soft.T.copy(), 0),
             (3 * rng.standard_normal((8, 10)), special.softmax(rng.standard_normal((8, 10)),
                                                                  axis=1), -1)]
    for z, t, ax in cases:
        z = as_dtype(z, dtype)
        t = as_dtype(t, dtype)
        k = z.shape[ax]
        lse, e = lse_parts(z, ax, u)
        log_p = special.log_softmax(z, axis=ax)
        p = special.softmax(z, axis=ax)
        w = as_dtype(rng.standard_normal(np.delete(z.shape, ax % z.ndim)), dtype)
        y, gz, gt = dump.run(dtype, "class_cross_entropy", [z, t], w, (ax,))
        tag = f"{z.shape} axis={ax}"
        term_err = 2 * e + 4 * (k + 4) * u * (np.abs(lse) + np.abs(z))
        g.compare(f"value {tag}", y, -np.sum(t * log_p, axis=ax),
                  np.sum(np.abs(t) * term_err, axis=ax))
        wk = np.expand_dims(w, ax)
        st = np.sum(t, axis=ax, keepdims=True)
        rel = 2 * (e + u * (np.abs(z - lse) + k + 4))
        g.compare(f"d/dz {tag}", gz, wk * (st * p - t),
                  np.abs(wk) * (np.abs(st) * p * (rel + 2 * (k + 3) * u) +
                                2 * (k + 3) * u * np.abs(t)) + 8 * subnormal_step(dtype))
        g.compare(f"d/dt {tag}", gt, -wk * log_p, np.abs(wk) * term_err)
    return g


def run_checks(script, argv, make_checks, seed=SEED):
    """The shared driver of the reference scripts: checks the command line, runs each named
    check (a function of the Dump returning a Group or a list of Groups), prints one line per
    group and a final "N passed, M failed" line, and returns the exit code."""
    if len(argv) != 2:
        print(f"{script}: usage: {script} PATH_TO_SPAR_REFERENCE_DUMP", file=sys.stderr)
        return 2
    program = argv[1]
    if not os.access(program, os.X_OK):
        print(f"{script}: {program}: not an executable file", file=sys.stderr)
        return 2
    passed = failed = 0
    with tempfile.TemporaryDirectory(prefix=f"spar_{script.split('.')[0]}_") as workdir:
        dump = Dump(program, workdir)
        for name, check in make_checks(np.random.default_rng(seed)):
            try:
                result = check(dump)
            except DumpError as e:
                print(f"FAIL {name}: {e}")
                failed += 1
                continue
            for group in result if isinstance(result, list) else [result]:
                if group.report():
                    passed += 1
                else:
                    failed += 1
    print(f"{passed} passed, {failed} failed")
    return 0 if failed == 0 else 1


def main(argv):
    groups = (check_matmul, check_sums, check_max, check_log_sum_exp,
              check_log_sum_exp_special, check_softmax, check_broadcast, check_shapes,
              check_unary, check_logistic_cross_entropy, check_softmax_cross_entropy)
    return run_checks("check_ops.py", argv, lambda rng: [
        (f"{check.__name__} {dtype}", lambda d, c=check, t=dtype: c(d, rng, t))
        for dtype in ("f64", "f32") for check in groups])


if __name__ == "__main__":
    sys.exit(main(sys.argv))
