"""Midpoint and outgroup rooting, checked against DendroPy.

reference: DendroPy PhylogeneticDistanceMatrix (patristic distances, tree
diameter), Tree.reroot_at_edge (outgroup rooting), bipartition encoding
(splits). Support belongs to splits: Felsenstein (1985) Evolution 39:783-791
(a bootstrap proportion is the frequency of a group/split).
"""

import re

import dendropy
import numpy as np
import pytest

from cladewright.errors import InputError
from cladewright.rooting import midpoint_root, outgroup_root, root_tree
from cladewright.tree import Tree

from simulate import random_join_tree


def random_tree(rng, n, rooted):
    return random_join_tree(rng, n, rooted)


def to_dendropy(tree, tns=None):
    tns = tns if tns is not None else dendropy.TaxonNamespace()
    rooting = "force-rooted" if tree.rooted else "force-unrooted"
    return dendropy.Tree.get(data=tree.to_newick(), schema="newick", rooting=rooting, taxon_namespace=tns,
                             preserve_underscores=True)


def leafset(node):
    return frozenset(x.taxon.label for x in node.leaf_nodes())


def unrooted_splits(dtree, names):
    """Nontrivial unrooted bipartitions as the side without names[0]."""
    first, allset = names[0], frozenset(names)
    out = set()
    for nd in dtree.postorder_node_iter():
        if nd is dtree.seed_node:
            continue
        s = leafset(nd)
        if first in s:
            s = allset - s
        if 2 <= len(s) <= len(allset) - 2:
            out.add(s)
    return out


def split_support(dtree, names):
    """{split: support} from the numeric internal labels of a DendroPy tree."""
    first, allset = names[0], frozenset(names)
    out = {}
    for nd in dtree.postorder_node_iter():
        if nd is dtree.seed_node or nd.is_leaf() or nd.label is None:
            continue
        s = leafset(nd)
        if first in s:
            s = allset - s
        if 2 <= len(s) <= len(allset) - 2:
            assert out.setdefault(s, float(nd.label)) == float(nd.label)
    return out


def rooted_clades(dtree):
    """{clade (leaf set): length of the edge above it} of a rooted DendroPy tree."""
    return {leafset(nd): nd.edge.length for nd in dtree.postorder_node_iter() if nd is not dtree.seed_node}


def check_clades_equal(a, b):
    assert set(a) == set(b)
    for k in a:
        assert a[k] == pytest.approx(b[k], abs=1e-12)


@pytest.mark.parametrize("seed", range(12))
def test_midpoint_puts_deepest_leaf_at_half_the_diameter(seed):
    # reference: DendroPy PhylogeneticDistanceMatrix (diameter = largest patristic distance)
    rng = np.random.default_rng(seed)
    rooted = bool(seed % 2)
    tree = random_tree(rng, int(rng.integers(2 if rooted else 3, 40)), rooted=rooted)
    pdm = to_dendropy(tree).phylogenetic_distance_matrix()
    diameter = max(pdm.distances())
    result = midpoint_root(tree)
    assert result.rooted and result.children(result.root).size == 2
    d = to_dendropy(result)
    # every leaf is within half the diameter of the root, and on each side
    # of the root the deepest leaf is at exactly half (the two ends of the
    # longest path lie on opposite sides)
    for child in d.seed_node.child_nodes():
        depth = max(leaf.distance_from_root() for leaf in child.leaf_nodes())
        assert depth == pytest.approx(diameter / 2, rel=1e-12)
    # rooting changes no path length and no split
    tns = dendropy.TaxonNamespace()
    before = to_dendropy(tree, tns).phylogenetic_distance_matrix()
    after = to_dendropy(result, tns).phylogenetic_distance_matrix()
    for a in tns:
        for b in tns:
            assert after.patristic_distance(a, b) == pytest.approx(before.patristic_distance(a, b), abs=1e-12)
    names = tree.leaf_names
    assert unrooted_splits(to_dendropy(result), names) == unrooted_splits(to_dendropy(tree), names)


