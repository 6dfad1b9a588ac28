"""The Tree class: structure, traversals, splits, path lengths, output.

Checked against DendroPy (bipartition encoding, split counting, patristic
distances), ete3 (traversal orders, Robinson-Foulds distance) and the
definitions of Robinson & Foulds (1981) Math. Biosci. 53:131-147.
"""

import os
import random

import dendropy
import ete3
import numpy as np
import pytest
from dendropy.simulate import treesim

from cladewright.io import read_trees
from cladewright.io.readers import parse_newick
from cladewright.tree import Tree

from simulate import random_join_tree


def random_tree(rng, n, rooted, prefix="t"):
    return random_join_tree(rng, n, rooted, prefix=prefix, one_root_support=False)


def to_dendropy(tree, tns):
    """A DendroPy tree built node by node from the parent array (not through
    our writer)."""
    nodes = [dendropy.Node() for _ in range(tree.n_nodes)]
    for v in range(tree.n_leaves):
        nodes[v].taxon = tns.require_taxon(label=tree.leaf_names[v])
    for v in range(tree.n_nodes):
        p = tree.parent[v]
        if p >= 0:
            nodes[p].add_child(nodes[v])
            nodes[v].edge.length = float(tree.length[v])
    return dendropy.Tree(seed_node=nodes[tree.root], taxon_namespace=tns, is_rooted=tree.rooted)


def dendropy_split_set(dtree, trivial=False):
    """Bipartitions canonical with taxon 0 outside (reference:
    dendropy Tree.encode_bipartitions, Bipartition.leafset_bitmask)."""
    n = len(dtree.taxon_namespace)
    full = (1 << n) - 1
    lim = 1 if trivial else 2
    out = set()
    for b in dtree.encode_bipartitions(suppress_unifurcations=False,
                                       collapse_unrooted_basal_bifurcation=False):
        mask = b.leafset_bitmask
        if mask & 1:
            mask ^= full
        if lim <= bin(mask).count("1") <= n - lim:
            out.add(mask)
    return out


def as_ints(bits):
    return [int.from_bytes(row.tobytes(), "little") for row in bits]


def caterpillar(n):
    """(((x0,x1),x2),...,x{n-1}) with lengths 1..m-1."""
    m = 2 * n - 1
    parent = np.empty(m, np.int64)
    parent[0] = n
    parent[1:n] = np.arange(n, 2 * n - 1)
    parent[n:m - 1] = np.arange(n + 1, m)
    parent[m - 1] = -1
    length = np.arange(1, m + 1, dtype=float)
    length[m - 1] = np.nan
    return Tree(parent, length, [f"x{i}" for i in range(n)], rooted=True)


# ---- construction ----------------------------------------------------------

@pytest.mark.parametrize("parent,why", [
    ([3, 3, 3, 3], "exactly one root"),
    ([3, 3, -1, 2], "must not have children"),
    ([3, 3, 0, -1], "must not have children"),
    ([4, 4, 4, -1, 5, 4], "must have children"),
    ([3, 3, 4, 4, 3], "exactly one root"),
    ([4, 4, 3, -1, 5, 4], "cycle"),
])
def test_invalid_parent_arrays(parent, why):
    # source: common practice -- a rooted tree has one root, leaves have no
    # children and every node descends from the root.
    n = 3
    with pytest.raises(ValueError, match=why):
        Tree(parent, np.zeros(len(parent)), [f"l{i}" for i in range(n)])


def test_duplicate_leaf_names_rejected():
    # source: common practice (taxon names identify leaves)
    with pytest.raises(ValueError, match="more than once"):
        Tree([3, 3, 3, -1], np.zeros(4), ["a", "b", "a"])


# ---- traversals ----------------------------------------------------------

def test_children_and_orders_match_ete3():
    # reference: ete3 TreeNode.traverse("preorder"/"postorder") and
    # .children on the same Newick text, with every node named.
    text = ("((a:1,(b:1,c:1)i1:1)i2:1,(d:1,e:1)i3:1,(f:1,(g:1,(h:1,k:1)i4:1)i5:1)i6:1)root;")
    [t] = parse_newick(text)
    e = ete3.Tree(text, format=1)

    def name(v):
        return t.leaf_names[v] if v < t.n_leaves else t.labels[v]

    assert [name(v) for v in t.preorder()] == [x.name for x in e.traverse("preorder")]
    assert [name(v) for v in t.postorder()] == [x.name for x in e.traverse("postorder")]
    by_name = {name(v): v for v in range(t.n_nodes)}
    for node in e.traverse():
        assert [name(c) for c in t.children(by_name[node.name])] == [c.name for c in node.children]
    assert name(t.root) == "root"


