"""Greedy BME insertion and NNI refinement (balanced NNI, FastNNI) against outside references.

Sources, named again beside each check:
- Pauplin (2000) J. Mol. Evol. 51:41-47: the BME tree length L = sum_{i<j} 2^(1 - p_ij) d_ij, p_ij the number of
  branches between i and j, computed here by brute force over pairs from the tree's parent array (``_pauplin``),
  without the package.
- Desper & Gascuel (2004) Mol. Biol. Evol. 21:587-598 and Bordewich, Gascuel, Huber & Moulton (2009) IEEE/ACM
  TCBB 6:110-117 (from memory): on a tree metric the BME tree is the true tree, and NNI under BME reaches it from
  any start; the true tree's path lengths are the matrix, so its fitted lengths are the true lengths.
- Rzhetsky & Nei (1993) Mol. Biol. Evol. 10:1073-1095: OLS minimum evolution is consistent on tree metrics.
- Desper & Gascuel (2002) J. Comput. Biol. 9:687-705: greedy BME insertion and NNI never lengthen the tree;
  on an additive matrix the greedy insertion returns the true tree (from memory).
- scikit-bio's ``skbio.tree.nni(tree, dm, balanced=True)`` (0.6.2 and later): an independent balanced NNI.
- Robinson & Foulds (1981) Math. Biosci. 53:131-147, counted with DendroPy (an independent library).
The matrices are tree metrics and noisy tree-like matrices from tests/simulate.py.
"""

import re

import dendropy
import numpy as np
import pytest
from click.testing import CliRunner
from dendropy.calculate import treecompare

import cladewright as cw
from cladewright.cli import main
from simulate import additive_matrix, path_lengths, random_join_tree


def _names(n):
    return [f"t{i}" for i in range(n)]


def _edge_counts(tree, names):
    """Branches between every pair of leaves, in ``names`` order (a plain walk up the parent array)."""
    parent = np.asarray(tree.parent)
    ones = np.ones(parent.size)
    at_root = np.flatnonzero(parent == tree.root)
    if at_root.size == 2:
        ones[at_root[0]] = 0.0  # the two branches at a degree-2 root are one branch of the unrooted tree
    p = path_lengths(parent, ones, tree.n_leaves)
    order = [tree.leaf_names.index(x) for x in names]
    return p[np.ix_(order, order)]


def _pauplin(tree, names, d):
    """Pauplin (2000): sum over i < j of 2^(1 - p_ij) d_ij, by brute force over pairs."""
    p = _edge_counts(tree, names)
    iu = np.triu_indices(len(names), 1)
    return float(np.sum(2.0 ** (1.0 - p[iu]) * d[iu]))


def _rf_dendropy(a, b):
    """Robinson-Foulds distance of two trees, by DendroPy (unrooted)."""
    taxa = dendropy.TaxonNamespace()
    ta = dendropy.Tree.get(data=a.to_newick(), schema="newick", taxon_namespace=taxa, rooting="force-unrooted")
    tb = dendropy.Tree.get(data=b.to_newick(), schema="newick", taxon_namespace=taxa, rooting="force-unrooted")
    return treecompare.symmetric_difference(ta, tb)


def _tree_metric(seed, n):
    parent, length, d = additive_matrix(np.random.default_rng(seed), n)
    true = cw.Tree(parent, length, _names(n), rooted=True)
    return true, cw.DistanceMatrix(_names(n), d)


def _random_nnis(tree, k, rng):
    """``tree`` after k random nearest-neighbour interchanges (a child of v swapped with v's sibling)."""
    parent = np.array(tree.parent)
    n = tree.n_leaves
    for _ in range(k):
        inner = [v for v in range(n, parent.size) if parent[v] >= 0]
        v = inner[rng.integers(len(inner))]
        p = parent[v]
        kids = np.flatnonzero(parent == v)
        sibs = [s for s in np.flatnonzero(parent == p) if s != v]
        a, s = kids[rng.integers(kids.size)], sibs[rng.integers(len(sibs))]
        parent[a], parent[s] = p, v
    return cw.Tree(parent, np.full(parent.size, np.nan), tree.leaf_names)


@pytest.mark.parametrize("criterion", ["bme", "ols"])
@pytest.mark.parametrize("seed", range(4))
def test_nni_from_a_random_tree_finds_the_true_tree_and_lengths(seed, criterion):
    # Desper & Gascuel (2004), Bordewich et al. (2009) for bme; Rzhetsky & Nei (1993) for ols; RF by DendroPy
    true, dm = _tree_metric(seed, 24)
    start = random_join_tree(np.random.default_rng(100 + seed), 24, rooted=False, names=_names(24))
    refined, info = cw.refine_tree_with_info(start, dm, "nni", criterion)
    assert _rf_dendropy(refined, true) == 0
    assert cw.robinson_foulds(refined, true)["rf"] == 0
    order = [refined.leaf_names.index(x) for x in dm.names]
    # the true tree's path lengths are the matrix: its fitted lengths are the true ones
    np.testing.assert_allclose(refined.patristic()[np.ix_(order, order)], dm.values, atol=1e-9)
    assert info["moves"] > 0 and info["length_after"] < info["length_before"]


