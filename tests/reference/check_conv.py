#!/usr/bin/python3
"""Checks spar's 2-D convolution and transposed convolution, their values and both tape
gradients, against scipy.signal.correlate / scipy.signal.convolve and numpy.

Usage: /usr/bin/python3 check_conv.py PATH_TO_SPAR_REFERENCE_DUMP

The dump protocol, the comparison (Group) and the rounding-error constants come from
check_ops.py in this folder. For every case the dump returns the value y and the gradients of
sum(wt * y) with respect to both operands, for a random weight wt shaped like y.

The references are computed independently of the engine's lowering (no unfolding into
columns, no matrix product):
  convolution, value: pad x with numpy.pad, correlate each (output channel, input channel) pair
    in 'valid' mode with scipy.signal.correlate, sum over input channels, keep every
    stride-th row and column.
  convolution, input gradient: insert stride-1 zeros between the entries of the output adjoint
    (dilate), convolve each pair in 'full' mode with scipy.signal.convolve, sum over output
    channels, crop the padding.
  convolution, weight gradient: correlate the padded input with the dilated output adjoint in
    'valid' mode (scipy.signal.correlate), summed over the batch.
  transposed_convolution, value: its definition: scatter each input pixel times the kernel into the
    output at stride steps, then crop the padding (numpy slicing and numpy.einsum). The output
    size follows Dumoulin & Visin (2016), "A guide to convolution arithmetic for deep
    learning": o' = s(i' - 1) + a + k - 2p, a the output padding.
  transposed_convolution, gradients: as a function of its input it is the adjoint of convolution, so
    d/dz = convolution(wt, w) (correlation reference above); as a function of its kernel,
    d/dw[o,c,p,q] = sum_{n,i,j} wt[n, c, i s + p - pad, j s + q - pad] z[n,o,i,j], the
    correlation of the padded wt with the dilated z (the weight-gradient reference above).
scipy is asked for method='direct' so that it sums products (an FFT would not satisfy the
elementwise bound below).

Tolerances. Every output entry of all six computations is a sum of K products of an operand
entry with a kernel (or adjoint) entry, so the dot-product bound holds for any summation
order: |error| <= gamma_K(u) * sum |terms| (Higham, Accuracy and Stability of Numerical
Algorithms, 2nd ed., section 3.1; from memory), gamma_K = K u / (1 - K u), u the unit
roundoff of the engine's element type. sum |terms| is the same reference applied to the
absolute values of both operands (every map here is bilinear with non-negative structure).
The reference's own float64 rounding adds gamma_K(2^-53) for the reference and as much again
for the magnitude, as in check_ops.py: tol = (gamma_K(u) + 2 gamma_K(u64)) sum |terms|. K is
C KH KW for a convolution value, O KH KW for its input gradient (an upper bound: a stride skips
some taps), N OH OW for its weight gradient, and the same counts for the transposed
convolution. Entries that no product reaches (rows beyond the last window when the stride does
not divide the span, padding-only outputs of a 1x1 kernel) have sum |terms| = 0 and must be
exactly 0. A last group uses small integers, for which every product and partial sum is an
integer below 2^24 and so exact in float32 and float64: there the engine must agree exactly.

Output: one line per group, then "N passed, M failed". Exit status 0 when all pass, 1 when a
check fails, 2 for bad usage or when the dump program fails.
"""
import os
import sys

import numpy as np
from scipy import signal

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from check_ops import U64, Group, as_dtype, gamma, run_checks, unit_roundoff  # noqa: E402

SEED = 20240702


# ---- references ------------------------------------------------------------------------------

def out_extent(i, k, s, p):
    """Dumoulin & Visin 2016, relation 6: o = floor((i + 2p - k)/s) + 1."""
    return (i + 2 * p - k) // s + 1


def pad_spatial(x, ph, pw):
    return np.pad(x, ((0, 0), (0, 0), (ph, ph), (pw, pw)))


def dilate(a, sh, sw, h, w):
    """a [N, O, OH, OW] with sh-1 (sw-1) zeros inserted between rows (columns), zero-extended
    to h x w."""
    n, o, oh, ow = a.shape
    out = np.zeros((n, o, h, w))
    out[:, :, 0:sh * (oh - 1) + 1:sh, 0:sw * (ow - 1) + 1:sw] = a
    return out


def conv_value(x, w, s, p):
    """reference: scipy.signal.correlate (direct, 'valid') of the numpy.pad-ded input, strided."""
    (sh, sw), (ph, pw) = s, p
    xp = pad_spatial(x, ph, pw)
    n, c = x.shape[:2]
    o = w.shape[0]
    y = None
    for b in range(n):
        for oc in range(o):
            acc = sum(signal.correlate(xp[b, ci], w[oc, ci], mode="valid", method="direct")
                      for ci in range(c))[::sh, ::sw]
            if y is None:
                y = np.zeros((n, o) + acc.shape)
            y[b, oc] = acc
    return y


