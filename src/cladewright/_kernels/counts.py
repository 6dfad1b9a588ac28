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
def _row_counts(planes, valid, word_weight, i, p0, kind, out):
    """Counts of the pairs (i, j), j > i, into out[:, p0 + j - i - 1].
    For :data:`TRANSITIONS`, ``planes`` is the two-bit form of
    :func:`transition_planes`."""
    n, n_words, k = planes.shape
    for j in range(i + 1, n):
        p = p0 + j - i - 1
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
            for a in range(4):
                for b in range(4):
                    out[4 * a + b, p] = 0
            for w in range(n_words):
                wt = word_weight[w]
                for a in range(4):
                    x = planes[i, w, a]
                    for b in range(4):
                        out[4 * a + b, p] += wt * popcount(x & planes[j, w, b])
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
        _row_counts(planes, valid, word_weight, i, pairs_before(i, n) - base, kind, out)


@nb.njit(cache=True, nogil=True)
def pair_counts_serial(planes, valid, word_weight, r0, r1, kind, out):
    """:func:`pair_counts` on the calling thread only: for bootstrap
    replicates, which run side by side on threads of their own."""
    n = planes.shape[0]
    base = pairs_before(r0, n)
    for i in range(r0, r1):
        _row_counts(planes, valid, word_weight, i, pairs_before(i, n) - base, kind, out)


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
