"""Neighbour joining and BIONJ on matrices far from tree-like (cladewright.build.nj, kernels.nj_rows).

On such matrices the search leaves its sorted lists for bounds kept per row; the tree must stay that of a plain
full scan. Checked against: textbook_nj of test_nj.py (the plain O(n^3) scan of Saitou & Nei 1987, Studier &
Keppler 1988, Gascuel 1997), a plain full scan written here in the kernel's own order of floating-point
operations (for ties that only rounding decides), and scikit-bio's nj.
"""
import numpy as np
import pytest
from skbio import DistanceMatrix as SkDM
from skbio.tree import nj as sk_nj

from cladewright.build.nj import nj_arrays

from simulate import tied_matrix
from test_nj import same_splits, skbio_splits, textbook_nj, unrooted_splits

#: search settings: defaults; row bounds from the first join; tiny lists that run out at once, so that the
#: search moves to row bounds part way through.
SETTINGS = [{}, {"row_switch": 0.0}, {"row_switch": 0.01, "list_length": 1, "n_classes": 1}]


def euclidean(rng, n, dim):
    """Distances between n points uniform in the unit cube (invented data), exactly symmetric."""
    x = rng.random((n, dim))
    d = np.sqrt(((x[:, None, :] - x[None, :, :]) ** 2).sum(axis=2))
    d = np.triu(d, 1)
    return d + d.T


def rounding_scan_nj(D, bionj=False):
    """A plain full scan with the kernel's own arithmetic, in the same order of operations.

    Every step evaluates Q(i, k) = (r - 2) d(i, k) - (R_i + R_k) for every pair and takes the first least in
    row-major order (i < k) of the live rows; R is kept up to date by R_k + (d(k, u) - d(i, k) - d(j, k)) and
    summed left to right, the new cluster takes row i. Formulas: Studier & Keppler (1988); BIONJ's lambda and
    variances, Gascuel (1997); with four clusters left, the pair is taken among those with the first row (a
    pair and its complement have equal Q then: Studier & Keppler 1988). Ties are decided exactly as the
    rounded numbers fall, which is what "the same pair as a full scan" means once rounding can decide.
    """
    d = np.triu(np.array(D, dtype=float), 1)
    d = d + d.T
    v = d.copy()
    n = len(d)
    R = np.array([np.cumsum(row)[-1] for row in d])
    SV = R.copy()
    live = list(range(n))
    node = list(range(n))
    parent = np.full(2 * n - 2, -1)
    length = np.full(2 * n - 2, np.nan)
    t = 0
    while len(live) > 3:
        r = len(live)
        c = float(r - 2)
        L = np.array(live)
        if r == 4:
            q = 2.0 * d[L[0], L[1:]] - (R[L[0]] + R[L[1:]])
            i, j = L[0], L[1 + int(np.argmin(q))]
        else:
            Q = c * d[np.ix_(L, L)] - (R[L][:, None] + R[L][None, :])
            Q[np.tril_indices(r)] = np.inf
            a, b = np.unravel_index(np.argmin(Q), Q.shape)
            i, j = L[a], L[b]
        dij = d[i, j]
        li = 0.5 * dij + (R[i] - R[j]) / (2.0 * c)
        lj = dij - li
        u = n + t
        parent[node[i]] = parent[node[j]] = u
        length[node[i]], length[node[j]] = li, lj
        K = np.array([k for k in live if k not in (i, j)])
        dik, djk = d[i, K], d[j, K]
        if bionj:
            vij = v[i, j]
            lam = 0.5
            if vij != 0.0:
                lam = min(1.0, max(0.0, 0.5 + (SV[j] - SV[i]) / (2.0 * c * vij)))
            vik, vjk = v[i, K], v[j, K]
            du = lam * (dik - li) + (1.0 - lam) * (djk - lj)
            vu = lam * vik + (1.0 - lam) * vjk - lam * (1.0 - lam) * vij
            SV[K] += vu - vik - vjk
            SV[i] = np.cumsum(vu)[-1]
            v[i, K] = v[K, i] = vu
        else:
            du = 0.5 * (dik + djk - dij)
        R[K] = R[K] + (du - dik - djk)
        R[i] = np.cumsum(du)[-1]
        d[i, K] = d[K, i] = du
        node[i] = u
        live.remove(j)
        t += 1
    a, b, e = live
    root = n + t
    for x in live:
        parent[node[x]] = root
    length[node[a]] = 0.5 * (d[a, b] + d[a, e] - d[b, e])
    length[node[b]] = 0.5 * (d[a, b] + d[b, e] - d[a, e])
    length[node[e]] = 0.5 * (d[a, e] + d[b, e] - d[a, b])
    return parent, length