@pytest.mark.parametrize("seed", range(3))
def test_nni_repairs_an_nj_tree_after_random_interchanges(seed):
    # Desper & Gascuel (2004); Bordewich et al. (2009): BNNI reaches the BME (true) tree on a tree metric
    true, dm = _tree_metric(10 + seed, 40)
    start = _random_nnis(cw.build_tree(dm, "nj"), 15, np.random.default_rng(seed))
    assert _rf_dendropy(start, true) > 0
    refined = cw.refine_tree(start, dm)
    assert _rf_dendropy(refined, true) == 0
    # Pauplin (2000): the BME length of the refined tree is the true tree's
    assert _pauplin(refined, dm.names, dm.values) == pytest.approx(_pauplin(true, dm.names, dm.values), rel=1e-12)


@pytest.mark.parametrize("seed", range(3))
def test_greedy_insertion_on_a_tree_metric_gives_the_true_tree(seed):
    # Desper & Gascuel (2002), from memory: greedy BME insertion is exact on additive matrices; RF by DendroPy
    true, dm = _tree_metric(20 + seed, 30)
    tree, info = cw.build_tree_with_info(dm, "bme")
    assert _rf_dendropy(tree, true) == 0
    order = [tree.leaf_names.index(x) for x in dm.names]
    np.testing.assert_allclose(tree.patristic()[np.ix_(order, order)], dm.values, atol=1e-9)
    # Pauplin (2000) by brute force against the length reported
    assert info["length_after"] == pytest.approx(_pauplin(tree, dm.names, dm.values), rel=1e-12)


@pytest.mark.parametrize("seed", range(4))
@pytest.mark.parametrize("method", ["nj", "bme"])
def test_refined_tree_is_never_longer_than_its_start(seed, method):
    # Pauplin (2000) by brute force; Desper & Gascuel (2002): each interchange taken lowers the length
    _, _, d = additive_matrix(np.random.default_rng(30 + seed), 35, noise=0.3)
    dm = cw.DistanceMatrix(_names(35), d)
    start = cw.build_tree(dm, method, negative="keep")
    refined, info = cw.build_tree_with_info(dm, method, negative="keep", refine="nni")
    before, after = _pauplin(start, dm.names, d), _pauplin(refined, dm.names, d)
    assert after <= before + 1e-12
    assert info["length_before"] == pytest.approx(before, rel=1e-12)
    assert info["length_after"] == pytest.approx(after, rel=1e-12)


def _to_skbio(tree):
    import io

    from skbio import TreeNode

    return TreeNode.read(io.StringIO(tree.to_newick()))


@pytest.mark.parametrize("seed", range(4))
def test_balanced_nni_is_never_above_scikit_bio_from_the_same_start(seed):
    # scikit-bio skbio.tree.nni(tree, dm, balanced=True) as the reference search; Pauplin (2000) for both lengths
    from skbio import DistanceMatrix as SkDM
    from skbio.tree import nni

    _, _, d = additive_matrix(np.random.default_rng(40 + seed), 40, noise=0.4)
    names = _names(40)
    dm = cw.DistanceMatrix(names, d)
    start = cw.build_tree(dm, "nj")
    theirs = nni(_to_skbio(start), SkDM(d, ids=names), balanced=True)
    theirs_tree = cw.parse_newick(str(theirs))[0]
    ours = cw.refine_tree(start, dm)
    assert _pauplin(ours, names, d) <= _pauplin(theirs_tree, names, d) + 1e-9


def test_ols_refinement_lowers_the_ols_length():
    # Rzhetsky & Nei (1993): OLS length = sum of OLS lengths; checked against numpy's least-squares solve of the
    # path-incidence system (an independent computation) on the start and the result
    _, _, d = additive_matrix(np.random.default_rng(50), 14, noise=0.4)
    names = _names(14)
    dm = cw.DistanceMatrix(names, d)
    start = _random_nnis(cw.build_tree(dm, "nj"), 6, np.random.default_rng(1))
    refined, info = cw.refine_tree_with_info(start, dm, "nni", "ols")

    def ols_length(tree):
        parent = np.asarray(tree.parent)
        n = tree.n_leaves
        order = [tree.leaf_names.index(x) for x in names]
        edges = [v for v in range(parent.size) if parent[v] >= 0]
        rows, target = [], []
        for a in range(n):
            for b in range(a + 1, n):
                up = {}
                v = order[a]
                while v >= 0:
                    up[v] = True
                    v = parent[v]
                row = np.zeros(len(edges))
                v = order[b]
                path_b = []
                while v not in up:
                    path_b.append(v)
                    v = parent[v]
                meet = v
                path_a = []
                v = order[a]
                while v != meet:
                    path_a.append(v)
                    v = parent[v]
                for e in path_a + path_b:
                    row[edges.index(e)] = 1
                rows.append(row)
                target.append(d[a, b])
        x = np.linalg.lstsq(np.array(rows), np.array(target), rcond=None)[0]
        return float(x.sum())  # a root of degree 3 gives each branch one column

    assert info["length_before"] == pytest.approx(ols_length(start), rel=1e-9)
    assert info["length_after"] == pytest.approx(ols_length(refined), rel=1e-9)
    assert info["length_after"] <= info["length_before"]


