"""Tree.to_linkage: a UPGMA or WPGMA tree as scipy's linkage matrix.

Sources: scipy.cluster.hierarchy (an independent implementation) -- ``linkage`` with method "average" (UPGMA)
and "weighted" (WPGMA) on the same matrix, compared through ``cophenet`` (the merge distance of every pair,
which does not depend on the order of equal-height merges), the sorted merge distances, and scipy's own
validity checks (``is_valid_linkage``, ``is_monotonic``); brute-force path lengths of a random ultrametric
tree (tests/simulate.py), whose half is each pair's merge height (Sokal & Michener 1958).
"""

import numpy as np
import pytest
from scipy.cluster.hierarchy import cophenet, dendrogram, fcluster, is_monotonic, is_valid_linkage, linkage
from scipy.spatial.distance import squareform
from simulate import random_join_tree, random_matrix, tied_matrix, ultrametric_matrix

import cladewright as cw
from cladewright.errors import InputError


def in_matrix_order(tree, dm):
    """Our Z with leaves renumbered to the matrix's row order (build_tree may order leaves its own way)."""
    z = tree.to_linkage()
    row = np.array([dm.index(x) for x in tree.leaf_names])
    n = len(dm)
    out = z.copy()
    for col in (0, 1):
        leaf = z[:, col] < n
        out[leaf, col] = row[z[leaf, col].astype(int)]
    return out


@pytest.mark.parametrize("method, scipy_method", [("upgma", "average"), ("wpgma", "weighted")])
@pytest.mark.parametrize("seed", [0, 1, 2])
def test_matches_scipy_linkage(method, scipy_method, seed):
    rng = np.random.default_rng(seed)
    n = 25
    d = random_matrix(rng, n)
    dm = cw.DistanceMatrix([f"s{i}" for i in range(n)], d)
    z = in_matrix_order(cw.build_tree(dm, method=method), dm)
    # reference: scipy.cluster.hierarchy.linkage on the condensed matrix
    ref = linkage(squareform(d, checks=False), method=scipy_method)
    assert is_valid_linkage(z) and is_monotonic(z)
    assert np.allclose(cophenet(z), cophenet(ref), rtol=1e-12, atol=0)
    assert np.allclose(np.sort(z[:, 2]), np.sort(ref[:, 2]), rtol=1e-12, atol=0)
    assert sorted(z[:, 3]) == sorted(ref[:, 3])
    # scipy's tools take it: the same flat clusters at every cut, a dendrogram over every leaf
    for t in np.quantile(ref[:, 2], [0.25, 0.5, 0.75]):
        mine, theirs = fcluster(z, t, "distance"), fcluster(ref, t, "distance")
        assert len({(a, b) for a, b in zip(mine, theirs)}) == len(set(mine)) == len(set(theirs))
    assert sorted(dendrogram(z, no_plot=True)["leaves"]) == list(range(n))


def test_tied_matrix_gives_the_same_cophenetic_distances():
    # reference: scipy linkage(method="average") on a matrix of small whole numbers (many ties): the merge
    # order of ties may differ, the cophenetic distances do not (UPGMA's result on ties: Sokal & Michener)
    rng = np.random.default_rng(11)
    d = tied_matrix(rng, 20, 1, 6)
    dm = cw.DistanceMatrix([f"s{i}" for i in range(20)], d)
    tree = cw.build_tree(dm, method="upgma")
    z = in_matrix_order(tree, dm)
    assert is_valid_linkage(z) and is_monotonic(z)
    assert np.allclose(cophenet(z), cophenet(linkage(squareform(d), method="average")), rtol=1e-12, atol=0)


def test_ultrametric_tree_gives_its_path_lengths():
    # reference: brute-force path lengths of a random ultrametric tree (tests/simulate.py): the cophenetic
    # distance of every pair is its path length
    rng = np.random.default_rng(4)
    n = 30
    parent, height, d = ultrametric_matrix(rng, n)
    length = np.where(parent >= 0, height[np.maximum(parent, 0)] - height, np.nan)
    tree = cw.Tree(parent, length, [f"t{i}" for i in range(n)], rooted=True)
    z = tree.to_linkage()
    assert is_valid_linkage(z) and is_monotonic(z)
    assert np.allclose(squareform(cophenet(z)), d, rtol=1e-12, atol=1e-12)
    assert np.allclose(np.sort(z[:, 2]), np.sort(2 * height[n:]), rtol=1e-12)


def test_rows_list_the_smaller_cluster_first_and_sizes():
    # source: scipy's linkage-matrix form (docs of scipy.cluster.hierarchy.linkage); worked by hand:
    # ((a:1,b:1):1,c:2) merges a,b at distance 2 (size 2), then that with c at distance 4 (size 3)
    t = cw.parse_newick("(c:2,(b:1,a:1):1);")[0]
    z = t.to_linkage()
    ia, ib, ic = (t.leaf_index(x) for x in "abc")
    assert z.tolist() == [[min(ia, ib), max(ia, ib), 2.0, 2.0], [ic, 3.0, 4.0, 3.0]]


def test_one_leaf_gives_an_empty_matrix():
    # source: scipy's form (n - 1 rows)
    assert cw.Tree([-1], [np.nan], ["a"], rooted=True).to_linkage().shape == (0, 4)


def test_trees_that_are_no_linkage_are_refused():
    # source: the linkage form (rooted, binary, merge heights never decrease, leaves equally deep)
    rng = np.random.default_rng(2)
    d = random_matrix(rng, 10)
    dm = cw.DistanceMatrix([f"s{i}" for i in range(10)], d)
    with pytest.raises(InputError, match="unrooted"):
        cw.build_tree(dm, method="nj").to_linkage()
    with pytest.raises(InputError, match="ultrametric"):
        random_join_tree(rng, 10, True).to_linkage()
    with pytest.raises(InputError, match="binary.*resolve_polytomies"):
        cw.parse_newick("((a:1,b:1,c:1):1,d:2);")[0].to_linkage()
    with pytest.raises(InputError, match="branch lengths"):
        cw.parse_newick("((a,b),c);")[0].to_linkage()
    with pytest.raises(InputError, match="negative"):
        cw.parse_newick("((a:2,b:2):-1,c:1);")[0].to_linkage()
    # a polytomy made of zero-length branches is accepted once resolved
    poly = cw.parse_newick("((a:1,b:1,c:1):1,d:2);")[0]
    z = cw.resolve_polytomies(poly).to_linkage()
    assert is_valid_linkage(z) and sorted(z[:, 2]) == [2.0, 2.0, 4.0]
