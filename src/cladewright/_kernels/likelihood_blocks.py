"""Maximum-likelihood distances of a block of pairs, each table counted from the site patterns (numba).

The pairs are those of a block of rows (i, j > i) in the row-major order of the upper triangle, as in
:mod:`.counts`. Each pair's table of (state in i, state in j) is counted over the sites where both are
unambiguous (protein: from the uint8 site patterns and their weights; DNA: from bit planes, 10 weighted
popcounts per word), searched by :mod:`.likelihood` and dropped, so that no block of tables is ever
stored. Every driver comes in a parallel form (chunks of pairs in parallel) and a ``_serial`` form for
runs already parallel across bootstrap replicates.

References
----------
Felsenstein (1981) J. Mol. Evol. 17:368-376 (the likelihood of a pair of sequences).
"""

import math

import numba as nb
import numpy as np

from .counts import popcount
from .likelihood import DNA_CELLS, DNA_LANES, solve_dna_batch, solve_pair
from .matrix import pairs_before

CHUNK = 128          # pairs per parallel task
DNA_BATCH = 32       # DNA pairs searched side by side


@nb.njit(cache=True, nogil=True)
def _first_pair(r0, p, n):
    """(i, j) of the p-th pair of the block that starts at row r0."""
    target = pairs_before(r0, n) + p
    i = r0
    while pairs_before(i + 1, n) <= target:
        i += 1
    return i, target - pairs_before(i, n) + i + 1


@nb.njit(cache=True, nogil=True, error_model="numpy")
def _chunk_states(patterns, weights, fold, r0, p0, p1, coef, base, lam, mode, alpha, rates, b_start, t_max,
                  d, shared):
    """Pairs p0 .. p1 - 1 of a block, each table counted from the site patterns."""
    n, n_sites = patterns.shape
    kk = base.shape[0]
    k = int(round(math.sqrt(kk)))
    table = np.zeros(kk)
    cells = np.empty(kk, dtype=np.int64)
    counts = np.empty(kk)
    g = np.empty((1, 4, lam.shape[0]))
    i, j = _first_pair(r0, p0, n)
    for p in range(p0, p1):
        if j >= n:
            i += 1
            j = i + 1
        n_cells = 0
        for s in range(n_sites):
            a = patterns[i, s]
            b = patterns[j, s]
            if a < k and b < k:
                c = fold[a * k + b]
                if table[c] == 0.0:
                    cells[n_cells] = c
                    n_cells += 1
                table[c] += weights[s]
        total = 0.0
        for q in range(n_cells):
            counts[q] = table[cells[q]]
            table[cells[q]] = 0.0
            total += counts[q]
        shared[p] = total
        d[p] = solve_pair(cells, counts, n_cells, coef, base, lam, mode, alpha, rates, b_start, t_max, g)
        j += 1


