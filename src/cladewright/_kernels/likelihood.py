"""Maximum-likelihood distance of every pair of sequences under a reversible model (numba).

For a pair with the weighted table ``n_ab`` of (state in i, state in j) over the sites where both are
unambiguous, the log-likelihood of the distance t is ``log L(t) = sum_ab n_ab ln(pi_a P_ab(t))``. With the
spectral form ``Q = R diag(lambda) L`` of the rate matrix (``L = R^-1``),

    pi_a P_ab(t) = pi_a delta_ab + sum_k c_abk (g(lambda_k t) - 1),    c_abk = pi_a R_ak L_kb,

where g is ``exp`` (equal rates), ``(1 - x / alpha)^(-alpha)`` (rates across sites from a continuous gamma
distribution of shape alpha and mean 1; Jin & Nei 1990) or the mean of ``exp(x r_c)`` over the mean rates
r_c of k discrete gamma categories (Yang 1994). Written with ``g - 1`` (``expm1``) the probability of a
change keeps its digits as t goes to 0. ``pi_a P_ab`` is symmetric in a and b (reversibility), so each table
is folded onto ``a <= b`` and only its nonzero cells are kept; the stationary eigenvalue (0) adds nothing.

Each pair's t maximises log L by safeguarded steps on ``d log L / dt``: Halley's (third order, from the
first three derivatives of log L), else Newton's, kept inside a bracket ``lo < t < hi`` with the
derivative positive at lo and negative at hi; a step that would leave it is replaced by bisection (or,
before any negative derivative is seen, by doubling t). A Halley step below HALLEY_TOL of t (a Newton step
below NEWTON_TOL) ends the search, the error left being of the order of its cube (square). The start is the
equal-input closed form ``-b ln(1 - p / b)``, ``b = 1 - sum pi_a^2`` (its gamma form with gamma rates),
from the pair's proportion p of differing sites. A pair whose likelihood still rises at ``t_max`` is
saturated (NaN); a pair without shared site is NaN with ``shared = 0``; a pair without difference is at 0.

The tables of all pairs are counted and searched in :mod:`.likelihood_blocks`; here, the search itself,
and :func:`table_distances` for tables given.

References
----------
Felsenstein (1981) J. Mol. Evol. 17:368-376 (the likelihood of a pair of sequences); Tavaré (1986) Lect.
Math. Life Sci. 17:57-86; Jin & Nei (1990) Mol. Biol. Evol. 7:82-102; Yang (1994) J. Mol. Evol.
39:306-314.
"""

import math

import numba as nb
import numpy as np


# How rates vary across sites (``mode``).
EQUAL = 0       # one rate at every site: g = exp
GAMMA = 1       # continuous gamma of shape alpha, mean 1
DISCRETE = 2    # the mean over discrete gamma categories (rates given)

MAX_STEPS = 200
HALLEY_TOL = 1e-4    # relative step sizes that end the search (see the module docstring)
NEWTON_TOL = 1e-7
BISECT_TOL = 1e-13   # a bracket this narrow (relative) ends it too
# The 10 cells a <= b of a 4 x 4 table, as a * 4 + b, in the order likelihood_blocks counts them; the DNA
# search holds them in 16 lanes (the last 6 empty) so that its loop over cells runs on vector registers.
DNA_CELLS = np.array([0, 5, 10, 15, 1, 2, 3, 6, 7, 11], dtype=np.int64)
DNA_LANES = 16
# The loops over cells may reorder their sums (fastmath); and every kernel takes error_model="numpy": a
# division by zero gives inf (caught where it matters) rather than a Python exception, whose test would
# keep those loops off vector registers.
FAST = {"reassoc", "contract", "arcp"}


@nb.njit(cache=True, nogil=True, error_model="numpy")
def _factors(lam, t, mode, alpha, rates, g, r):
    """``g[r, 0, k] = g(lambda_k t) - 1`` and ``g[r, n, k]`` the n-th t-derivative of g (n = 1, 2, 3).
    (Rows of one scratch array are indexed rather than sliced: a slice is an object to count.)"""
    for k in range(lam.shape[0]):
        x = lam[k]
        if mode == EQUAL:
            # exp is the cheaper call; expm1 keeps the digits of g - 1 where it is small
            xt = x * t
            if xt < -0.01:
                e = math.exp(xt)
                h = e - 1.0
            else:
                h = math.expm1(xt)
                e = 1.0 + h
            g[r, 0, k] = h
            g[r, 1, k] = x * e
            g[r, 2, k] = x * x * e
            g[r, 3, k] = x * x * x * e
        elif mode == GAMMA:
            # g = (1 - x t / alpha)^(-alpha); its n-th derivative has the power -alpha - n
            u = math.log1p(-x * t / alpha)
            h = math.expm1(-alpha * u)
            v = 1.0 / (1.0 - x * t / alpha)
            b1 = (1.0 + h) * v
            g[r, 0, k] = h
            g[r, 1, k] = x * b1
            g[r, 2, k] = x * x * (1.0 + 1.0 / alpha) * b1 * v
            g[r, 3, k] = x * x * x * (1.0 + 1.0 / alpha) * (1.0 + 2.0 / alpha) * b1 * v * v
        else:
            s0 = 0.0
            s1 = 0.0
            s2 = 0.0
            s3 = 0.0
            for c in range(rates.shape[0]):
                xr = x * rates[c]
                h = math.expm1(xr * t)
                e = 1.0 + h
                s0 += h
                s1 += xr * e
                s2 += xr * xr * e
                s3 += xr * xr * xr * e
            m = rates.shape[0]
            g[r, 0, k] = s0 / m
            g[r, 1, k] = s1 / m
            g[r, 2, k] = s2 / m
            g[r, 3, k] = s3 / m


