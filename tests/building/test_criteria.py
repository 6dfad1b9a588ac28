"""Branch lengths of a given tree under BME, OLS and WLS, and the tree length.

Checked against computations written plainly here, from outside the code under test:
- Pauplin's tree length, sum over pairs i < j of 2^(1 - p_ij) d_ij with p_ij the number of branches on the
  path (Pauplin 2000, J. Mol. Evol. 51:41-47), by a double loop over the pairs;
- ordinary least squares, numpy.linalg.lstsq on the path-incidence system built here (Rzhetsky & Nei 1993,
  Mol. Biol. Evol. 10:1073-1095: OLS branch lengths are the least-squares solution of that system);
- weighted least squares with weights 1 / d^2, pairs at distance zero left out (Fitch & Margoliash 1967,
  Science 155:279-284), numpy.linalg.lstsq on the system with rows scaled by sqrt(w);
- the percent standard deviation and weighted sum of squares written out from Fitch & Margoliash (1967);
- on additive (tree-metric) matrices every criterion returns the generating lengths (a tree metric fits its
  tree with zero residual, so least squares returns it; BME consistency: Desper & Gascuel 2004, Mol. Biol.
  Evol. 21:587-598).
A tree is read as unrooted: the two branches at a rooted tree's root are one column of the system.
"""

import numpy as np
import pytest

from cladewright.build.criteria import CRITERIA, fit_lengths, fit_lengths_with_info, tree_length
from cladewright.build.leaf_rooted import hang_from_leaf
from cladewright.build.weighted import weighted_fit, weighted_least_squares
from cladewright.errors import CladewrightError, InputError
from cladewright.matrix import DistanceMatrix
from cladewright.tree import Tree

from simulate import additive_matrix, path_lengths, random_join_arrays, random_join_tree, random_matrix


# ---- plain computations, written without the package ---------------------------------------------------

def columns(parent):
    """Each node's column in the unrooted tree's incidence system: the two branches at a degree-2 root
    share one column; the root has none. Returns (column of each node or -1, number of columns)."""
    parent = np.asarray(parent)
    root = int(np.flatnonzero(parent < 0)[0])
    col = np.full(len(parent), -1)
    k = 0
    at_root = [v for v in range(len(parent)) if parent[v] == root]
    for v in range(len(parent)):
        if v == root:
            continue
        if len(at_root) == 2 and v == at_root[1]:
            continue
        col[v] = k
        k += 1
    if len(at_root) == 2:
        col[at_root[1]] = col[at_root[0]]
    return col, k


