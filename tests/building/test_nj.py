"""Neighbour joining and BIONJ cores (cladewright.build.nj / kernels.nj).

Checked against: a worked example derived by hand, scikit-bio's NJ, a plain
O(n^3) textbook implementation written here, and the recovery of generating
trees from additive matrices.
"""
import numpy as np
import pytest
from skbio import DistanceMatrix as SkDM
from skbio.tree import nj as sk_nj

from cladewright.build.nj import nj_arrays

from simulate import additive_matrix, random_matrix, tied_matrix


# ---- helpers (test-local, independent of the code under test) --------------

def unrooted_splits(parent, length, n):
    """{leaf set on the side without leaf 0: summed edge length} of a tree in
    parent-array form, trivial splits included; the two edges at a degree-2
    root form one split."""
    m = len(parent)
    below = [set() for _ in range(m)]
    for leaf in range(n):
        v = leaf
        while v >= 0:
            below[v].add(leaf)
            v = parent[v]
    everyone = frozenset(range(n))
    out = {}
    for v in range(m):
        if parent[v] < 0:
            continue
        side = frozenset(below[v])
        if 0 in side:
            side = everyone - side
        if 0 < len(side) < n:
            out[side] = out.get(side, 0.0) + float(length[v])
    return out


def skbio_splits(tree, names):
    """The same map for a scikit-bio TreeNode."""
    pos = {x: i for i, x in enumerate(names)}
    n = len(names)
    everyone = frozenset(range(n))
    out = {}
    for node in tree.traverse(include_self=False):
        side = frozenset(pos[t.name] for t in node.tips(include_self=True))
        if 0 in side:
            side = everyone - side
        if 0 < len(side) < n:
            out[side] = out.get(side, 0.0) + float(node.length or 0.0)
    return out


def same_splits(a, b, rtol=1e-9, atol=1e-12):
    assert set(a) == set(b)
    for s in a:
        assert a[s] == pytest.approx(b[s], rel=rtol, abs=atol), s


def textbook_nj(D, bionj=False):
    """Plain O(n^3) NJ / BIONJ: the full Q matrix at every step.

    Saitou & Nei (1987) with the Studier & Keppler (1988) formulas; BIONJ's
    lambda and variance update from Gascuel (1997). Pair choice: the first
    minimum of Q in row-major order (i < j) of the current clusters, values
    within 1e-9 relative of the minimum counting as ties; the new cluster
    takes the smaller index, the larger is deleted.
    """
    d = np.array(D, dtype=float)
    v = d.copy()
    n = len(d)
    nodes = list(range(n))
    parent = np.full(2 * n - 2, -1)
    length = np.full(2 * n - 2, np.nan)
    t = 0
    while len(nodes) > 3:
        r = len(nodes)
        R = d.sum(axis=1)
        Q = (r - 2) * d - R[:, None] - R[None, :]
        upper = np.triu(np.ones((r, r), bool), 1)
        qmin = Q[upper].min()
        tol = 1e-9 * (abs(qmin) + np.abs(R).max())
        i, j = np.argwhere(upper & (Q <= qmin + tol))[0]
        li = d[i, j] / 2 + (R[i] - R[j]) / (2 * (r - 2))
        lj = d[i, j] - li
        u = n + t
        parent[nodes[i]] = parent[nodes[j]] = u
        length[nodes[i]], length[nodes[j]] = li, lj
        others = np.array([k for k in range(r) if k not in (i, j)])
        if bionj:
            vij = v[i, j]
            lam = 0.5
            if vij != 0:
                lam = 0.5 + (v[j, others] - v[i, others]).sum() / (2 * (r - 2) * vij)
                lam = min(1.0, max(0.0, lam))
            du = lam * (d[i, others] - li) + (1 - lam) * (d[j, others] - lj)
            vu = lam * v[i, others] + (1 - lam) * v[j, others] - lam * (1 - lam) * vij
            v[i, others] = v[others, i] = vu
        else:
            du = (d[i, others] + d[j, others] - d[i, j]) / 2
        d[i, others] = d[others, i] = du
        d = np.delete(np.delete(d, j, 0), j, 1)
        v = np.delete(np.delete(v, j, 0), j, 1)
        nodes[i] = u
        del nodes[j]
        t += 1
    a, b, c = nodes
    root = n + t
    parent[[a, b, c]] = root
    length[a] = (d[0, 1] + d[0, 2] - d[1, 2]) / 2
    length[b] = (d[0, 1] + d[1, 2] - d[0, 2]) / 2
    length[c] = (d[0, 2] + d[1, 2] - d[0, 1]) / 2
    return parent, length


# ---- worked example ---------------------------------------------------------

# from memory: the classic five-taxon teaching example (additive).
FIVE = np.array([
    [0, 5, 9, 9, 8],
    [5, 0, 10, 10, 9],
    [9, 10, 0, 8, 7],
    [9, 10, 8, 0, 3],
    [8, 9, 7, 3, 0],
], dtype=float)