@nb.njit(cache=True, nogil=True, error_model="numpy", fastmath=FAST)
def _slope_cells(cells, counts, n_cells, coef, base, g):
    """The first three t-derivatives of log L over the folded cells ``cells[:n_cells]`` (rows of ``coef``
    (K * K, nk) and ``base``); (inf, -inf, 0) where a cell's probability is not above 0 (t so small that a
    change seen is all but impossible)."""
    nk = g.shape[2]
    f1 = 0.0
    f2 = 0.0
    f3 = 0.0
    for c in range(n_cells):
        idx = cells[c]
        p = base[idx]
        d1 = 0.0
        d2 = 0.0
        d3 = 0.0
        for k in range(nk):
            w = coef[idx, k]
            p += w * g[0, 0, k]
            d1 += w * g[0, 1, k]
            d2 += w * g[0, 2, k]
            d3 += w * g[0, 3, k]
        if not p > 0.0:
            return np.inf, -np.inf, 0.0
        q = 1.0 / p
        r1 = d1 * q
        r2 = d2 * q
        n = counts[c]
        f1 += n * r1
        f2 += n * (r2 - r1 * r1)
        f3 += n * (d3 * q - r1 * (3.0 * r2 - 2.0 * r1 * r1))
    return f1, f2, f3


@nb.njit(cache=True, nogil=True, error_model="numpy", fastmath=FAST)
def _slope_dna(W, B, N, g, r):
    """:func:`_slope_cells` for DNA table r: the 16 lanes of W (3, 16), B (16,) and N[r] (see DNA_CELLS),
    with the sums over the three nonzero eigenvalues written out and no branch in the loop over cells."""
    h0, h1, h2 = g[r, 0, 0], g[r, 0, 1], g[r, 0, 2]
    a0, a1, a2 = g[r, 1, 0], g[r, 1, 1], g[r, 1, 2]
    b0, b1, b2 = g[r, 2, 0], g[r, 2, 1], g[r, 2, 2]
    c0, c1, c2 = g[r, 3, 0], g[r, 3, 1], g[r, 3, 2]
    f1 = 0.0
    f2 = 0.0
    f3 = 0.0
    negative = 0.0
    for c in range(DNA_LANES):
        w0 = W[0, c]
        w1 = W[1, c]
        w2 = W[2, c]
        p = B[c] + w0 * h0 + w1 * h1 + w2 * h2
        negative += p - abs(p)  # below 0 once any p is
        q = 1.0 / p
        r1 = (w0 * a0 + w1 * a1 + w2 * a2) * q
        r2 = (w0 * b0 + w1 * b1 + w2 * b2) * q
        r3 = (w0 * c0 + w1 * c1 + w2 * c2) * q
        n = N[r, c]
        f1 += n * r1
        f2 += n * (r2 - r1 * r1)
        f3 += n * (r3 - r1 * (3.0 * r2 - 2.0 * r1 * r1))
    if negative < 0.0 or not abs(f1) < np.inf:
        return np.inf, -np.inf, 0.0
    return f1, f2, f3


@nb.njit(cache=True, nogil=True, error_model="numpy")
def _start(same, total, mode, alpha, b_start, t_max):
    """The search's start, from the proportion p of differing sites: ``-b ln(1 - p / b)`` or its gamma
    form; 0 for a pair without difference, NaN for one without shared site."""
    if not total > 0.0:
        return np.nan
    if same >= total:
        return 0.0
    p = 1.0 - same / total
    if p < b_start * (1.0 - 1e-6):
        y = -math.log1p(-p / b_start)
        t = b_start * y if mode == EQUAL else b_start * alpha * math.expm1(y / alpha)
    else:
        t = 2.0
    return min(max(t, 1e-300), t_max)