def incidence(parent, n):
    """Rows: pairs i < j; columns: branches of the unrooted tree; 1 where the branch is on the path."""
    parent = np.asarray(parent)
    col, k = columns(parent)
    ups = []
    for leaf in range(n):
        seen, v = set(), leaf
        while parent[v] >= 0:
            seen.add(v)
            v = parent[v]
        ups.append(seen)
    A = np.zeros((n * (n - 1) // 2, k))
    r = 0
    for i in range(n):
        for j in range(i + 1, n):
            for v in ups[i] ^ ups[j]:
                A[r, col[v]] = 1.0
            r += 1
    return A


def per_column(tree):
    """A fitted tree's lengths, one per column (the two at a degree-2 root added up)."""
    col, k = columns(tree.parent)
    out = np.zeros(k)
    for v in range(tree.n_nodes):
        if col[v] >= 0:
            out[col[v]] += tree.length[v]
    return out


def pairs_of(d):
    n = len(d)
    return np.array([d[i, j] for i in range(n) for j in range(i + 1, n)])


def matrix_for(tree, values, rng):
    """A DistanceMatrix of ``values`` (in the tree's leaf order) with its taxa in a shuffled order, so that
    leaves are matched by name."""
    n = tree.n_leaves
    perm = rng.permutation(n)
    return DistanceMatrix([tree.leaf_names[p] for p in perm], np.asarray(values)[np.ix_(perm, perm)])


def trees(seed):
    """Random binary trees from the shared helper, rooted and unrooted, 3 to 14 leaves."""
    rng = np.random.default_rng(seed)
    return [(rng, random_join_tree(rng, n, rooted)) for n in (3, 4, 5, 7, 10, 14) for rooted in (False, True)]


def caterpillar(n):
    """An unrooted caterpillar: leaves 0 and 1 on spine node n, leaf k on spine node n + k - 1 (k >= 2),
    the last spine node also holding leaf n - 1 (deepest possible tree)."""
    parent = np.full(2 * n - 2, -1)
    parent[0] = parent[1] = n
    for k in range(2, n - 1):
        parent[k] = n + k - 1
        parent[n + k - 2] = n + k - 1
    parent[n - 1] = 2 * n - 3
    return Tree(parent, np.full(2 * n - 2, np.nan), [f"c{i}" for i in range(n)])


# ---- BME: Pauplin's length -------------------------------------------------------------------------------

@pytest.mark.parametrize("seed", [1, 2])
def test_bme_length_is_pauplins_sum_over_pairs(seed):
    for rng, tree in trees(seed):
        n = tree.n_leaves
        d = random_matrix(rng, n, low=0.05, high=1.0)
        dm = matrix_for(tree, d, rng)
        p = incidence(tree.parent, n).sum(axis=1)
        # source: Pauplin (2000), L = sum_{i<j} 2^(1 - p_ij) d_ij, by a plain double loop
        brute, r = 0.0, 0
        for i in range(n):
            for j in range(i + 1, n):
                brute += 2.0 ** (1 - p[r]) * d[i, j]
                r += 1
        assert tree_length(tree, dm, "bme") == pytest.approx(brute, rel=1e-12, abs=1e-12)
        # and through the branch-length form (Desper & Gascuel 2002): the BME lengths add up to it
        fitted = fit_lengths(tree, dm, "bme")
        assert per_column(fitted).sum() == pytest.approx(brute, rel=1e-12, abs=1e-12)


def test_bme_on_a_deep_caterpillar():
    # source: Pauplin (2000) by a double loop; on a caterpillar p_ij = 2 + b - max(a, 1) edges for a < b
    # (leaf n - 1 sits with leaf n - 2 on the last spine node, so pairs with it count like leaf n - 2's)
    n = 40
    tree = caterpillar(n)
    rng = np.random.default_rng(3)
    d = random_matrix(rng, n, low=0.05, high=1.0)
    dm = DistanceMatrix(tree.leaf_names, d)
    brute = 0.0
    for a in range(n):
        for b in range(a + 1, n):
            p = 2 + min(b, n - 2) - max(a, 1) if a < n - 2 else 2
            brute += 2.0 ** (1 - p) * d[a, b]
    assert tree_length(tree, dm) == pytest.approx(brute, rel=1e-12)


# ---- OLS and WLS against least squares -------------------------------------------------------------------

@pytest.mark.parametrize("seed", [3, 4])
def test_ols_lengths_are_the_least_squares_solution(seed):
    for rng, tree in trees(seed):
        n = tree.n_leaves
        d = random_matrix(rng, n, low=0.05, high=1.0)
        A = incidence(tree.parent, n)
        # source: OLS lengths solve min |d - A l|^2 (Rzhetsky & Nei 1993); numpy.linalg.lstsq
        expect = np.linalg.lstsq(A, pairs_of(d), rcond=None)[0]
        dm = matrix_for(tree, d, rng)
        got = per_column(fit_lengths(tree, dm, "ols"))
        np.testing.assert_allclose(got, expect, rtol=0, atol=1e-12)
        # the OLS tree length is the sum of those lengths (Rzhetsky & Nei 1993)
        assert tree_length(tree, dm, "ols") == pytest.approx(expect.sum(), abs=1e-12)


def test_ols_on_a_deep_caterpillar_and_single_precision():
    # source: numpy.linalg.lstsq on the path-incidence system (Rzhetsky & Nei 1993); a float32 matrix gives
    # the least-squares lengths of its own (float32) values, to float32 precision
    n = 40
    tree = caterpillar(n)
    d = random_matrix(np.random.default_rng(4), n, low=0.05, high=1.0)
    A = incidence(tree.parent, n)
    expect = np.linalg.lstsq(A, pairs_of(d), rcond=None)[0]
    got = per_column(fit_lengths(tree, DistanceMatrix(tree.leaf_names, d), "ols"))
    np.testing.assert_allclose(got, expect, atol=1e-11)
    d32 = d.astype(np.float32)
    expect32 = np.linalg.lstsq(A, pairs_of(d32.astype(np.float64)), rcond=None)[0]
    got32 = per_column(fit_lengths(tree, DistanceMatrix(tree.leaf_names, d32, dtype=np.float32), "ols"))
    np.testing.assert_allclose(got32, expect32, atol=1e-9)


@pytest.mark.parametrize("seed", [5, 6])
def test_wls_lengths_are_the_weighted_least_squares_solution(seed):
    for rng, tree in trees(seed):
        n = tree.n_leaves
        d = random_matrix(rng, n, low=0.05, high=1.0, zeros=1 if n >= 7 else 0)
        A = incidence(tree.parent, n)
        dv = pairs_of(d)
        keep = dv != 0
        # source: Fitch & Margoliash (1967) weights w = 1/d^2, pairs with d = 0 left out; numpy.linalg.lstsq
        # on the rows scaled by sqrt(w)
        sw = 1.0 / dv[keep]
        expect = np.linalg.lstsq(A[keep] * sw[:, None], dv[keep] * sw, rcond=None)[0]
        fitted, info = fit_lengths_with_info(tree, matrix_for(tree, d, rng), "wls")
        np.testing.assert_allclose(per_column(fitted), expect, rtol=0, atol=1e-9)
        # source: the weighted sum of squares and percent standard deviation written out from Fitch &
        # Margoliash (1967), over the pairs with d != 0
        resid = (dv[keep] - A[keep] @ expect) / dv[keep]
        assert info["weighted_sum_of_squares"] == pytest.approx(float(resid @ resid), rel=1e-7, abs=1e-14)
        assert info["pairs"] == int(keep.sum())
        assert info["percent_standard_deviation"] == pytest.approx(
            100 * np.sqrt(float(resid @ resid) / keep.sum()), rel=1e-7, abs=1e-9)


def test_wls_takes_a_polytomy():
    # source: weighted least squares of Fitch & Margoliash (1967) on the incidence system of the tree as
    # given (two nodes of four branches); numpy.linalg.lstsq
    parent = [7, 7, 7, 8, 8, 9, 9, 9, 9, -1]
    tree = Tree(parent, np.full(10, np.nan), list("abcdefg"))
    d = random_matrix(np.random.default_rng(7), 7, low=0.1, high=1.0)
    A = incidence(parent, 7)
    dv = pairs_of(d)
    expect = np.linalg.lstsq(A / dv[:, None], np.ones_like(dv), rcond=None)[0]
    np.testing.assert_allclose(per_column(fit_lengths(tree, DistanceMatrix(tree.leaf_names, d), "wls")),
                               expect, atol=1e-9)


def test_weighted_fit_of_a_trees_own_lengths():
    # source: Fitch & Margoliash (1967), Q = sum_{i<j, d != 0} ((d - h) / d)^2, PSD = 100 sqrt(Q / N), with
    # h the path lengths by a plain walk up the parent array (tests/simulate.py path_lengths)
    rng = np.random.default_rng(8)
    parent, length = random_join_arrays(rng, 9, rooted=False)
    tree = Tree(parent, length, [f"t{i}" for i in range(9)])
    d = random_matrix(rng, 9, low=0.1, high=2.0, zeros=2)
    h = path_lengths(parent, length, 9)
    q, count = 0.0, 0
    for i in range(9):
        for j in range(i + 1, 9):
            if d[i, j] != 0:
                q += ((d[i, j] - h[i, j]) / d[i, j]) ** 2
                count += 1
    fit = weighted_fit(tree, matrix_for(tree, d, rng))
    assert fit.weighted_sum_of_squares == pytest.approx(q, rel=1e-12)
    assert fit.pairs == count
    assert fit.percent_standard_deviation == pytest.approx(100 * np.sqrt(q / count), rel=1e-12)


# ---- additive matrices: the generating lengths come back -------------------------------------------------

@pytest.mark.parametrize("criterion", CRITERIA)
@pytest.mark.parametrize("rooted", [False, True])
def test_every_criterion_returns_the_generating_lengths_of_a_tree_metric(criterion, rooted):
    # source: a tree metric is fitted by its own tree with zero residual, so OLS and WLS return the
    # generating lengths; BME is consistent (Desper & Gascuel 2004). Matrix: tests/simulate.py path_lengths.
    rng = np.random.default_rng(11)
    for n in (3, 6, 12, 25):
        if rooted:
            parent, length, d = additive_matrix(rng, n)
        else:
            parent, length = random_join_arrays(rng, n, rooted=False, shortest=0.05)
            d = path_lengths(parent, length, n)
        names = [f"s{i}" for i in range(n)]
        truth = Tree(parent, length, names, rooted=rooted)
        shape = Tree(parent, np.full(len(parent), np.nan), names, rooted=rooted)
        fitted = fit_lengths(shape, matrix_for(truth, d, rng), criterion)
        np.testing.assert_allclose(per_column(fitted), per_column(truth), rtol=0, atol=1e-9)
        if rooted:
            # the two branches at the root share their sum equally when the shape carries no lengths
            # (the documented rule; the criteria fix only the sum)
            kids = np.flatnonzero(np.asarray(parent) == len(parent) - 1)
            assert fitted.length[kids[0]] == pytest.approx(fitted.length[kids[1]])


# ---- shapes a tree can take ---------------------------------------------------------------------------

def test_root_branches_share_in_proportion_and_chains_add_up():
    # ((a,b),(c,d)) rooted, root branches given 1 and 3; and the same tree with a one-child node on the
    # branch above c. source: OLS on the unrooted quartet ab|cd by numpy.linalg.lstsq; the split of the root
    # branch keeps the given 1:3 proportion (the documented rule)
    d = random_matrix(np.random.default_rng(9), 4, low=0.2, high=1.0)
    quartet = incidence([4, 4, 5, 5, -1, 4], 4)   # unrooted ab|cd: the internal branch is column 4
    expect = np.linalg.lstsq(quartet, pairs_of(d), rcond=None)[0]
    rooted = Tree([4, 4, 5, 5, 6, 6, -1], [1, 1, 1, 1, 1.0, 3.0, np.nan], list("abcd"), rooted=True)
    fitted = fit_lengths(rooted, DistanceMatrix("abcd", d), "ols")
    middle = fitted.length[4] + fitted.length[5]
    assert middle == pytest.approx(expect[4], abs=1e-12)
    assert fitted.length[5] == pytest.approx(3 * fitted.length[4], rel=1e-12)
    np.testing.assert_allclose(fitted.length[:4], expect[:4], atol=1e-12)
    # a one-child node 6 between c and its parent: its two branches share c's length equally
    chain = Tree([4, 4, 6, 5, 5, -1, 5], [np.nan] * 7, list("abcd"))
    got = fit_lengths(chain, DistanceMatrix("abcd", d), "ols")
    p_chain = got.patristic()
    fitted_pairs = quartet @ expect
    np.testing.assert_allclose(pairs_of(p_chain), fitted_pairs, atol=1e-12)
    assert got.length[2] == pytest.approx(got.length[6])


def test_two_taxa():
    # source: a single branch between two leaves carries their distance under every criterion (from the
    # definitions: the one path is that branch)
    tree = Tree([2, 2, -1], [np.nan] * 3, ["x", "y"], rooted=True)
    dm = DistanceMatrix(["y", "x"], [[0, 0.6], [0.6, 0]])
    for criterion in CRITERIA:
        assert float(np.nansum(fit_lengths(tree, dm, criterion).length)) == pytest.approx(0.6)
    assert tree_length(tree, dm) == pytest.approx(0.6)


# ---- errors --------------------------------------------------------------------------------------------

def test_errors_name_the_fix():
    # source: the project's rule that bad input is an InputError naming the fix (common practice)
    star = Tree([4, 4, 4, 4, -1], [np.nan] * 5, list("abcd"))
    dm = DistanceMatrix("abcd", random_matrix(np.random.default_rng(10), 4, low=0.1, high=1.0))
    for criterion in ("bme", "ols"):
        with pytest.raises(InputError, match="resolve polytomies first"):
            fit_lengths(star, dm, criterion)
    with pytest.raises(InputError, match="resolve polytomies first"):
        tree_length(star, dm, "bme")
    quartet = Tree([4, 4, 5, 5, 5, -1], [np.nan] * 6, list("abcd"))
    with pytest.raises(InputError, match="unknown criterion"):
        fit_lengths(quartet, dm, "minimum")
    with pytest.raises(InputError, match="tree_length takes criterion 'bme' or 'ols'"):
        tree_length(quartet, dm, "wls")
    with pytest.raises(InputError, match="taxon 'e' of the tree is not in the matrix"):
        fit_lengths(Tree([4, 4, 5, 5, 5, -1], [np.nan] * 6, list("abce")), dm)
    with pytest.raises(InputError, match="of the matrix is not in the tree"):
        fit_lengths(Tree([3, 3, 3, -1], [np.nan] * 4, list("abc")), dm)
    with pytest.raises(InputError, match="not a DistanceMatrix"):
        fit_lengths(quartet, dm.values)
    with pytest.raises(InputError, match="at least 2 taxa"):
        fit_lengths(Tree([-1], [np.nan], ["a"]), DistanceMatrix(["a"], [[0.0]]))
    with pytest.raises(InputError, match="give every branch a length"):
        weighted_fit(quartet, dm)


def test_wls_that_does_not_converge_is_an_error_not_an_answer():
    # source: the project's rule that a silent wrong answer is the worst defect (common practice): lengths
    # short of the documented tolerance are never returned
    rng = np.random.default_rng(12)
    tree = random_join_tree(rng, 30, False)
    g = hang_from_leaf(tree, DistanceMatrix(tree.leaf_names, random_matrix(rng, 30, low=0.05, high=1.0)))
    with pytest.raises(CladewrightError, match="did not converge in 1 iterations"):
        weighted_least_squares(g, None, max_iterations=1)


def test_all_distances_zero():
    # source: Fitch & Margoliash (1967) leave pairs at d = 0 out, so no pair is left: no weighted residual and
    # no percent standard deviation (nan); OLS (Rzhetsky & Nei 1993) of a zero matrix is all zero
    tree = Tree([4, 4, 5, 5, 5, -1], [np.nan] * 6, list("abcd"))
    fitted, info = fit_lengths_with_info(tree, DistanceMatrix("abcd", np.zeros((4, 4))), "wls")
    assert info["pairs"] == 0 and np.isnan(info["percent_standard_deviation"])
    assert np.all(fitted.length[:5] == 0.0)
