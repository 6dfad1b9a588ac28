"""build_tree, fit statistics and the patristic kernel.

Checked against: numpy's corrcoef, scipy.cluster.hierarchy.cophenet's
coefficient, the percent standard deviation written out from Fitch &
Margoliash (1967), scikit-bio's tip-to-tip distances, and path counts on a
caterpillar tree.
"""
import io

import numpy as np
import pytest
from scipy.cluster.hierarchy import cophenet, linkage
from scipy.spatial.distance import squareform
from skbio import TreeNode

from cladewright.build import METHODS, build_tree, build_tree_with_info, fit_statistic
from cladewright.build.nj import nj_arrays
from cladewright.errors import InputError
from cladewright._kernels.patristic import patristic_distances
from cladewright.matrix import DistanceMatrix
from cladewright.tree import Tree

from simulate import random_matrix


def random_distances(n, seed, zeros=0):
    """A DistanceMatrix over t0..t{n-1}: values uniform on [0.1, 1), ``zeros`` random pairs set to 0."""
    values = random_matrix(np.random.default_rng(seed), n, low=0.1, high=1.0, zeros=zeros)
    return DistanceMatrix([f"t{i}" for i in range(n)], values)


def newick(parent, length, names):
    """Newick text of a parent-array tree (test-local writer, iterative)."""
    m = len(parent)
    kids = [[] for _ in range(m)]
    for v in range(m):
        if parent[v] >= 0:
            kids[parent[v]].append(v)
    root = int(np.flatnonzero(np.asarray(parent) < 0)[0])
    text = {}
    stack = [(root, False)]
    while stack:
        v, done = stack.pop()
        if v < len(names):
            text[v] = names[v]
        elif not done:
            stack.append((v, True))
            stack.extend((c, False) for c in kids[v])
            continue
        else:
            text[v] = "(" + ",".join(text[c] for c in kids[v]) + ")"
        if parent[v] >= 0:
            text[v] += f":{float(length[v])!r}"
    return text[root] + ";"


def upper(X):
    return X[np.triu_indices(len(X), 1)]


# ---- patristic kernel -------------------------------------------------------

def test_patristic_matches_scikit_bio():
    # reference: skbio TreeNode.tip_tip_distances on the same tree.
    dm = random_distances(30, 1)
    parent, length = nj_arrays(dm.values)
    tree = Tree(parent, length, dm.names)
    ref = TreeNode.read(io.StringIO(newick(parent, length, dm.names))).tip_tip_distances()
    order = [ref.ids.index(x) for x in dm.names]
    np.testing.assert_allclose(tree.patristic(), ref.data[np.ix_(order, order)], atol=1e-12)
    # the kernel directly, with the tree's postorder
    P = patristic_distances(parent, np.nan_to_num(length), np.asarray(tree.postorder()), 30)
    np.testing.assert_allclose(P, tree.patristic())


def test_patristic_caterpillar_is_iterative():
    # source: counting edges on a caterpillar with unit lengths: leaf 0 and
    # leaf 1 hang from spine node 1, leaf k > 1 from spine node k, so
    # d(leaf a, leaf b) = 2 + b - max(a, 1) for a < b.
    n = 3000
    parent = np.empty(2 * n - 1, np.int64)
    spine = lambda k: n + k - 1  # noqa: E731  spine node k = 1..n-1
    parent[0] = spine(1)
    for k in range(1, n):
        parent[k] = spine(k)
        parent[spine(k)] = spine(k + 1) if k < n - 1 else -1
    length = np.ones(2 * n - 1)
    length[-1] = np.nan
    tree = Tree(parent, length, [f"l{i}" for i in range(n)])
    P = tree.patristic()
    a = np.arange(n)
    want = 2 + a[None, :] - np.maximum(a[:, None], 1)
    want = np.triu(want, 1)
    np.testing.assert_array_equal(P, want + want.T)


# ---- fit statistics ---------------------------------------------------------

@pytest.mark.parametrize("method,scipy_name", [("upgma", "average"), ("wpgma", "weighted"),
                                               ("single", "single"), ("complete", "complete")])
def test_cophenetic_correlation(method, scipy_name):
    # reference: np.corrcoef on the upper triangle (Sokal & Rohlf 1962), and
    # the coefficient returned by scipy.cluster.hierarchy.cophenet.
    dm = random_distances(40, 2)
    tree, info = build_tree_with_info(dm, method)
    name, r = fit_statistic(tree, dm)
    assert name == "cophenetic correlation" == info["fit_name"]
    assert info["fit_value"] == pytest.approx(r)
    assert r == pytest.approx(np.corrcoef(upper(tree.patristic()), upper(dm.values))[0, 1], rel=1e-12)
    c, _ = cophenet(linkage(squareform(dm.values, checks=False), scipy_name),
                    squareform(dm.values, checks=False))
    assert r == pytest.approx(c, rel=1e-10)


