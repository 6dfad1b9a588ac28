"""Bit-parallel pair counts over packed site patterns (numba).

Each sequence is held as one bit plane per unambiguous state: bit b of word
w of plane a is set when the sequence shows state a at the packed site.
Sites are packed in groups of equal bootstrap weight, so every word carries
one weight and a count is ``sum_w weight[w] * popcount(...)``: exact integer
arithmetic, whatever the weights.

Counts are computed for the pairs (i, j), j > i, of a block of rows, in
the row-major order of the upper triangle (condensed order), one count per
row of ``out``: the formulas then read contiguous arrays.
"""

import numba as nb
import numpy as np
from llvmlite import ir
from numba import types
from numba.extending import intrinsic

from .matrix import pairs_before

# Which counts a kernel fills, per pair.
IDENTITY = 0      # shared sites, identical sites
TRANSITIONS = 1   # shared, identical, A<->G, C<->T                      (DNA)
COMPOSITION = 2   # TRANSITIONS + each base of i and of j at shared sites (DNA)
FULL = 3          # the 4 x 4 table of state pairs, row-major            (DNA)
N_COUNTS = {IDENTITY: 2, TRANSITIONS: 4, COMPOSITION: 12, FULL: 16}


@intrinsic
def popcount(typingctx, x):
    """The LLVM population-count intrinsic on a uint64, as int64 (so that
    weighted sums stay integer: numba would promote int64 * uint64 to float)."""
    sig = types.int64(types.uint64)

    def codegen(context, builder, signature, args):
        fnty = ir.FunctionType(ir.IntType(64), [ir.IntType(64)])
        fn = builder.module.declare_intrinsic("llvm.ctpop", [ir.IntType(64)], fnty)
        return builder.call(fn, args)

    return sig, codegen


@nb.njit(cache=True, nogil=True)
def pack_planes(patterns, order, word_of, bit_of, n_words, n_states):
    """Bit planes (n, n_words, n_states) and the valid-state plane (n, n_words).

    ``order`` lists the patterns to pack; pattern ``order[t]`` goes to word
    ``word_of[t]``, bit ``bit_of[t]``.
    """
    n = patterns.shape[0]
    planes = np.zeros((n, n_words, n_states), dtype=np.uint64)
    valid = np.zeros((n, n_words), dtype=np.uint64)
    for i in range(n):
        for t in range(order.shape[0]):
            s = patterns[i, order[t]]
            if s < n_states:
                bit = np.uint64(1) << np.uint64(bit_of[t])
                planes[i, word_of[t], s] |= bit
                valid[i, word_of[t]] |= bit
    return planes, valid