@nb.njit(parallel=True, cache=True, nogil=True)
def pair_distances_states(patterns, weights, fold, r0, m, coef, base, lam, mode, alpha, rates, b_start, t_max,
                          d, shared):
    """Distances ``d[:m]`` (and weighted shared sites ``shared[:m]``) of the m pairs of the block from row r0,
    each table counted from the site patterns (uint8 (n, S), states >= K not counted) and their weights;
    ``fold[a * K + b]`` is the folded cell of (a, b). Chunks of pairs run in parallel."""
    for c in nb.prange((m + CHUNK - 1) // CHUNK):
        _chunk_states(patterns, weights, fold, r0, c * CHUNK, min(m, (c + 1) * CHUNK), coef, base, lam, mode,
                      alpha, rates, b_start, t_max, d, shared)


@nb.njit(cache=True, nogil=True)
def pair_distances_states_serial(patterns, weights, fold, r0, m, coef, base, lam, mode, alpha, rates, b_start,
                                 t_max, d, shared):
    """:func:`pair_distances_states` on the calling thread only."""
    _chunk_states(patterns, weights, fold, r0, 0, m, coef, base, lam, mode, alpha, rates, b_start, t_max, d,
                  shared)


@nb.njit(cache=True, nogil=True, error_model="numpy")
def _chunk_planes(planes, word_weight, r0, p0, p1, coef, base, lam, mode, alpha, rates, b_start, t_max, d,
                  shared):
    """Pairs p0 .. p1 - 1 of a block of DNA sequences, each table counted from bit planes (A, C, G, T)
    in 10 weighted popcounts per word (the four a = b cells and the six unordered a != b), and searched
    in batches of DNA_BATCH pairs."""
    n, _, n_words = planes.shape
    W = np.zeros((3, DNA_LANES))
    B = np.ones(DNA_LANES)
    for q in range(10):
        B[q] = base[DNA_CELLS[q]]
        for k in range(3):
            W[k, q] = coef[DNA_CELLS[q], k]
    N = np.zeros((DNA_BATCH, DNA_LANES))
    G = np.empty((DNA_BATCH, 4, 3))
    state = np.empty((DNA_BATCH, 3))
    F = np.empty((DNA_BATCH, 3))
    active = np.empty(DNA_BATCH, dtype=np.int64)
    i, j = _first_pair(r0, p0, n)
    for first in range(p0, p1, DNA_BATCH):
        size = min(DNA_BATCH, p1 - first)
        for b in range(size):
            if j >= n:
                i += 1
                j = i + 1
            # scalar sums, so that the loop over words runs on vector registers
            aa = cc = gg = tt = ac = ag = at = cg = ct = gt = 0
            for w in range(n_words):
                wt = word_weight[w]
                ai, ci, gi, ti = planes[i, 0, w], planes[i, 1, w], planes[i, 2, w], planes[i, 3, w]
                aj, cj, gj, tj = planes[j, 0, w], planes[j, 1, w], planes[j, 2, w], planes[j, 3, w]
                aa += wt * popcount(ai & aj)
                cc += wt * popcount(ci & cj)
                gg += wt * popcount(gi & gj)
                tt += wt * popcount(ti & tj)
                ac += wt * popcount((ai & cj) | (ci & aj))
                ag += wt * popcount((ai & gj) | (gi & aj))
                at += wt * popcount((ai & tj) | (ti & aj))
                cg += wt * popcount((ci & gj) | (gi & cj))
                ct += wt * popcount((ci & tj) | (ti & cj))
                gt += wt * popcount((gi & tj) | (ti & gj))
            N[b, 0], N[b, 1], N[b, 2], N[b, 3], N[b, 4] = aa, cc, gg, tt, ac
            N[b, 5], N[b, 6], N[b, 7], N[b, 8], N[b, 9] = ag, at, cg, ct, gt
            shared[first + b] = aa + cc + gg + tt + ac + ag + at + cg + ct + gt
            j += 1
        solve_dna_batch(W, B, N, size, lam, mode, alpha, rates, b_start, t_max, G, F, state,
                        active, d[first:first + size])


@nb.njit(parallel=True, cache=True, nogil=True)
def pair_distances_planes(planes, word_weight, r0, m, coef, base, lam, mode, alpha, rates, b_start, t_max, d,
                          shared):
    """:func:`pair_distances_states` for DNA from bit planes (n, 4, words), state-major (the planes of
    :mod:`.counts` transposed, so that the loop over words runs on vector registers), and one weight per
    word: the bit-parallel count of the tables."""
    for c in nb.prange((m + CHUNK - 1) // CHUNK):
        _chunk_planes(planes, word_weight, r0, c * CHUNK, min(m, (c + 1) * CHUNK), coef, base, lam, mode, alpha,
                      rates, b_start, t_max, d, shared)


@nb.njit(cache=True, nogil=True)
def pair_distances_planes_serial(planes, word_weight, r0, m, coef, base, lam, mode, alpha, rates, b_start, t_max,
                                 d, shared):
    """:func:`pair_distances_planes` on the calling thread only."""
    _chunk_planes(planes, word_weight, r0, 0, m, coef, base, lam, mode, alpha, rates, b_start, t_max, d, shared)


@nb.njit(cache=True, nogil=True)
def state_counts(patterns, multiplicity, k):
    """``c[a, s]``: the sequences (row i counted ``multiplicity[i]`` times) in state a at pattern s, a < k
    (one pass over the patterns; the pooled divergence of :mod:`cladewright.distances.rate_estimates`)."""
    n, n_sites = patterns.shape
    c = np.zeros((k, n_sites))
    for i in range(n):
        m = multiplicity[i]
        for s in range(n_sites):
            a = patterns[i, s]
            if a < k:
                c[a, s] += m
    return c