def conv_input_gradient(dy, w, s, p, h, wd):
    """reference: scipy.signal.convolve (direct, 'full') of the dilated output adjoint with
    each kernel, summed over output channels, padding cropped."""
    (sh, sw), (ph, pw) = s, p
    kh, kw = w.shape[2:]
    hp, wp = h + 2 * ph, wd + 2 * pw
    d = dilate(dy, sh, sw, hp - kh + 1, wp - kw + 1)
    n, o = dy.shape[:2]
    c = w.shape[1]
    dxp = np.zeros((n, c, hp, wp))
    for b in range(n):
        for ci in range(c):
            dxp[b, ci] = sum(signal.convolve(d[b, oc], w[oc, ci], mode="full", method="direct")
                             for oc in range(o))
    return dxp[:, :, ph:ph + h, pw:pw + wd]


def conv_weight_gradient(x, dy, s, p, kh, kw):
    """reference: scipy.signal.correlate (direct, 'valid') of the padded input with the
    dilated output adjoint, summed over the batch."""
    (sh, sw), (ph, pw) = s, p
    xp = pad_spatial(x, ph, pw)
    hp, wp = xp.shape[2:]
    d = dilate(dy, sh, sw, hp - kh + 1, wp - kw + 1)
    n, c = x.shape[:2]
    o = dy.shape[1]
    dw = np.zeros((o, c, kh, kw))
    for oc in range(o):
        for ci in range(c):
            dw[oc, ci] = sum(signal.correlate(xp[b, ci], d[b, oc], mode="valid", method="direct")
                             for b in range(n))
    return dw


def transposed_value(z, w, s, p, h, wd):
    """The definition: out[n, c, i s + p', j s + q'] += z[n,o,i,j] w[o,c,p',q'] on an
    unpadded canvas, then the padding cropped (numpy.einsum over o, numpy slicing)."""
    (sh, sw), (ph, pw) = s, p
    n, o, oh, ow = z.shape
    c, kh, kw = w.shape[1:]
    fh, fw = max(sh * (oh - 1) + kh, ph + h), max(sw * (ow - 1) + kw, pw + wd)
    canvas = np.zeros((n, c, fh, fw))
    for i in range(oh):
        for j in range(ow):
            canvas[:, :, i * sh:i * sh + kh, j * sw:j * sw + kw] += np.einsum(
                "no,ocpq->ncpq", z[:, :, i, j], w)
    return canvas[:, :, ph:ph + h, pw:pw + wd]


# ---- cases -----------------------------------------------------------------------------------

# convolution: (x shape N C H W, w shape O C KH KW, stride (h, w), padding (h, w)). Non-square
# inputs and kernels, stride 3, padding 2, 1x1 kernels, batch 1 and 5, channels 1 and 7, and
# spans (i + 2p - k) that the stride does not divide.
CONV_CASES = [
    ((1, 1, 7, 5), (1, 1, 3, 2), (1, 1), (0, 0)),
    ((5, 7, 9, 11), (3, 7, 3, 5), (3, 2), (2, 1)),
    ((5, 7, 6, 4), (7, 7, 1, 1), (1, 1), (0, 0)),
    ((5, 1, 7, 8), (7, 1, 1, 1), (3, 3), (2, 2)),
    ((1, 7, 10, 7), (1, 7, 2, 3), (3, 3), (2, 2)),
    ((2, 3, 8, 8), (4, 3, 4, 4), (2, 2), (1, 1)),
    ((1, 2, 3, 2), (3, 2, 7, 6), (1, 1), (2, 2)),
    ((5, 7, 13, 6), (7, 7, 5, 2), (3, 1), (2, 0)),
    # 693 output positions per sample: the engine's per-sample GEMM path (P >= 256)
    ((5, 2, 33, 20), (3, 2, 3, 4), (1, 1), (1, 2)),
]

# transposed_convolution: (z shape N O OH OW, w shape O C KH KW, stride, padding, output padding
# (a_h, a_w)); the output size is o' = s(i' - 1) + a + k - 2p (Dumoulin & Visin 2016).
TRANSPOSE_CASES = [
    ((5, 7, 4, 4), (7, 3, 4, 4), (2, 2), (1, 1), (0, 0)),
    ((5, 7, 3, 4), (7, 7, 3, 5), (3, 2), (2, 1), (2, 1)),
    ((1, 1, 3, 5), (1, 1, 2, 3), (1, 1), (0, 0), (0, 0)),
    ((5, 7, 4, 3), (7, 1, 1, 1), (3, 3), (2, 2), (2, 1)),
    ((1, 7, 2, 6), (7, 7, 5, 2), (3, 1), (2, 0), (1, 0)),
    ((5, 1, 5, 2), (1, 7, 3, 3), (3, 3), (0, 2), (0, 2)),
    # 272 input positions per sample: the engine's per-sample GEMM path (P >= 256)
    ((5, 3, 17, 16), (3, 2, 4, 4), (2, 2), (1, 1), (0, 1)),
]