def test_orders_are_consistent_on_random_trees():
    # source: definition of preorder/postorder (common practice): a parent
    # comes before / after all its descendants; checked against ete3's orders.
    rng = np.random.default_rng(11)
    for n in (2, 3, 17, 60):
        t = random_tree(rng, n, rooted=True)
        pre, post = t.preorder(), t.postorder()
        rank_pre = np.empty(t.n_nodes, int)
        rank_pre[pre] = np.arange(t.n_nodes)
        rank_post = np.empty(t.n_nodes, int)
        rank_post[post] = np.arange(t.n_nodes)
        nonroot = np.flatnonzero(t.parent >= 0)
        assert np.all(rank_pre[t.parent[nonroot]] < rank_pre[nonroot])
        assert np.all(rank_post[t.parent[nonroot]] > rank_post[nonroot])
        e = t.to_ete3()
        assert [x.name for x in e.iter_leaves()] == [t.leaf_names[v] for v in pre if v < n]
        assert [x.name for x in e.traverse("postorder") if x.is_leaf()] == [t.leaf_names[v] for v in post if v < n]


# ---- splits ---------------------------------------------------------------

@pytest.mark.parametrize("rooted", [False, True])
def test_splits_agree_with_dendropy_bipartitions(rooted):
    rng = np.random.default_rng(5 + rooted)
    for n in (4, 9, 64, 65, 130):
        t = random_tree(rng, n, rooted)
        tns = dendropy.TaxonNamespace()
        d = to_dendropy(t, tns)
        order = [x.label for x in tns]
        # reference: dendropy encode_bipartitions (canonical form as DendroPy's
        # normalised split bitmask: the first taxon outside the set)
        for trivial in (False, True):
            bits, nodes = t.splits(order=order, trivial=trivial)
            assert bits.dtype == np.uint64 and bits.shape == (nodes.size, (n + 63) // 64)
            got = as_ints(bits)
            assert len(got) == len(set(got))
            assert set(got) == dendropy_split_set(d, trivial=trivial)
            # source: Robinson & Foulds (1981) -- an unrooted binary tree on n
            # leaves has n-3 non-trivial splits and 2n-3 splits in all.
            assert len(got) == (2 * n - 3 if trivial else n - 3)
            assert all(g & 1 == 0 for g in got)


def test_split_nodes_point_at_the_edge():
    # source: Robinson & Foulds (1981): the split of an edge is the set of
    # leaves below it (or its complement).
    [t] = parse_newick("((a,b)x,(c,d)y,(e,(f,g)z)w);")
    bits, nodes = t.splits()
    names = t.leaf_names
    for row, v in zip(as_ints(bits), nodes):
        members = {names[i] for i in range(t.n_leaves) if row >> i & 1}
        below = {"x": {"a", "b"}, "y": {"c", "d"}, "w": {"e", "f", "g"}, "z": {"f", "g"}}[t.labels[v]]
        assert members in (below, set(names) - below)
    assert sorted(t.labels[v] for v in nodes) == ["w", "x", "y", "z"]


def test_split_counts_agree_with_dendropy():
    # reference: dendropy TreeList.split_distribution().split_counts
    tns = dendropy.TaxonNamespace([f"s{i}" for i in range(12)])
    tl = dendropy.TreeList(taxon_namespace=tns)
    for seed in range(15):
        tl.append(treesim.pure_kingman_tree(taxon_namespace=tns, pop_size=1, rng=random.Random(seed)))
    text = tl.as_string(schema="newick", suppress_rooting=True)
    ours = parse_newick(text)
    for t in tl:
        t.is_rooted = False
    sd = tl.split_distribution()
    full = (1 << 12) - 1
    ref = {}
    for mask, c in sd.split_counts.items():
        k = mask ^ full if mask & 1 else mask
        if 2 <= bin(k).count("1") <= 10:
            ref[k] = ref.get(k, 0) + c
    order = [x.label for x in tns]
    counts = {}
    for t in ours:
        for k in as_ints(t.splits(order=order)[0]):
            counts[k] = counts.get(k, 0) + 1
    assert counts == ref


def test_unary_nodes_and_degree_two_root_give_one_split():
    # source: Robinson & Foulds (1981): a split is a bipartition, so edges
    # with the same leaf sets on both sides count once.
    [t] = parse_newick("((((a,b)),c),(d,e));")
    got = as_ints(t.splits()[0])
    # a b c d e -> bits 0..4; {a,b}: complement {c,d,e} = 0b11100; {d,e}=0b11000
    assert sorted(got) == [0b11000, 0b11100]


# ---- path lengths -------------------------------------------------------------

def test_patristic_agrees_with_dendropy():
    # reference: dendropy PhylogeneticDistanceMatrix.patristic_distance
    rng = np.random.default_rng(2)
    for rooted in (False, True):
        t = random_tree(rng, 25, rooted)
        tns = dendropy.TaxonNamespace()
        d = to_dendropy(t, tns)
        pdm = d.phylogenetic_distance_matrix()
        got = t.patristic()
        assert got.shape == (25, 25)
        taxa = {x.label: x for x in tns}
        for i in range(25):
            for j in range(25):
                want = 0.0 if i == j else pdm.patristic_distance(taxa[t.leaf_names[i]], taxa[t.leaf_names[j]])
                assert got[i, j] == pytest.approx(want, rel=1e-12, abs=1e-12)
    # missing lengths count as zero (source: the shared interface; common practice)
    [u] = parse_newick("((a:1,b),c:2);")
    assert u.patristic()[0, 1] == 1.0 and u.patristic()[1, 2] == 2.0


# ---- support and output ----------------------------------------------------

def test_with_support_and_newick_read_by_dendropy():
    rng = np.random.default_rng(9)
    t = random_tree(rng, 10, rooted=False)
    bits, nodes = t.splits()
    sup = np.full(t.n_nodes, np.nan)
    sup[nodes] = np.arange(nodes.size) * 10.0 + 5
    s = t.with_support(sup)
    assert s is not t and np.array_equal(s.parent, t.parent)
    assert not np.array_equal(t.support, s.support, equal_nan=True)
    # reference: DendroPy reads the support as the label of the same split
    d = dendropy.Tree.get(data=s.to_newick(), schema="newick")
    order = [x.label for x in d.taxon_namespace]
    mine = dict(zip(as_ints(s.splits(order=order)[0]), s.splits(order=order)[1]))
    full = (1 << 10) - 1
    seen = 0
    for node in d.postorder_internal_node_iter():
        if node.parent_node is None:
            continue
        mask = sum(1 << order.index(x.taxon.label) for x in node.leaf_iter())
        mask = mask ^ full if mask & 1 else mask
        assert float(node.label) == s.support[mine[mask]]
        seen += 1
    assert seen == nodes.size


def test_to_ete3_matches_ete3_reading():
    # reference: ete3.TreeNode.robinson_foulds and ete3's reading of our Newick
    rng = np.random.default_rng(4)
    t = random_tree(rng, 30, rooted=False)
    mine = t.to_ete3()
    theirs = ete3.Tree(t.to_newick(), format=0)
    rf = mine.robinson_foulds(theirs, unrooted_trees=True)[0]
    assert rf == 0
    assert sorted(mine.get_leaf_names()) == sorted(t.leaf_names)
    d1 = {x.name: x.dist for x in mine.get_leaves()}
    d2 = {x.name: x.dist for x in theirs.get_leaves()}
    assert d1 == d2
    assert len(mine.children) == 3


def test_write_newick_and_nexus_files(tmp_path):
    # reference: DendroPy reads both files; atomic output leaves no temp file
    rng = np.random.default_rng(8)
    t = random_tree(rng, 12, rooted=True)
    for fmt, schema in (("newick", "newick"), ("nexus", "nexus")):
        path = tmp_path / f"out.{fmt}"
        t.write(path, format=fmt)
        d = dendropy.Tree.get(path=str(path), schema=schema)
        assert sorted(x.label for x in d.taxon_namespace) == sorted(t.leaf_names)
        assert dendropy_split_set(d) == dendropy_split_set(to_dendropy(t, d.taxon_namespace))
    assert sorted(os.listdir(tmp_path)) == ["out.newick", "out.nexus"]
    with pytest.raises(ValueError, match="unknown tree format"):
        t.write(tmp_path / "x", format="yaml")


def test_deep_caterpillar_builds_writes_and_reads(tmp_path):
    # source: RULES (every traversal iterative); Newick 1986 specification
    # for the text: a 50,000-leaf caterpillar has 50,000 nested parentheses.
    n = 50_000
    t = caterpillar(n)
    assert t.postorder()[-1] == t.root and t.preorder()[0] == t.root
    path = tmp_path / "deep.nwk"
    t.write(path)
    text = path.read_text()
    assert text.startswith("(" * (n - 1)) and text.endswith(";\n")
    [back] = read_trees(path)
    assert back.leaf_names == t.leaf_names and back.rooted
    assert np.array_equal(back.length[:n], t.length[:n])
    assert back.to_newick() == text
    path2 = tmp_path / "deep.nex"
    t.write(path2, format="nexus")
    [back2] = read_trees(path2)
    assert back2.to_newick() == text
    # splits of a smaller caterpillar against DendroPy (deep, but small)
    c = caterpillar(300)
    tns = dendropy.TaxonNamespace()
    d = to_dendropy(c, tns)
    assert set(as_ints(c.splits(order=[x.label for x in tns])[0])) == dendropy_split_set(d)
