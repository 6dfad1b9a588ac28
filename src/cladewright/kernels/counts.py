"""Bit-parallel pair counts over packed site patterns (numba).

Each sequence is held as one bit plane per unambiguous state: bit b of word
w of plane a is set when the sequence shows state a at the packed site.
Sites are packed in groups of equal bootstrap weight, so every word carries
one weight and a count is ``sum_w weight[w] * popcount(...)``: exact integer
arithmetic, whatever the weights.

Counts are computed for the pairs (i, j), j > i, of a block of rows, and
written to ``out[i - r0, j, :]``.
"""

import numba as nb
import numpy as np
from llvmlite import ir
from numba import types
from numba.extending import intrinsic

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


@nb.njit(parallel=True, cache=True, nogil=True)
def pair_counts(planes, valid, word_weight, r0, r1, kind, out):
    """Fill ``out[i - r0, j, :]`` for r0 <= i < r1 and i < j < n with the
    counts named by ``kind`` (see the module constants)."""
    n, n_words, k = planes.shape
    for ii in nb.prange(r1 - r0):
        i = r0 + ii
        for j in range(i + 1, n):
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
                out[ii, j, 0] = shared
                out[ii, j, 1] = same
            elif kind == FULL:
                for a in range(4):
                    for b in range(4):
                        out[ii, j, 4 * a + b] = 0
                for w in range(n_words):
                    wt = word_weight[w]
                    for a in range(4):
                        x = planes[i, w, a]
                        for b in range(4):
                            out[ii, j, 4 * a + b] += wt * popcount(x & planes[j, w, b])
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
                out[ii, j, 0] = shared
                out[ii, j, 1] = same
                out[ii, j, 2] = ag
                out[ii, j, 3] = ct
                if kind == COMPOSITION:
                    for a in range(4):
                        ci_ = 0
                        cj_ = 0
                        for w in range(n_words):
                            wt = word_weight[w]
                            ci_ += wt * popcount(planes[i, w, a] & valid[j, w])
                            cj_ += wt * popcount(planes[j, w, a] & valid[i, w])
                        out[ii, j, 4 + a] = ci_
                        out[ii, j, 8 + a] = cj_