@pytest.mark.parametrize("method", ["nj", "bionj"])
def test_percent_standard_deviation(method):
    # source: Fitch & Margoliash (1967): PSD = 100 sqrt(sum ((d - p)/d)^2 / N)
    # over pairs i < j, here with pairs at d = 0 left out of sum and count.
    dm = random_distances(25, 3, zeros=4)
    tree, info = build_tree_with_info(dm, method)
    name, psd = fit_statistic(tree, dm)
    assert name == "percent standard deviation" == info["fit_name"]
    d, p = upper(dm.values), upper(tree.patristic())
    keep = d != 0
    assert keep.sum() < len(d)
    want = 100 * np.sqrt(np.mean(((d[keep] - p[keep]) / d[keep]) ** 2))
    assert psd == pytest.approx(want, rel=1e-12)
    assert info["fit_value"] == pytest.approx(psd)


def test_fit_with_matrix_in_another_order():
    # common practice: the statistic depends on taxa, not on row order.
    dm = random_distances(12, 4)
    tree = build_tree(dm, "bionj")
    perm = np.random.default_rng(0).permutation(12)
    dm2 = DistanceMatrix([dm.names[i] for i in perm], dm.values[np.ix_(perm, perm)])
    assert fit_statistic(tree, dm2) == pytest.approx(fit_statistic(tree, dm))
    with pytest.raises(InputError, match="not in the matrix"):
        fit_statistic(tree, DistanceMatrix([f"x{i}" for i in range(12)], dm.values))


def test_additive_matrix_fits_exactly():
    # source: NJ reproduces an additive matrix (Saitou & Nei 1987): PSD = 0.
    D = [[0, 5, 9, 9, 8], [5, 0, 10, 10, 9], [9, 10, 0, 8, 7], [9, 10, 8, 0, 3], [8, 9, 7, 3, 0]]
    tree, info = build_tree_with_info(DistanceMatrix("abcde", D), "nj")
    assert info["fit_value"] == pytest.approx(0.0, abs=1e-12)


# ---- build_tree -------------------------------------------------------------

def test_build_tree_shapes():
    # common practice: linkage trees rooted (binary root), NJ trees unrooted
    # with a basal trifurcation.
    dm = random_distances(15, 5)
    for method in METHODS:
        tree = build_tree(dm, method)
        assert tree.leaf_names == dm.names
        kids = len(tree.children(tree.root))
        if method in ("nj", "bionj", "bme"):  # bme: greedy insertion, unrooted (Desper & Gascuel 2002)
            assert not tree.rooted and kids == 3 and tree.n_nodes == 2 * 15 - 2
        else:
            assert tree.rooted and kids == 2 and tree.n_nodes == 2 * 15 - 1
    assert build_tree(dm, "UPGMA").rooted


def test_negative_lengths_zero_or_keep():
    # source: canonical NJ can give negative lengths on non-additive data
    # (Saitou & Nei 1987); "zero" sets them to 0 and counts them.
    D = random_matrix(np.random.default_rng(6), 30)
    dm = DistanceMatrix([f"t{i}" for i in range(30)], D)
    raw = nj_arrays(dm.values)[1]
    n_neg = int(np.sum(raw < 0))
    assert n_neg > 0
    kept, info_keep = build_tree_with_info(dm, "nj", negative="keep")
    zeroed, info_zero = build_tree_with_info(dm, "nj", negative="zero")
    assert info_keep["negative_branches"] == info_zero["negative_branches"] == n_neg
    np.testing.assert_array_equal(kept.length, raw)
    np.testing.assert_array_equal(zeroed.length, np.where(raw < 0, 0.0, raw))
    np.testing.assert_array_equal(build_tree(dm, "nj").length, zeroed.length)


def test_build_tree_errors():
    # common practice: one-line messages naming the problem and the fix.
    dm = random_distances(5, 7)
    with pytest.raises(InputError, match="upgma, wpgma, single, complete, nj, bionj"):
        build_tree(dm, "median")
    with pytest.raises(InputError, match="'zero' or 'keep'"):
        build_tree(dm, "nj", negative="drop")
    two = DistanceMatrix(["a", "b"], [[0, 1], [1, 0]])
    with pytest.raises(InputError, match="at least 3 taxa but the matrix has 2"):
        build_tree(two, "nj")
    assert build_tree(two, "upgma").n_leaves == 2
    one = DistanceMatrix(["a"], [[0]])
    with pytest.raises(InputError, match="at least 2 taxa but the matrix has 1"):
        build_tree(one, "single")
    bad = DistanceMatrix(["a", "b", "c"], [[0, 1, np.inf], [1, 0, 1], [np.inf, 1, 0]], validate=False)
    with pytest.raises(InputError, match="'a'-'c' is inf"):
        build_tree(bad, "nj")