def test_midpoint_worked_example():
    # worked by hand: path c..a is 4 + 1 = 5, the midpoint 2.5 from c on c's branch
    t = Tree([3, 3, 3, -1], [1.0, 1.0, 4.0, np.nan], ["a", "b", "c"])
    r = midpoint_root(t)
    kids = r.children(r.root)
    assert sorted(r.length[kids].tolist()) == [1.5, 2.5]
    assert r.to_newick() == "((a:1.0,b:1.0):1.5,c:2.5);\n"


@pytest.mark.parametrize("seed", range(12))
def test_support_stays_with_its_split(seed):
    # source: support is a property of a split (Felsenstein 1985); read back with DendroPy
    rng = np.random.default_rng(100 + seed)
    tree = random_tree(rng, int(rng.integers(5, 30)), rooted=bool(seed % 2))
    names = tree.leaf_names
    before = split_support(to_dendropy(tree), names)
    after_mid = split_support(to_dendropy(midpoint_root(tree)), names)
    leaf = names[int(rng.integers(len(names)))]
    after_out = split_support(to_dendropy(outgroup_root(tree, [leaf])), names)
    assert after_mid == before
    assert after_out == before


@pytest.mark.parametrize("seed", range(16))
def test_outgroup_matches_dendropy_reroot(seed):
    # reference: DendroPy Tree.reroot_at_edge, the new root halfway along the edge. Rooting is on
    # the unrooted tree, so a stored degree-2 root is first collapsed (its two edges are one).
    rng = np.random.default_rng(200 + seed)
    tree = random_tree(rng, int(rng.integers(3, 30)), rooted=bool(seed % 2))
    d = to_dendropy(tree)
    d.collapse_basal_bifurcation(set_as_unrooted_tree=True)
    nodes = [nd for nd in d.postorder_node_iter() if nd is not d.seed_node]
    pick = nodes[int(rng.integers(len(nodes)))]
    outgroup = sorted(leafset(pick))
    edge = pick.edge
    d.reroot_at_edge(edge, length1=edge.length / 2, length2=edge.length / 2, suppress_unifurcations=True)
    ours = to_dendropy(outgroup_root(tree, outgroup))
    check_clades_equal(rooted_clades(ours), rooted_clades(d))
    assert leafset(ours.seed_node.child_nodes()[0]) in (frozenset(outgroup),
                                                         frozenset(tree.leaf_names) - frozenset(outgroup))


@pytest.mark.parametrize("seed", range(20))
def test_outgroup_that_is_not_a_clade(seed):
    # reference: DendroPy bipartitions; an outgroup must be one side of a split of the unrooted tree
    rng = np.random.default_rng(300 + seed)
    n = int(rng.integers(4, 11))
    tree = random_tree(rng, n, rooted=bool(seed % 2))
    names = tree.leaf_names
    k = int(rng.integers(1, n))
    outgroup = frozenset(rng.choice(names, k, replace=False).tolist())
    d = to_dendropy(tree)
    allset = frozenset(names)
    sides = set()
    for nd in d.postorder_node_iter():
        if nd is not d.seed_node:
            sides.add(leafset(nd))
            sides.add(allset - leafset(nd))
    if outgroup in sides:
        r = outgroup_root(tree, sorted(outgroup))
        dr = to_dendropy(r)
        assert outgroup in {leafset(c) for c in dr.seed_node.child_nodes()}
        return
    holding = [s for s in sides if outgroup <= s and s != allset]
    smallest = min(len(s) for s in holding) if holding else len(allset)
    expected = [s - outgroup for s in holding if len(s) == smallest] or [allset - outgroup]
    with pytest.raises(InputError) as err:
        outgroup_root(tree, sorted(outgroup))
    shown = re.search(r"taxa that break it: (.*?) \(the smallest", str(err.value)).group(1)
    assert frozenset(shown.split(", ")) in expected