def transposed_extent(i, k, s, p, a):
    """Dumoulin & Visin 2016: o' = s(i' - 1) + a + k - 2p."""
    return s * (i - 1) + a + k - 2 * p


def bound(k, u, mag):
    return (gamma(k, u) + 2 * gamma(k, U64)) * mag


def conv_shapes(xs, ws, s, p):
    n, c, h, wd = xs
    o, _, kh, kw = ws
    return n, c, h, wd, o, kh, kw, out_extent(h, kh, s[0], p[0]), out_extent(wd, kw, s[1], p[1])


def run_conv(dump, g, dtype, x, w, s, p, exact, tag):
    n, c, h, wd, o, kh, kw, oh, ow = conv_shapes(x.shape, w.shape, s, p)
    u = unit_roundoff(dtype)
    y_ref = conv_value(x, w, s, p)
    wt = g.weight(y_ref.shape, dtype, exact)
    y, gx, gw = dump.run(dtype, "convolution", [x, w], wt, (s[0], s[1], p[0], p[1]))
    gx_ref = conv_input_gradient(wt, w, s, p, h, wd)
    gw_ref = conv_weight_gradient(x, wt, s, p, kh, kw)
    if exact:
        tols = (0.0, 0.0, 0.0)
    else:
        ax, aw, awt = np.abs(x), np.abs(w), np.abs(wt)
        tols = (bound(c * kh * kw, u, conv_value(ax, aw, s, p)),
                bound(o * kh * kw, u, conv_input_gradient(awt, aw, s, p, h, wd)),
                bound(n * oh * ow, u, conv_weight_gradient(ax, awt, s, p, kh, kw)))
    g.compare(f"convolution value {tag}", y, y_ref, tols[0])
    g.compare(f"convolution d/dx {tag}", gx, gx_ref, tols[1])
    g.compare(f"convolution d/dw {tag}", gw, gw_ref, tols[2])


def run_transpose(dump, g, dtype, z, w, s, p, a, exact, tag):
    n, o, ih, iw = z.shape
    c, kh, kw = w.shape[1:]
    h = transposed_extent(ih, kh, s[0], p[0], a[0])
    wd = transposed_extent(iw, kw, s[1], p[1], a[1])
    u = unit_roundoff(dtype)
    y_ref = transposed_value(z, w, s, p, h, wd)
    wt = g.weight(y_ref.shape, dtype, exact)
    y, gz, gw = dump.run(dtype, "transposed_convolution", [z, w], wt, (s[0], s[1], p[0], p[1], h, wd))
    gz_ref = conv_value(wt, w, s, p)
    gw_ref = conv_weight_gradient(wt, z, s, p, kh, kw)
    if exact:
        tols = (0.0, 0.0, 0.0)
    else:
        az, aw, awt = np.abs(z), np.abs(w), np.abs(wt)
        tols = (bound(o * kh * kw, u, transposed_value(az, aw, s, p, h, wd)),
                bound(c * kh * kw, u, conv_value(awt, aw, s, p)),
                bound(n * ih * iw, u, conv_weight_gradient(awt, az, s, p, kh, kw)))
    g.compare(f"transposed_convolution value {tag}", y, y_ref, tols[0])
    g.compare(f"transposed_convolution d/dz {tag}", gz, gz_ref, tols[1])
    g.compare(f"transposed_convolution d/dw {tag}", gw, gw_ref, tols[2])


class ConvGroup(Group):
    def __init__(self, name, why, rng):
        super().__init__(name, why)
        self.rng = rng

    def weight(self, shape, dtype, integers):
        """The random weight wt of sum(wt * y): standard normal, or integers in -3..3."""
        if integers:
            return self.rng.integers(-3, 4, shape).astype(np.float64)
        return as_dtype(self.rng.standard_normal(shape), dtype)


BOUND_WHY = ("|error| <= (gamma_K(u) + 2 gamma_K(u64)) sum|terms| per entry (dot-product "
             "bound, check_conv.py docstring); unreached entries exactly 0")