@nb.njit(cache=True, nogil=True, error_model="numpy")
def _step(t, f1, f2, f3, lo, hi, bounded, t_max):
    """One safeguarded step from t, where d log L / dt = f1 and its derivatives f2, f3.

    Returns ``(t_next, lo, hi, bounded, done)``; when ``done``, t_next is the answer (NaN: saturated).
    """
    if f1 > 0.0:
        if t >= t_max:
            return np.nan, lo, hi, bounded, True  # still rising at the cap: saturated
        lo = t
    elif f1 < 0.0:
        hi = t
        bounded = True
    else:
        return t, lo, hi, bounded, True
    tn = np.nan
    if f2 < 0.0:
        denominator = 2.0 * f2 * f2 - f1 * f3
        if denominator > 0.0:
            tn = t - 2.0 * f1 * f2 / denominator
            if abs(tn - t) <= HALLEY_TOL * t:
                return min(max(tn, lo), hi), lo, hi, bounded, True
        if not lo < tn < hi:
            tn = t - f1 / f2
            if abs(tn - t) <= NEWTON_TOL * t:
                return min(max(tn, lo), hi), lo, hi, bounded, True
    if lo < tn < hi:
        return tn, lo, hi, bounded, False
    if bounded:
        return 0.5 * (lo + hi), lo, hi, bounded, hi - lo <= BISECT_TOL * hi
    if tn >= hi:
        return t_max, lo, hi, bounded, False
    return min(2.0 * t, t_max), lo, hi, bounded, False


@nb.njit(cache=True, nogil=True, error_model="numpy")
def solve_pair(cells, counts, n_cells, coef, base, lam, mode, alpha, rates, b_start, t_max, g):
    """The distance t in [0, t_max] that maximises the pair's likelihood (see the module docstring).

    ``cells[:n_cells]`` are folded cell indices a * K + b (a <= b) and ``counts`` their weighted counts;
    ``coef`` (K * K, nk) and ``base`` (K * K,) the folded model; ``lam`` (nk,) the nonzero eigenvalues;
    ``g`` a (1, 4, nk) scratch array. Returns NaN for a saturated pair or one without shared site.
    """
    k1 = int(round(math.sqrt(base.shape[0]))) + 1
    total = 0.0
    same = 0.0
    for c in range(n_cells):
        total += counts[c]
        if cells[c] % k1 == 0:  # a diagonal cell a * K + a
            same += counts[c]
    t = _start(same, total, mode, alpha, b_start, t_max)
    if not t > 0.0:
        return t
    lo, hi, bounded = 0.0, t_max, False
    for _ in range(MAX_STEPS):
        _factors(lam, t, mode, alpha, rates, g, 0)
        f1, f2, f3 = _slope_cells(cells, counts, n_cells, coef, base, g)
        t, lo, hi, bounded, done = _step(t, f1, f2, f3, lo, hi, bounded, t_max)
        if done:
            break
    return t


@nb.njit(cache=True, nogil=True, error_model="numpy")
def solve_dna_batch(W, B, N, n_pairs, lam, mode, alpha, rates, b_start, t_max, G, F, state, active, out):
    """:func:`solve_pair` for a batch of DNA tables, each held in the lanes of :func:`_slope_dna`
    (``N[b]``), searched side by side: each phase of a step (the factors, the slopes, the step) for every
    pair still searching in turn, so that the work of different pairs, which does not wait on each other,
    overlaps in the processor. ``G`` (batch, 4, 3), ``F`` and ``state`` (batch, 3) and ``active`` (batch,)
    are scratch; the distances go to ``out[:n_pairs]``."""
    n_active = 0
    for b in range(n_pairs):
        same = N[b, 0] + N[b, 1] + N[b, 2] + N[b, 3]
        total = 0.0
        for c in range(DNA_LANES):
            total += N[b, c]
        out[b] = _start(same, total, mode, alpha, b_start, t_max)
        state[b, 0] = 0.0      # lo
        state[b, 1] = t_max    # hi
        state[b, 2] = 0.0      # bounded (1.0) or not (0.0)
        if out[b] > 0.0:
            active[n_active] = b
            n_active += 1
    for _ in range(MAX_STEPS):
        if n_active == 0:
            break
        for q in range(n_active):
            b = active[q]
            _factors(lam, out[b], mode, alpha, rates, G, b)
        for q in range(n_active):
            b = active[q]
            F[b, 0], F[b, 1], F[b, 2] = _slope_dna(W, B, N, G, b)
        still = 0
        for q in range(n_active):
            b = active[q]
            t, lo, hi, bounded, done = _step(out[b], F[b, 0], F[b, 1], F[b, 2], state[b, 0], state[b, 1],
                                             state[b, 2] > 0.0, t_max)
            out[b] = t
            state[b, 0] = lo
            state[b, 1] = hi
            state[b, 2] = 1.0 if bounded else 0.0
            active[still] = b
            still += 0 if done else 1
        n_active = still


@nb.njit(parallel=True, cache=True, nogil=True)
def table_distances(tables, coef, base, lam, mode, alpha, rates, b_start, t_max, d):
    """Distances ``d[p]`` for given tables (m, K, K) of weighted (state in i, state in j) counts."""
    m, k, _ = tables.shape
    for p in nb.prange(m):
        cells = np.empty(k * k, dtype=np.int64)
        counts = np.empty(k * k)
        g = np.empty((1, 4, lam.shape[0]))
        n_cells = 0
        for a in range(k):
            for b in range(a, k):
                x = tables[p, a, b] + (tables[p, b, a] if b != a else 0.0)
                if x > 0.0:
                    cells[n_cells] = a * k + b
                    counts[n_cells] = x
                    n_cells += 1
        d[p] = solve_pair(cells, counts, n_cells, coef, base, lam, mode, alpha, rates, b_start, t_max, g)