def test_outgroup_single_taxon_and_bad_names():
    # worked by hand: a single taxon is always one side of a (trivial) split
    t = Tree([4, 4, 5, 5, 5, -1], [1.0, 1.0, 1.0, 1.0, 2.0, np.nan], list("abcd"))
    assert outgroup_root(t, "c").to_newick() == "(((a:1.0,b:1.0):2.0,d:1.0):0.5,c:0.5);\n"
    with pytest.raises(InputError, match="'zz' is not in the tree"):
        outgroup_root(t, ["a", "zz"])
    with pytest.raises(InputError, match="every taxon"):
        outgroup_root(t, list("abcd"))
    with pytest.raises(InputError, match="empty"):
        outgroup_root(t, [" "])


def test_root_tree_spec():
    # worked by hand, as in the two tests above; the command line reads its --root RULE text into a rule
    # (cladewright.cli.app.parse_root) that calls the library's rooting, which takes its arguments explicitly
    from cladewright.cli.app import parse_root

    t = Tree([4, 4, 5, 5, 5, -1], [1.0, 1.0, 1.0, 1.0, 2.0, np.nan], list("abcd"))
    assert parse_root("outgroup:c,d").apply(t).to_newick() == "((a:1.0,b:1.0):1.0,(c:1.0,d:1.0):1.0);\n"
    assert parse_root("Midpoint").apply(t).to_newick() == midpoint_root(t).to_newick()
    stored = parse_root("stored").apply(t)
    # the stored root kept and marked meaningful: the same tree, written with the rooted mark (common practice)
    assert stored.rooted and not t.rooted and stored.to_newick() == "[&R] " + t.to_newick()
    for wrong in ("", "c,d", "outgroup:", "outgroup:c,,d", "midpoint:x"):
        with pytest.raises(InputError, match="--root"):
            parse_root(wrong)
    with pytest.raises(InputError, match="midpoint or outgroup"):
        parse_root("stored", stored=False)
    assert root_tree(t, outgroup=["c", "d"]).to_newick() == "((a:1.0,b:1.0):1.0,(c:1.0,d:1.0):1.0);\n"
    assert root_tree(t, midpoint=True).to_newick() == midpoint_root(t).to_newick()
    for wrong in ({}, {"midpoint": True, "outgroup": ["c"]}, {"outgroup": "c,d"}):
        with pytest.raises(InputError):
            root_tree(t, **wrong)


def test_underscore_and_blank_are_the_same_name():
    # source: Newick reads an unquoted '_' as a blank (1986 informal specification)
    t = Tree([3, 3, 3, -1], [1.0, 1.0, 4.0, np.nan], ["x one", "b", "c"])
    r = outgroup_root(t, ["x_one"])
    assert {frozenset(r.leaf_names[i] for i in range(3) if r.parent[i] == r.root)} == {frozenset({"x one"})}


def test_no_lengths_no_midpoint():
    # source: common practice (a midpoint needs branch lengths)
    t = Tree([3, 3, 3, -1], [np.nan] * 4, ["a", "b", "c"])
    with pytest.raises(InputError, match="no branch lengths"):
        midpoint_root(t)


def test_deep_caterpillar_is_iterative():
    # source: common practice (no recursion limit on a 50,000-leaf caterpillar);
    # worked by hand: unit lengths, longest path leaf 0 .. leaf n-1 has n edges
    n = 50_000
    parent = np.empty(2 * n - 1, dtype=np.int64)
    parent[0] = parent[1] = n
    parent[2:n] = np.arange(n + 1, 2 * n - 1)
    parent[n:2 * n - 2] = np.arange(n + 1, 2 * n - 1)
    parent[2 * n - 2] = -1
    length = np.ones(2 * n - 1)
    length[-1] = np.nan
    t = Tree(parent, length, [f"l{i}" for i in range(n)], rooted=True)
    r = midpoint_root(t)
    kids = r.children(r.root)
    assert kids.size == 2
    o = outgroup_root(t, ["l0"])
    assert o.children(o.root).size == 2 and o.n_leaves == n