# ---- random points: no ties, the textbook scan ----------------------------------------------------------

@pytest.mark.parametrize("bionj", [False, True])
@pytest.mark.parametrize("dim", [2, 10, 30])
def test_euclidean_matrices_equal_textbook_scan(bionj, dim):
    # reference: textbook_nj (test_nj.py), the plain O(n^3) scan; Euclidean distances of random points are
    # far from tree-like when the points have many dimensions.
    rng = np.random.default_rng(100 * dim + bionj)
    for n in (4, 5, 9, 17, 40, 90, 300):
        D = euclidean(rng, n, dim)
        rp, rl = textbook_nj(D, bionj=bionj)
        for kw in SETTINGS:
            p, l = nj_arrays(D, bionj=bionj, **kw)
            np.testing.assert_array_equal(p, rp, err_msg=f"n={n} {kw}")
            np.testing.assert_allclose(l, rl, rtol=1e-9, atol=1e-12)


# ---- ties: exact arithmetic, and rounding ---------------------------------------------------------------

@pytest.mark.parametrize("kw", SETTINGS)
def test_integer_distances_with_ties_equal_textbook_scan(kw):
    # reference: textbook_nj. Integer distances (a few values, or rounded distances of points) keep NJ's
    # arithmetic exact (halves and sums of small integers), so the first-minimum tie rule alone decides.
    rng = np.random.default_rng(31)
    for trial in range(60):
        n = int(rng.integers(4, 70))
        if trial % 2:
            D = tied_matrix(rng, n, 0, 4)
        else:
            D = np.round(4 * euclidean(rng, n, 6))
        p, l = nj_arrays(D, **kw)
        rp, rl = textbook_nj(D)
        np.testing.assert_array_equal(p, rp)
        np.testing.assert_allclose(l, rl, rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("bionj", [False, True])
def test_ties_decided_by_rounding_equal_full_scan(bionj):
    # reference: rounding_scan_nj above, a plain full scan in the kernel's order of operations: with ties
    # that only rounding decides (BIONJ's lambda, many equal distances) the pair is still the scan's.
    rng = np.random.default_rng(57 + bionj)
    for trial in range(42):
        n = 260 if trial >= 40 else int(rng.integers(4, 120))   # 260: the search moves to row bounds midway
        D = tied_matrix(rng, n, 1, 3) if trial % 2 else np.round(3 * euclidean(rng, n, 12))
        rp, rl = rounding_scan_nj(D, bionj=bionj)
        for kw in SETTINGS:
            p, l = nj_arrays(D, bionj=bionj, **kw)
            np.testing.assert_array_equal(p, rp, err_msg=f"trial {trial} n={n} {kw}")
            np.testing.assert_array_equal(l, rl)


def test_all_distances_equal():
    # reference: textbook_nj; every pair ties at every step (exact arithmetic), so the first pair is joined.
    for n in (4, 7, 50, 200):
        D = np.ones((n, n)) - np.eye(n)
        rp, rl = textbook_nj(D)
        for kw in SETTINGS:
            p, l = nj_arrays(D, **kw)
            np.testing.assert_array_equal(p, rp)
            np.testing.assert_allclose(l, rl, rtol=1e-12, atol=1e-12)


# ---- reference library ----------------------------------------------------------------------------------

def test_euclidean_matrix_matches_scikit_bio():
    # reference: skbio.tree.nj (scikit-bio 0.7): the same splits and lengths on small hard matrices.
    rng = np.random.default_rng(4)
    for n in (6, 25, 60):
        D = euclidean(rng, n, 10)
        names = [f"t{i}" for i in range(n)]
        ref = sk_nj(SkDM(D, ids=names), neg_as_zero=False)
        for kw in SETTINGS:
            p, l = nj_arrays(D, **kw)
            same_splits(unrooted_splits(p, l, n), skbio_splits(ref, names), rtol=1e-9, atol=1e-9)
