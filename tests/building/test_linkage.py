"""Linkage cores (cladewright.build.linkage / kernels.linkage).

Checked against scipy.cluster.hierarchy (linkage, cophenet), the published
Lance–Williams coefficients and the recovery of ultrametric trees.
"""
import numpy as np
import pytest
from scipy.cluster.hierarchy import cophenet, linkage
from scipy.spatial.distance import squareform

from cladewright.build.linkage import LINKAGE_METHODS, linkage_arrays

from simulate import path_lengths, random_matrix, tied_matrix, ultrametric_matrix

SCIPY_NAME = {"upgma": "average", "wpgma": "weighted", "single": "single", "complete": "complete"}


def clusters(parent, n):
    """Leaf set of every internal node, by walking up from each leaf."""
    out = {}
    for leaf in range(n):
        v = parent[leaf]
        while v >= 0:
            out.setdefault(v, set()).add(leaf)
            v = parent[v]
    return out


def test_coefficient_table_is_lance_williams():
    # source: Lance & Williams (1967), Table 1 (a_i, a_j, beta, gamma).
    assert tuple(LINKAGE_METHODS["single"])[:4] == (0.5, 0.5, 0.0, -0.5)
    assert tuple(LINKAGE_METHODS["complete"])[:4] == (0.5, 0.5, 0.0, 0.5)
    assert tuple(LINKAGE_METHODS["wpgma"])[:4] == (0.5, 0.5, 0.0, 0.0)
    assert not LINKAGE_METHODS["wpgma"].size_weighted
    # UPGMA: a_i = n_i / (n_i + n_j), beta = gamma = 0
    assert LINKAGE_METHODS["upgma"].size_weighted
    assert tuple(LINKAGE_METHODS["upgma"])[2:4] == (0.0, 0.0)


@pytest.mark.parametrize("method", sorted(SCIPY_NAME))
def test_patristic_equals_scipy_cophenet(method):
    # reference: scipy.cluster.hierarchy.cophenet(linkage(...)): the merge
    # distance of two leaves equals their path length (twice the height).
    rng = np.random.default_rng(sorted(SCIPY_NAME).index(method))
    for _ in range(25):
        n = int(rng.integers(2, 40))
        D = random_matrix(rng, n)
        parent, length, height = linkage_arrays(D, method)
        ref = cophenet(linkage(squareform(D, checks=False), SCIPY_NAME[method]))
        got = squareform(path_lengths(parent, length, n), checks=False)
        np.testing.assert_allclose(got, ref, rtol=1e-12, atol=1e-12)
        # heights, sorted, are half of scipy's merge distances
        Z = linkage(squareform(D, checks=False), SCIPY_NAME[method])
        np.testing.assert_allclose(2 * height[n:], Z[:, 2], rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("method", ["upgma", "wpgma", "complete"])
def test_ties_give_scipy_clusters(method):
    # reference: scipy.cluster.hierarchy.linkage, which runs the same
    # nearest-neighbour chain (Müllner 2011) for these methods: with many
    # exact ties (small integers) the clusters themselves must agree.
    rng = np.random.default_rng(31)
    for _ in range(100):
        n = int(rng.integers(2, 16))
        D = tied_matrix(rng, n, 0, 5)
        parent, _, height = linkage_arrays(D, method)
        Z = linkage(squareform(D, checks=False), SCIPY_NAME[method])
        ref = [{i} for i in range(n)]
        for a, b, _, _ in Z:
            ref.append(ref[int(a)] | ref[int(b)])
        got = clusters(parent, n)
        assert sorted(map(sorted, got.values())) == sorted(map(sorted, ref[n:]))
        np.testing.assert_allclose(2 * height[n:], Z[:, 2])


def test_single_linkage_ties_give_scipy_cophenet():
    # reference: scipy cophenet. With ties, single linkage trees may differ in
    # how equal merges nest, but the cophenetic distances cannot (they are
    # minimax path distances in the complete graph: common practice).
    rng = np.random.default_rng(32)
    for _ in range(100):
        n = int(rng.integers(2, 16))
        D = tied_matrix(rng, n, 0, 5)
        parent, length, _ = linkage_arrays(D, "single")
        ref = cophenet(linkage(squareform(D, checks=False), "single"))
        np.testing.assert_allclose(squareform(path_lengths(parent, length, n), checks=False), ref)


@pytest.mark.parametrize("method", sorted(SCIPY_NAME))
def test_ultrametric_matrix_recovers_tree(method):
    # source: on an ultrametric matrix UPGMA (Sokal & Michener 1958) and the
    # other Lance–Williams linkages return the generating tree and heights.
    rng = np.random.default_rng(5)
    for _ in range(20):
        n = int(rng.integers(2, 30))
        parent, height, D = ultrametric_matrix(rng, n)
        p, l, h = linkage_arrays(D, method)
        want = sorted(sorted(c) for c in clusters(parent, n).values())
        assert sorted(sorted(c) for c in clusters(p, n).values()) == want
        np.testing.assert_allclose(h[n:], height[n:], rtol=1e-12)
        np.testing.assert_allclose(path_lengths(p, l, n), D, rtol=1e-12, atol=1e-12)
        assert np.all(l[:-1] >= 0) and np.isnan(l[-1])


def test_tree_shape_and_float32():
    # common practice: parents after children, one root; float32 accepted and worked in float32.
    rng = np.random.default_rng(6)
    D = random_matrix(rng, 50).astype(np.float32)
    keep = D.copy()
    for method in SCIPY_NAME:
        p, l, h = linkage_arrays(D, method)
        p64, l64, _ = linkage_arrays(D.astype(np.float64), method)
        np.testing.assert_array_equal(D, keep)
        np.testing.assert_array_equal(p, p64)
        # a float32 matrix is worked in float32 (half the memory): lengths agree to float32 rounding
        np.testing.assert_allclose(l, l64, rtol=1e-5, atol=1e-7)
        assert p[-1] == -1 and np.all(p[:-1] > np.arange(len(p) - 1))
        np.testing.assert_allclose(l[:-1], h[p[:-1]] - h[:-1])


def test_two_taxa():
    # source: UPGMA on two taxa joins them at half their distance.
    p, l, h = linkage_arrays([[0, 3], [3, 0]], "upgma")
    assert p.tolist() == [2, 2, -1]
    np.testing.assert_allclose(l[:2], [1.5, 1.5])


@pytest.mark.parametrize("method", sorted(SCIPY_NAME))
def test_large_matrix_matches_scipy(method):
    # reference: scipy.cluster.hierarchy.linkage. Several hundred taxa, so
    # that the kernel compacts its triangle more than once (and reads ahead
    # along columns); with exact ties (small integers) the clusters must
    # still be scipy's, and with continuous values so must the heights.
    rng = np.random.default_rng(41)
    n = 700
    for tied in (False, True):
        D = tied_matrix(rng, n, 1, 9) if tied else random_matrix(rng, n)
        parent, _, height = linkage_arrays(D, method)
        Z = linkage(squareform(D, checks=False), SCIPY_NAME[method])
        np.testing.assert_allclose(2 * height[n:], Z[:, 2], rtol=1e-12)
        if tied and method == "single":
            continue  # tied single-linkage trees may nest equal merges differently
        ref = [{i} for i in range(n)]
        for a, b, _, _ in Z:
            ref.append(ref[int(a)] | ref[int(b)])
        got = clusters(parent, n)
        assert sorted(map(sorted, got.values())) == sorted(map(sorted, ref[n:]))