@nb.njit(cache=True, nogil=True, inline="always")
def _row_counts(planes, valid, word_weight, i, j0, p0, kind, out):
    """Counts of the pairs (i, j), j >= j0 (j0 > i), into out[:, p0 + j - j0].
    For :data:`TRANSITIONS`, ``planes`` is the two-bit form of
    :func:`transition_planes`."""
    n, n_words, k = planes.shape
    for j in range(j0, n):
        p = p0 + j - j0
        if kind == IDENTITY:
            shared = 0
            same = 0
            for w in range(n_words):
                wt = word_weight[w]
                eq = np.uint64(0)
                for a in range(k):
                    eq |= planes[i, w, a] & planes[j, w, a]
                shared += wt * popcount(valid[i, w] & valid[j, w])
                same += wt * popcount(eq)
            out[0, p] = shared
            out[1, p] = same
        elif kind == FULL:
            # sixteen sums held in locals (not in ``out``, which the compiler
            # cannot keep in registers across the loop over words)
            c00 = c01 = c02 = c03 = c10 = c11 = c12 = c13 = 0
            c20 = c21 = c22 = c23 = c30 = c31 = c32 = c33 = 0
            for w in range(n_words):
                wt = word_weight[w]
                x0, x1, x2, x3 = planes[i, w, 0], planes[i, w, 1], planes[i, w, 2], planes[i, w, 3]
                y0, y1, y2, y3 = planes[j, w, 0], planes[j, w, 1], planes[j, w, 2], planes[j, w, 3]
                c00 += wt * popcount(x0 & y0)
                c01 += wt * popcount(x0 & y1)
                c02 += wt * popcount(x0 & y2)
                c03 += wt * popcount(x0 & y3)
                c10 += wt * popcount(x1 & y0)
                c11 += wt * popcount(x1 & y1)
                c12 += wt * popcount(x1 & y2)
                c13 += wt * popcount(x1 & y3)
                c20 += wt * popcount(x2 & y0)
                c21 += wt * popcount(x2 & y1)
                c22 += wt * popcount(x2 & y2)
                c23 += wt * popcount(x2 & y3)
                c30 += wt * popcount(x3 & y0)
                c31 += wt * popcount(x3 & y1)
                c32 += wt * popcount(x3 & y2)
                c33 += wt * popcount(x3 & y3)
            out[0, p], out[1, p], out[2, p], out[3, p] = c00, c01, c02, c03
            out[4, p], out[5, p], out[6, p], out[7, p] = c10, c11, c12, c13
            out[8, p], out[9, p], out[10, p], out[11, p] = c20, c21, c22, c23
            out[12, p], out[13, p], out[14, p], out[15, p] = c30, c31, c32, c33
        elif kind == TRANSITIONS:
            # Two-bit form (see transition_planes): a transversion changes the
            # purine bit, a transition only the keto bit.
            shared = 0
            diff = 0
            ts = 0
            ag = 0
            for w in range(n_words):
                wt = word_weight[w]
                ri, ki, vi = planes[i, w, 0], planes[i, w, 1], planes[i, w, 2]
                rj, kj, vj = planes[j, w, 0], planes[j, w, 1], planes[j, w, 2]
                both = vi & vj
                tv = (ri ^ rj) & both
                t = (ki ^ kj) & both & ~tv
                shared += wt * popcount(both)
                diff += wt * popcount(tv | t)
                ts += wt * popcount(t)
                ag += wt * popcount(t & ri)
            out[0, p] = shared
            out[1, p] = shared - diff
            out[2, p] = ag
            out[3, p] = ts - ag
        else:
            shared = 0
            same = 0
            ag = 0
            ct = 0
            for w in range(n_words):
                wt = word_weight[w]
                ai, ci, gi, ti = planes[i, w, 0], planes[i, w, 1], planes[i, w, 2], planes[i, w, 3]
                aj, cj, gj, tj = planes[j, w, 0], planes[j, w, 1], planes[j, w, 2], planes[j, w, 3]
                shared += wt * popcount(valid[i, w] & valid[j, w])
                same += wt * popcount((ai & aj) | (ci & cj) | (gi & gj) | (ti & tj))
                ag += wt * popcount((ai & gj) | (gi & aj))
                ct += wt * popcount((ci & tj) | (ti & cj))
            out[0, p] = shared
            out[1, p] = same
            out[2, p] = ag
            out[3, p] = ct
            for a in range(4):
                ci_ = 0
                cj_ = 0
                for w in range(n_words):
                    wt = word_weight[w]
                    ci_ += wt * popcount(planes[i, w, a] & valid[j, w])
                    cj_ += wt * popcount(planes[j, w, a] & valid[i, w])
                out[4 + a, p] = ci_
                out[8 + a, p] = cj_


def transition_planes(planes, valid):
    """The two-bit form of DNA bit planes that :data:`TRANSITIONS` counts
    read: (n, n_words, 3) planes of purine (A or G, IUPAC R), keto (G or T,
    IUPAC K) and valid. A and G share the purine bit, C and T lack it, and
    within each the keto bit tells the two apart: so a pair differs by a
    transversion when the purine bits differ, by a transition when only the
    keto bits do (NC-IUB 1985 for the R and K classes)."""
    out = np.empty(planes.shape[:2] + (3,), dtype=np.uint64)
    np.bitwise_or(planes[:, :, 0], planes[:, :, 2], out=out[:, :, 0])
    np.bitwise_or(planes[:, :, 2], planes[:, :, 3], out=out[:, :, 1])
    out[:, :, 2] = valid
    return out