def test_command_line_refine_reports_both_lengths(tmp_path):
    # Pauplin (2000) by brute force on the NJ start and on the tree written
    _, _, d = additive_matrix(np.random.default_rng(60), 20, noise=0.3)
    names = _names(20)
    tsv = tmp_path / "m.tsv"
    tsv.write_text("\t" + "\t".join(names) + "\n"
                   + "".join(x + "\t" + "\t".join(repr(float(v)) for v in row) + "\n" for x, row in zip(names, d)))
    out = tmp_path / "t.nwk"
    r = CliRunner().invoke(main, ["tree", str(tsv), "-o", str(out), "--refine", "nni", "--negative", "keep"])
    assert r.exit_code == 0, r.output
    m = re.search(r"BME tree length (\S+) before, (\S+) after \((\d+) interchanges\)", r.output)
    assert m, r.output
    nj = cw.build_tree(cw.DistanceMatrix(names, d), "nj")
    written = cw.read_trees(str(out))[0]
    assert float(m.group(1)) == pytest.approx(_pauplin(nj, names, d), rel=1e-5)
    assert float(m.group(2)) == pytest.approx(_pauplin(written, names, d), rel=1e-5)


def test_bad_refinements_are_refused():
    # common practice: an unknown or inapplicable choice is an error, not ignored
    _, dm = _tree_metric(70, 6)
    with pytest.raises(cw.InputError, match="unknown refinement"):
        cw.build_tree(dm, "nj", refine="tbr")
    with pytest.raises(cw.InputError, match="rooted tree"):
        cw.build_tree(dm, "upgma", refine="nni")
    with pytest.raises(cw.InputError, match="refined and bme trees only"):
        cw.build_tree(dm, "nj", criterion="ols")


def _all_interchanges(tree):
    """Every tree one nearest-neighbour interchange away (each internal branch, both swaps), by editing the parent
    array plainly: a child of v exchanged with v's sibling."""
    parent = np.asarray(tree.parent)
    out = []
    for v in range(tree.n_leaves, parent.size):
        p = parent[v]
        if p < 0:
            continue
        kids = np.flatnonzero(parent == v)
        for s in np.flatnonzero(parent == p):
            if s == v:
                continue
            for a in kids:
                q = parent.copy()
                q[a], q[s] = p, v
                out.append(cw.Tree(q, np.full(q.size, np.nan), tree.leaf_names))
    return out


@pytest.mark.parametrize("seed", range(4))
def test_nni_ends_where_no_interchange_is_shorter(seed):
    # Desper & Gascuel (2002): balanced NNI stops at a local optimum. Checked by brute force: Pauplin (2000) over
    # every tree one interchange away, none shorter beyond rounding. The search keeps its table up to date through
    # hundreds of interchanges (rows written, columns read from the row written last): a stale entry would leave
    # an interchange that lowers the length.
    _, _, d = additive_matrix(np.random.default_rng(60 + seed), 36, noise=0.5)
    names = _names(36)
    dm = cw.DistanceMatrix(names, d)
    start = random_join_tree(np.random.default_rng(70 + seed), 36, rooted=False, names=names)
    refined, info = cw.refine_tree_with_info(start, dm, "nni")
    assert info["moves"] > 10
    best = _pauplin(refined, names, d)
    for other in _all_interchanges(refined):
        assert _pauplin(other, names, d) >= best - 1e-12 * best


def test_large_trees_search_a_single_precision_table_and_still_find_the_true_tree():
    # Above about 500 taxa the table of subtree averages is float32 (cladewright.memory.TABLE_DOUBLE_BYTES). On a
    # tree metric NNI and SPR from any start still end at the true tree (Desper & Gascuel 2004; Bordewich et al.
    # 2009, from memory), RF by DendroPy, and the lengths fitted afterwards in float64 are the true ones.
    from cladewright.memory import table_itemsize

    n = 600
    assert table_itemsize(n) == 4
    true, dm = _tree_metric(90, n)
    start = _random_nnis(cw.build_tree(dm, "nj"), 60, np.random.default_rng(91))
    assert _rf_dendropy(start, true) > 0
    for refine in ("nni", "spr"):
        refined, info = cw.refine_tree_with_info(start, dm, refine)
        assert _rf_dendropy(refined, true) == 0
        order = [refined.leaf_names.index(x) for x in dm.names]
        np.testing.assert_allclose(refined.patristic()[np.ix_(order, order)], dm.values, atol=1e-8)
        assert info["length_after"] <= info["length_before"]