@pytest.mark.parametrize("bionj", [False, True])
def test_five_taxon_worked_example(bionj):
    # Derived by hand (Studier & Keppler 1988 formulas):
    # r=5: R = a31 b34 c34 d30 e27; Q(a,b) = 3*5 - 31 - 34 = -50 is least.
    #   a:u = 5/2 + (31-34)/6 = 2, b:u = 3; d(u,c)=7, d(u,d)=7, d(u,e)=6.
    # r=4: R = u20 c22 d18 e16; Q(u,c) = Q(d,e) = -28, lowest pair (u,c).
    #   u:v = 7/2 + (20-22)/4 = 3, c:v = 4; d(v,d)=4, d(v,e)=3.
    # r=3: v:root = (4+3-3)/2 = 2, d = (4+3-3)/2 = 2, e = (3+3-4)/2 = 1.
    # The matrix is additive, so BIONJ gives the same tree (Gascuel 1997).
    parent, length = nj_arrays(FIVE, bionj=bionj)
    assert parent.tolist() == [5, 5, 6, 7, 7, 6, 7, -1]
    np.testing.assert_allclose(length[:7], [2, 3, 4, 2, 1, 3, 2])
    assert np.isnan(length[7])


def test_three_taxa_is_a_star():
    # source: three-point formula, Saitou & Nei (1987): l_a = (d_ab + d_ac - d_bc)/2.
    parent, length = nj_arrays([[0, 3, 4], [3, 0, 5], [4, 5, 0]])
    assert parent.tolist() == [3, 3, 3, -1]
    np.testing.assert_allclose(length[:3], [1, 2, 3])


# ---- reference library ------------------------------------------------------

def test_nj_matches_scikit_bio():
    # reference: skbio.tree.nj (scikit-bio 0.7), on noisy tree-like matrices
    # where canonical NJ gives no negative length.
    rng = np.random.default_rng(11)
    done = 0
    while done < 25:
        n = int(rng.integers(4, 30))
        parent, length, D = additive_matrix(rng, n, noise=0.1)
        p, l = nj_arrays(D)
        if np.any(l[:-1] < 0):
            continue
        names = [f"t{i}" for i in range(n)]
        ref = sk_nj(SkDM(D, ids=names), neg_as_zero=False)
        same_splits(unrooted_splits(p, l, n), skbio_splits(ref, names))
        done += 1


# ---- exact reference implementation ----------------------------------------

@pytest.mark.parametrize("list_length,n_classes", [(8, 16), (1, 1), (2, 3)])
def test_nj_equals_textbook_scan_with_ties(list_length, n_classes):
    # reference: textbook_nj above (plain O(n^3) scan).
    # Small integer distances make many exact ties; halving keeps all the
    # arithmetic exact here, so the tie rule alone decides, in both.
    # Tiny lists and few R classes force the refill and full-scan paths.
    rng = np.random.default_rng(2024 + list_length)
    for _ in range(150):
        n = int(rng.integers(3, 12))
        D = tied_matrix(rng, n, 0, 5)
        p, l = nj_arrays(D, list_length=list_length, n_classes=n_classes)
        rp, rl = textbook_nj(D)
        np.testing.assert_array_equal(p, rp)
        np.testing.assert_allclose(l, rl, rtol=1e-12, atol=1e-12)


def test_bionj_equals_textbook_scan():
    # reference: textbook_nj(bionj=True) above (Gascuel 1997).
    rng = np.random.default_rng(77)
    for trial in range(120):
        n = int(rng.integers(3, 10))
        D = random_matrix(rng, n)
        p, l = nj_arrays(D, bionj=True, list_length=1 + trial % 4, n_classes=1 + trial % 5)
        rp, rl = textbook_nj(D, bionj=True)
        np.testing.assert_array_equal(p, rp)
        np.testing.assert_allclose(l, rl, rtol=1e-9, atol=1e-12)


def test_fast_search_on_larger_matrices():
    # reference: textbook_nj; larger matrices so that most rows are pruned.
    rng = np.random.default_rng(5)
    for n in (40, 60):
        parent, length, D = additive_matrix(rng, n, noise=0.2)
        for bionj in (False, True):
            p, l = nj_arrays(D, bionj=bionj, list_length=2, n_classes=4)
            rp, rl = textbook_nj(D, bionj=bionj)
            np.testing.assert_array_equal(p, rp)
            np.testing.assert_allclose(l, rl, rtol=1e-9, atol=1e-12)


# ---- additive matrices ------------------------------------------------------

@pytest.mark.parametrize("bionj", [False, True])
def test_additive_matrix_recovers_generating_tree(bionj):
    # source: NJ and BIONJ are exact on additive (tree) metrics:
    # Saitou & Nei (1987); Atteson (1999); Gascuel (1997).
    rng = np.random.default_rng(3 + bionj)
    for _ in range(30):
        n = int(rng.integers(3, 40))
        parent, length, D = additive_matrix(rng, n)
        p, l = nj_arrays(D, bionj=bionj)
        same_splits(unrooted_splits(p, l, n), unrooted_splits(parent, length, n), rtol=1e-9, atol=1e-9)


def test_float32_input_and_input_untouched():
    # common practice: a float32 matrix gives the tree of its float64 values, to float32 rounding.
    rng = np.random.default_rng(8)
    D32 = additive_matrix(rng, 25)[2].astype(np.float32)
    keep = D32.copy()
    p32, l32 = nj_arrays(D32)
    p64, l64 = nj_arrays(D32.astype(np.float64))
    np.testing.assert_array_equal(D32, keep)
    np.testing.assert_array_equal(p32, p64)
    # worked in float32 (half the memory): lengths agree to float32 rounding
    np.testing.assert_allclose(l32, l64, rtol=1e-5, atol=1e-6)


def test_same_input_same_tree():
    # common practice: deterministic output.
    rng = np.random.default_rng(9)
    D = tied_matrix(rng, 30, 0, 3)
    a = nj_arrays(D, bionj=True)
    b = nj_arrays(D, bionj=True)
    np.testing.assert_array_equal(a[0], b[0])
    np.testing.assert_array_equal(a[1], b[1])