@nb.njit(parallel=True, cache=True, nogil=True)
def pair_counts(planes, valid, word_weight, r0, r1, kind, out):
    """Fill ``out[:, p]`` with the counts named by ``kind`` (see the module
    constants) for the p-th pair (i, j), r0 <= i < r1, i < j < n, in
    row-major order of the upper triangle; rows run in parallel."""
    n = planes.shape[0]
    base = pairs_before(r0, n)
    for ii in nb.prange(r1 - r0):
        i = r0 + ii
        _row_counts(planes, valid, word_weight, i, i + 1, pairs_before(i, n) - base, kind, out)


@nb.njit(cache=True, nogil=True)
def pair_counts_serial(planes, valid, word_weight, r0, r1, kind, out):
    """:func:`pair_counts` on the calling thread only: for bootstrap
    replicates, which run side by side on threads of their own."""
    n = planes.shape[0]
    base = pairs_before(r0, n)
    for i in range(r0, r1):
        _row_counts(planes, valid, word_weight, i, i + 1, pairs_before(i, n) - base, kind, out)


@nb.njit(cache=True, nogil=True)
def cross_counts(planes, valid, word_weight, head, kind, out):
    """Counts of the pairs (i, j), i < head <= j, into ``out[:, i (n − head) + j − head]``
    (rows against columns only, for an off-diagonal tile of stacked rows), on
    the calling thread."""
    n = planes.shape[0]
    for i in range(head):
        _row_counts(planes, valid, word_weight, i, head, i * (n - head), kind, out)


@nb.njit(cache=True, nogil=True)
def put_pairs(values, r0, d):
    """Write the condensed distances ``d`` of the pairs of rows r0, r0 + 1, ...
    (row-major upper-triangle order) into the upper half of ``values``; the
    caller mirrors the whole matrix once, in cache blocks."""
    n = values.shape[0]
    i = r0
    j = r0 + 1
    for p in range(d.shape[0]):
        while j >= n:
            i += 1
            j = i + 1
        values[i, j] = d[p]
        j += 1


@nb.njit(cache=True, nogil=True)
def _log_det_one(block, p, a):
    """ln det F of pair p (see :func:`log_det_frequencies`), with ``a`` a 4 x 4 work array."""
    total = 0.0
    for r in range(4):
        for s in range(4):
            x = float(block[4 * r + s, p])
            a[r, s] = x
            total += x
    if total <= 0.0:
        return np.nan
    for r in range(4):
        for s in range(4):
            a[r, s] /= total
    sign = 1.0
    logdet = 0.0
    for k in range(4):
        piv = k
        big = abs(a[k, k])
        for r in range(k + 1, 4):
            if abs(a[r, k]) > big:
                big = abs(a[r, k])
                piv = r
        if big == 0.0:
            return np.nan
        if piv != k:
            for s in range(4):
                a[k, s], a[piv, s] = a[piv, s], a[k, s]
            sign = -sign
        d = a[k, k]
        if d < 0.0:
            sign = -sign
        logdet += np.log(abs(d))
        for r in range(k + 1, 4):
            f = a[r, k] / d
            if f != 0.0:
                for s in range(k + 1, 4):
                    a[r, s] -= f * a[k, s]
    return logdet if sign > 0.0 else np.nan


@nb.njit(parallel=True, cache=True, nogil=True)
def log_det_frequencies(block):
    """For each pair p of a (16, m) FULL count block: ln det F, F the 4 x 4
    table of state-pair frequencies (counts over their sum), by Gaussian
    elimination with partial pivoting; nan where det F <= 0 or no site is
    shared (the LogDet of Lockhart et al. 1994 is then undefined). Pairs run
    in parallel, in chunks."""
    m = block.shape[1]
    out = np.empty(m, np.float64)
    chunk = 4096
    for c in nb.prange((m + chunk - 1) // chunk):
        a = np.empty((4, 4), np.float64)
        for p in range(c * chunk, min(m, (c + 1) * chunk)):
            out[p] = _log_det_one(block, p, a)
    return out


@nb.njit(cache=True, nogil=True)
def log_det_frequencies_serial(block):
    """:func:`log_det_frequencies` on the calling thread only (bootstrap replicates)."""
    m = block.shape[1]
    out = np.empty(m, np.float64)
    a = np.empty((4, 4), np.float64)
    for p in range(m):
        out[p] = _log_det_one(block, p, a)
    return out