def check_conv(dump, rng, dtype, cases):
    g = ConvGroup(f"convolution {dtype} value, d/dx, d/dw on {len(cases)} shapes (batch 1 and 5, "
                  f"channels 1 and 7, strides to 3, padding to 2, 1x1 and non-square kernels)",
                  "reference scipy.signal.correlate / convolve (direct) of numpy.pad-ded "
                  "inputs; " + BOUND_WHY, rng)
    for xs, ws, s, p in cases:
        x = as_dtype(rng.standard_normal(xs), dtype)
        w = as_dtype(rng.standard_normal(ws), dtype)
        run_conv(dump, g, dtype, x, w, s, p, False, f"x{xs} w{ws} s{s} p{p}")
    return g


def check_transpose(dump, rng, dtype, cases):
    g = ConvGroup(f"transposed_convolution {dtype} value, d/dz, d/dw on {len(cases)} shapes "
                  f"(output padding 0 to 2, strides to 3, padding to 2, 1x1 kernels)",
                  "reference: scatter definition with output size o' = s(i'-1) + a + k - 2p "
                  "(Dumoulin & Visin 2016); gradients scipy.signal.correlate (direct); " +
                  BOUND_WHY, rng)
    for zs, ws, s, p, a in cases:
        z = as_dtype(rng.standard_normal(zs), dtype)
        w = as_dtype(rng.standard_normal(ws), dtype)
        run_transpose(dump, g, dtype, z, w, s, p, a, False, f"z{zs} w{ws} s{s} p{p} a{a}")
    return g


def check_exact(dump, rng):
    g = ConvGroup("convolution and transposed_convolution f64 and f32 on integer-valued inputs in -3..3, "
                  "all shapes, value and both gradients",
                  "reference as above; exact: every product and partial sum is an integer of "
                  "magnitude below 2^24, so both the engine and scipy compute it without "
                  "rounding", rng)
    for dtype in ("f64", "f32"):
        for xs, ws, s, p in CONV_CASES:
            x = rng.integers(-3, 4, xs).astype(np.float64)
            w = rng.integers(-3, 4, ws).astype(np.float64)
            run_conv(dump, g, dtype, x, w, s, p, True, f"{dtype} x{xs} w{ws} s{s} p{p}")
        for zs, ws, s, p, a in TRANSPOSE_CASES:
            z = rng.integers(-3, 4, zs).astype(np.float64)
            w = rng.integers(-3, 4, ws).astype(np.float64)
            run_transpose(dump, g, dtype, z, w, s, p, a, True,
                          f"{dtype} z{zs} w{ws} s{s} p{p} a{a}")
    return g


def check_reference_sizes(rng):
    """The references themselves produce the sizes of Dumoulin & Visin's relations, so that a
    shape bug in a reference cannot hide behind the engine's agreeing with it."""
    g = Group("reference sizes: conv o = floor((i + 2p - k)/s) + 1 and transposed "
              "o' = s(i'-1) + a + k - 2p on every case",
              "Dumoulin & Visin 2016 (relation 6 and the transposed-convolution relation); "
              "exact", )
    for xs, ws, s, p in CONV_CASES:
        n, c, h, wd, o, kh, kw, oh, ow = conv_shapes(xs, ws, s, p)
        got = conv_value(rng.standard_normal(xs), rng.standard_normal(ws), s, p).shape
        g.compare(f"convolution value shape {xs} {ws}", np.array(got), np.array((n, o, oh, ow)), 0.0)
    for zs, ws, s, p, a in TRANSPOSE_CASES:
        h = transposed_extent(zs[2], ws[2], s[0], p[0], a[0])
        wd = transposed_extent(zs[3], ws[3], s[1], p[1], a[1])
        y = transposed_value(rng.standard_normal(zs), rng.standard_normal(ws), s, p, h, wd)
        g.compare(f"transposed_convolution value shape {zs} {ws}", np.array(y.shape),
                  np.array((zs[0], ws[1], h, wd)), 0.0)
        # the transposed output size gives back i' under the convolution relation
        g.compare(f"conv of o' gives i' {zs} {ws}",
                  np.array((out_extent(h, ws[2], s[0], p[0]), out_extent(wd, ws[3], s[1], p[1]))),
                  np.array(zs[2:]), 0.0)
    return g


def main(argv):
    return run_checks("check_conv.py", argv, lambda rng: [
        ("reference sizes", lambda d: check_reference_sizes(rng)),
        ("convolution f64", lambda d: check_conv(d, rng, "f64", CONV_CASES)),
        ("transposed_convolution f64", lambda d: check_transpose(d, rng, "f64", TRANSPOSE_CASES)),
        ("convolution f32", lambda d: check_conv(d, rng, "f32", CONV_CASES)),
        ("transposed_convolution f32", lambda d: check_transpose(d, rng, "f32", TRANSPOSE_CASES)),
        ("integer inputs", lambda d: check_exact(d, rng)),
    ], seed=SEED)


if __name__ == "__main__":
    sys.exit(main(sys.argv))
