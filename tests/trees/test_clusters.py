"""Groups within a path-length threshold, checked against SciPy and DendroPy.

reference: scipy.cluster.hierarchy.linkage(method="average") + fcluster(criterion="distance")
(UPGMA, Sokal & Michener 1958; a flat cluster keeps merges at cophenetic distance <= t);
DendroPy PhylogeneticDistanceMatrix (patristic distances) for trees that are not ultrametric.
"""

import dendropy
import numpy as np
import pytest
from scipy.cluster.hierarchy import fcluster, linkage
from scipy.spatial.distance import squareform

from cladewright.build import build_tree
from cladewright.clusters import clade_diameters, clusters_within
from cladewright.errors import InputError
from cladewright.matrix import DistanceMatrix
from cladewright.rooting import midpoint_root
from cladewright.tree import Tree

from simulate import random_join_tree, random_matrix


def partition(labels, names):
    labels = np.asarray(labels)
    return {frozenset(names[i] for i in np.flatnonzero(labels == g)) for g in np.unique(labels)}


def random_tree(rng, n, rooted):
    return random_join_tree(rng, n, rooted, shortest=0.0, support=False, shuffle=False)


@pytest.mark.parametrize("seed", range(10))
def test_upgma_groups_equal_fcluster(seed):
    # reference: scipy.cluster.hierarchy.fcluster(linkage(condensed, "average"), t, "distance")
    rng = np.random.default_rng(seed)
    n = int(rng.integers(3, 45))
    values = random_matrix(rng, n, mirror="mean")
    names = [f"s{i}" for i in range(n)]
    tree = build_tree(DistanceMatrix(names, values), "upgma")
    z = linkage(squareform(values, checks=False), "average")
    heights = np.sort(z[:, 2])
    # every merge height exactly (the <= side), halfway between merges, and both ends
    thresholds = list(heights) + list((heights[1:] + heights[:-1]) / 2) + [0.0, heights[-1] * 2]
    for t in thresholds:
        expected = partition(fcluster(z, t=t, criterion="distance"), names)
        labels, sizes = clusters_within(tree, t)
        assert partition(labels, tree.leaf_names) == expected
        assert sizes.sum() == n


def brute_force_groups(tree, d):
    """Maximal clades whose patristic diameter (DendroPy) is <= d."""
    dt = dendropy.Tree.get(data=tree.to_newick(), schema="newick", rooting="force-rooted",
                           preserve_underscores=True)
    pdm = dt.phylogenetic_distance_matrix()
    ok = {}
    for nd in dt.postorder_node_iter():
        leaves = [x.taxon for x in nd.leaf_nodes()]
        diam = max((pdm.patristic_distance(a, b) for a in leaves for b in leaves), default=0.0)
        ok[nd] = diam <= d * (1 + 1e-9)
    groups = set()
    for nd in dt.preorder_node_iter():
        if ok[nd] and (nd.parent_node is None or not ok[nd.parent_node]):
            groups.add(frozenset(x.taxon.label for x in nd.leaf_nodes()))
    return groups


@pytest.mark.parametrize("seed", range(8))
def test_groups_on_any_rooted_tree_match_brute_force(seed):
    # reference: DendroPy patristic distances, the definition applied clade by clade
    rng = np.random.default_rng(50 + seed)
    tree = random_tree(rng, int(rng.integers(3, 25)), rooted=True)
    diam, _ = clade_diameters(tree)
    for d in list(np.unique(diam)) + [0.37, 1.1, 2.5]:
        labels, _ = clusters_within(tree, d)
        assert partition(labels, tree.leaf_names) == brute_force_groups(tree, d)


def test_unrooted_tree_is_midpoint_rooted_first():
    # source: the documented rule (an unrooted tree's stored root is arbitrary); midpoint
    # rooting is checked against DendroPy in test_rooting.py
    rng = np.random.default_rng(7)
    tree = random_tree(rng, 20, rooted=False)
    for d in (0.5, 1.0, 2.0):
        a, _ = clusters_within(tree, d)
        b, _ = clusters_within(midpoint_root(tree), d, root="stored")
        assert partition(a, tree.leaf_names) == partition(b, tree.leaf_names)
        assert partition(a, tree.leaf_names) == brute_force_groups(midpoint_root(tree), d)


def test_numbering_is_by_size_then_first_name():
    # source: the documented numbering rule; worked by hand on ((a,b),(c,d),e) cut at 2
    t = Tree([5, 5, 6, 6, 7, 7, 7, -1], [1.0, 1.0, 1.0, 1.0, 5.0, 3.0, 3.0, np.nan],
             ["d", "c", "b", "a", "e"], rooted=True)
    labels, sizes = clusters_within(t, 2.0)
    assert sizes.tolist() == [2, 2, 1]
    by_name = dict(zip(t.leaf_names, labels.tolist()))
    assert by_name == {"a": 1, "b": 1, "c": 2, "d": 2, "e": 3}


def test_bad_threshold():
    # source: common practice (a distance threshold is a finite number >= 0)
    t = Tree([3, 3, 3, -1], [1.0, 1.0, 1.0, np.nan], list("abc"), rooted=True)
    for bad in (-0.1, float("nan"), "x"):
        with pytest.raises(InputError):
            clusters_within(t, bad)


def test_deep_caterpillar_is_iterative():
    # source: common practice (no recursion limit on a 50,000-leaf caterpillar); worked by
    # hand: unit lengths, so within 2 only the deepest cherry groups, the rest are single
    n = 50_000
    parent = np.empty(2 * n - 1, dtype=np.int64)
    parent[0] = parent[1] = n
    parent[2:n] = np.arange(n + 1, 2 * n - 1)
    parent[n:2 * n - 2] = np.arange(n + 1, 2 * n - 1)
    parent[2 * n - 2] = -1
    length = np.ones(2 * n - 1)
    length[-1] = np.nan
    t = Tree(parent, length, [f"l{i:05d}" for i in range(n)], rooted=True)
    labels, sizes = clusters_within(t, 2.0)
    assert sizes[0] == 2 and sizes.size == n - 1
    assert labels[0] == labels[1] == 1
