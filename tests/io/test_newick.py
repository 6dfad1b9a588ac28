"""Newick and NEXUS reading and writing, checked against outside references.

Hand-written trees follow the Newick format (the trade's de facto standard,
1986 informal specification); NEXUS follows Maddison, Swofford & Maddison
(1997) Syst. Biol. 46:590-621. What our writer produces is read back by
DendroPy, Biopython's Bio.Phylo and ete3; what our reader makes of a text is
compared with DendroPy's reading of the same text.
"""

import io
import math

import dendropy
import ete3
import numpy as np
import pytest
from Bio import Phylo
from hypothesis import given, settings, strategies as st, HealthCheck

from cladewright.errors import InputError
from cladewright.io import read_trees
from cladewright.io.newick_writer import format_newick
from cladewright.io.nexus import format_nexus
from cladewright.io.readers import parse_newick, parse_nexus_trees
from cladewright.tree import Tree

from simulate import random_join_tree

AWKWARD = ["plain", "with space", "it's", "br(a)ck[e]t", "co:lon", "com,ma", "Übersee ñ 東京",
           "semi;colon", "under_score", "12", "tab\there", "'", "a''b"]


def random_tree(rng, names, rooted, support=True):
    """A random binary tree by random joins over ``names`` (in order), with random lengths and integer
    support percentages on internal non-root nodes (each root branch its own value)."""
    return random_join_tree(rng, len(names), rooted, names=names, shortest=0.0, longest=0.5, support=support,
                            shuffle=False, one_root_support=False)


def our_clusters(tree):
    """{frozenset of leaf names below a non-root node: (length, support, label)}."""
    out = {}
    below = [set() for _ in range(tree.n_nodes)]
    for v in tree.postorder():
        if v < tree.n_leaves:
            below[v].add(tree.leaf_names[v])
        p = tree.parent[v]
        if p >= 0:
            below[p] |= below[v]
            out[frozenset(below[v])] = (tree.length[v], tree.support[v], tree.labels[v])
    return out


def dendropy_clusters(dtree):
    """The same map from a DendroPy tree (reference: dendropy.Node.leaf_iter)."""
    out = {}
    for node in dtree.postorder_node_iter():
        if node.parent_node is None:
            continue
        key = frozenset(x.taxon.label for x in node.leaf_iter())
        ln = node.edge.length
        out[key] = (math.nan if ln is None else ln, node.label)
    return out


def split_set(tree, order):
    """Our splits as Python ints over `order`."""
    bits, _ = tree.splits(order=order)
    return {int.from_bytes(row.tobytes(), "little") for row in bits}


def dendropy_split_set(dtree):
    """Non-trivial bipartitions, canonical with taxon 0 outside
    (reference: dendropy Tree.encode_bipartitions, leafset_bitmask)."""
    n = len(dtree.taxon_namespace)
    full = (1 << n) - 1
    out = set()
    # no folding of the basal bifurcation or one-child nodes: the tree is
    # left as read
    for b in dtree.encode_bipartitions(suppress_unifurcations=False,
                                       collapse_unrooted_basal_bifurcation=False):
        mask = b.leafset_bitmask
        if mask & 1:
            mask ^= full
        if 2 <= bin(mask).count("1") <= n - 2:
            out.add(mask)
    return out


def same_float(a, b):
    return (math.isnan(a) and math.isnan(b)) or a == b


# ---- hand-written Newick, compared with DendroPy -------------------------

# source: Newick format: the trade's de facto standard (1986 informal
# specification) -- its examples with names, plus quoting, comments and
# underscores as it describes them.
HAND_WRITTEN = [
    "(A,B,(C,D));",
    "(A,B,(C,D)E)F;",
    "(A:0.1,B:0.2,(C:0.3,D:0.4):0.5);",
    "(A:0.1,B:0.2,(C:0.3,D:0.4)E:0.5)F;",
    "((B:0.2,(C:0.3,D:0.4)E:0.5)F:0.1)A;",
    "((raccoon:19.19959,bear:6.80041):0.84600,((sea_lion:11.99700,seal:12.00300):7.52973,"
    "((monkey:100.85930,cat:47.14069):20.59201,weasel:18.87953):2.09460):3.87382,dog:25.46154);",
    "(Bovine:0.69395,(Gibbon:0.36079,(Orang:0.33636,(Gorilla:0.17147,(Chimp:0.19268,"
    "Human:0.11927):0.08386):0.06124):0.15057):0.54939,Mouse:1.21460):0.10;",
    "('Homo sapiens':1.5,'it''s':2e-3,[a comment](x_y:1,z:.5)95:3)[another];",
    "(\n  a : 1 ,\n  b : 2 ,\n  (c:3,d:4) 87 : 5\n);",
]


@pytest.mark.parametrize("text", HAND_WRITTEN)
def test_hand_written_newick_matches_dendropy(text):
    [ours] = parse_newick(text)
    # reference: dendropy.Tree.get(schema="newick", preserve_underscores=True) on the same text: cladewright
    # keeps an unquoted '_' in Newick, as most readers today do (common practice)
    ref = dendropy.Tree.get(data=text, schema="newick", suppress_internal_node_taxa=True, preserve_underscores=True)
    assert sorted(ours.leaf_names) == sorted(t.label for t in ref.taxon_namespace)
    order = [t.label for t in ref.taxon_namespace]
    mine, theirs = our_clusters(ours), dendropy_clusters(ref)
    assert split_set(ours, order) == dendropy_split_set(ref)
    assert mine.keys() == theirs.keys()
    for key, (ln, sup, lab) in mine.items():
        ref_len, ref_label = theirs[key]
        assert same_float(ln, ref_len)
        if ref_label is None:
            assert math.isnan(sup) and lab is None
        elif math.isnan(sup):
            assert lab == ref_label
        else:
            assert sup == float(ref_label)


def test_rooting_of_what_is_read():
    # source: Newick 1986 specification (a root of degree 2 is a rooted tree);
    # the [&R]/[&U] comments: common practice (also read by DendroPy).
    assert parse_newick("((a,b),c);")[0].rooted
    assert not parse_newick("(a,b,c);")[0].rooted
    assert not parse_newick("[&U] ((a,b),c);")[0].rooted
    assert parse_newick("[&R] (a,b,c);")[0].rooted
    for text, rooted in [("[&U] ((a,b),c);", False), ("[&R] ((a,b),c);", True)]:
        ref = dendropy.Tree.get(data=text, schema="newick", rooting="default-unrooted")
        assert bool(ref.is_rooted) == rooted == parse_newick(text)[0].rooted


def test_several_trees_per_text():
    # source: Newick 1986 specification (each tree ends with ';')
    text = "(a,b,(c,d));\n((a,c),b,d);  (a:1,(b:2,c:3):4,d:5);\n\n"
    trees = parse_newick(text)
    ref = dendropy.TreeList.get(data=text, schema="newick")
    assert len(trees) == len(ref) == 3
    for ours, theirs in zip(trees, ref):
        order = [t.label for t in theirs.taxon_namespace]
        assert split_set(ours, order) == dendropy_split_set(theirs)


# ---- malformed input ------------------------------------------------------

# source: common practice -- 1-based line and column of the offending token.
BAD = [
    ("((a,b),c;", "line 1, column 9", "not closed"),
    ("(a,b));", "line 1, column 6", "unbalanced"),
    ("(a,b)", "line 1, column 5", "does not end with ';'"),
    ("(a,b):abc;", "line 1, column 7", "bad branch length"),
    ("(a,\n b:x);", "line 2, column 4", "bad branch length"),
    ("(a:1:2,b);", "line 1, column 5", "second ':'"),
    ("(a,'b c);", "line 1, column 4", "never closed"),
    ("(a,b[c);", "line 1, column 5", "comment"),
    ("(a,b,\na);", "line 2, column 1", "used twice"),
    ("(a,,b);", "line 1, column 4", "no name"),
    ("(a b,c);", "line 1, column 4", "unexpected label"),
    ("(a,b)(c,d);", "line 1, column 6", "','"),
    (";", "line 1, column 1", "empty tree"),
]


@pytest.mark.parametrize("text,where,what", BAD)
def test_malformed_newick_names_line_and_column(text, where, what):
    with pytest.raises(InputError) as err:
        parse_newick(text, source="trees.nwk")
    msg = str(err.value)
    assert msg.startswith("trees.nwk: ") and where in msg and what in msg
    assert "\n" not in msg


@pytest.mark.parametrize("text", ["", "  \n\t", "[just a comment]\n"])
def test_empty_input(text, tmp_path):
    # source: common practice (an empty tree file is an error, not zero trees)
    path = tmp_path / "empty.nwk"
    path.write_text(text)
    with pytest.raises(InputError, match="no tree"):
        read_trees(path)


# ---- our output read by other libraries ------------------------------------

def test_output_read_by_dendropy_biophylo_ete3():
    rng = np.random.default_rng(7)
    tree = random_tree(rng, AWKWARD, rooted=False)
    text = tree.to_newick()
    assert text.endswith(";\n") and text.count("\n") == 1
    mine = our_clusters(tree)

    # reference: dendropy.Tree.get(schema="newick", preserve_underscores=True)
    d = dendropy.Tree.get(data=text, schema="newick", preserve_underscores=True)
    assert sorted(t.label for t in d.taxon_namespace) == sorted(AWKWARD)
    theirs = dendropy_clusters(d)
    assert theirs.keys() == mine.keys()
    for key, (ln, sup, _) in mine.items():
        assert theirs[key][0] == ln
        assert (theirs[key][1] is None) if math.isnan(sup) else (float(theirs[key][1]) == sup)

    # reference: Bio.Phylo.read(StringIO, "newick"). Bio.Phylo (1.88) joins a
    # doubled quote only between other characters, so names starting or
    # ending with "'" or holding "''" are left out of this check.
    bio_names = [x for x in AWKWARD if not (x.startswith("'") or x.endswith("'") or "''" in x)]
    t1 = random_tree(rng, bio_names, rooted=False)
    mine1 = our_clusters(t1)
    b = Phylo.read(io.StringIO(t1.to_newick()), "newick")
    assert sorted(c.name for c in b.get_terminals()) == sorted(bio_names)
    for clade in b.find_clades():
        if clade is b.root:
            continue
        key = frozenset(c.name for c in clade.get_terminals())
        ln, sup, _ = mine1[key]
        assert clade.branch_length == ln
        if not clade.is_terminal():
            assert clade.confidence == sup

    # reference: ete3.Tree(text, format=0, quoted_node_names=True). ete3 3.1
    # does not undo doubled quotes inside a quoted name, so names holding "'"
    # are left out of this check.
    plain = [x for x in AWKWARD if "'" not in x]
    t2 = random_tree(rng, plain, rooted=True)
    e = ete3.Tree(t2.to_newick(), format=0, quoted_node_names=True)
    assert sorted(x.name for x in e.get_leaves()) == sorted(plain)
    mine2 = our_clusters(t2)
    for node in e.traverse():
        if node.is_root():
            continue
        key = frozenset(node.get_leaf_names())
        ln, sup, _ = mine2[key]
        assert node.dist == ln
        if not node.is_leaf():
            assert node.support == sup


def test_length_and_support_digits():
    # source: Newick 1986 specification (lengths are decimal numbers after ':',
    # internal labels as numbers); read back by DendroPy.
    t = Tree([3, 3, 4, 4, -1], [1 / 3, 2e-7, 12345.678, 0.1, np.nan], ["a", "b", "c"],
             support=[np.nan, np.nan, np.nan, 87.654, np.nan], rooted=True)
    assert t.to_newick() == "((a:0.3333333333333333,b:2e-07)88:0.1,c:12345.678);\n"
    assert t.to_newick(digits=3, support_digits=1) == "((a:0.333,b:2e-07)87.7:0.1,c:1.23e+04);\n"
    d = dendropy.Tree.get(data=t.to_newick(digits=3), schema="newick")
    assert sorted(e.length for e in d.postorder_edge_iter() if e.length is not None) == [2e-07, 0.1, 0.333, 12300.0]
    # nan length: no ':len' at all
    u = Tree([2, 2, -1], [np.nan, 1.5, np.nan], ["x", "y"], rooted=True)
    assert u.to_newick() == "(x,y:1.5);\n"


def test_internal_labels_kept_and_numeric_labels_quoted():
    # source: Newick 1986 specification (internal nodes may be named); a
    # label that looks like a number is quoted so it is not read as support.
    # An unquoted '_' is kept and written bare again (common practice).
    [t] = parse_newick("((a,b)clade_one,(c,d)'42',e,(f,g)'clade two');")
    assert sorted(x for x in t.labels if x) == ["42", "clade two", "clade_one"]
    assert np.all(np.isnan(t.support))
    out = t.to_newick()
    assert "'42'" in out and ")clade_one" in out and "'clade two'" in out
    assert ")'clade_one'" in t.to_newick(quoting="strict")
    d = dendropy.Tree.get(data=out, schema="newick", preserve_underscores=True)
    assert sorted(n.label for n in d.internal_nodes() if n.label) == ["42", "clade two", "clade_one"]


# ---- NEXUS ------------------------------------------------------------------

def test_nexus_output_read_by_dendropy_and_biophylo():
    rng = np.random.default_rng(3)
    trees = [random_tree(rng, AWKWARD, rooted=False), random_tree(rng, AWKWARD, rooted=True)]
    text = format_nexus(trees)
    assert text.startswith("#NEXUS\n")
    assert "DIMENSIONS NTAX=13;" in text and "TRANSLATE" in text
    assert "= [&U] (" in text and "= [&R] (" in text
    # reference: dendropy.TreeList.get(schema="nexus")
    ref = dendropy.TreeList.get(data=text, schema="nexus", preserve_underscores=True)
    assert sorted(t.label for t in ref.taxon_namespace) == sorted(AWKWARD)
    assert [bool(x.is_rooted) for x in ref] == [False, True]
    for ours, theirs in zip(trees, ref):
        mine, got = our_clusters(ours), dendropy_clusters(theirs)
        assert got.keys() == mine.keys()
        for key, (ln, sup, _) in mine.items():
            assert got[key][0] == ln
            assert (got[key][1] is None) if math.isnan(sup) else float(got[key][1]) == sup
    # reference: Bio.Phylo.read(StringIO, "nexus"). Bio.Nexus (1.88) keeps
    # the quotes of quoted TRANSLATE names, so this check uses names that
    # need none.
    plain = ["Homo.sapiens", "Pan", "Gorilla", "x1", "B.c.d", "Mus"]
    t3 = random_tree(rng, plain, rooted=False)
    b = Phylo.read(io.StringIO(format_nexus(t3)), "nexus")
    assert sorted(c.name for c in b.get_terminals()) == sorted(plain)
    mine3 = our_clusters(t3)
    for clade in b.find_clades():
        if clade is not b.root:
            ln, sup, _ = mine3[frozenset(c.name for c in clade.get_terminals())]
            assert clade.branch_length == ln
            assert clade.is_terminal() or clade.confidence == sup
    # and our own reader gives back the same trees
    back = parse_nexus_trees(text)
    for ours, again in zip(trees, back):
        assert again.rooted == ours.rooted
        assert our_clusters(again).keys() == our_clusters(ours).keys()
        assert again.to_newick() == ours.to_newick()


def test_nexus_written_by_dendropy():
    # reference: DendroPy's NEXUS writer (with and without TRANSLATE)
    tns = dendropy.TaxonNamespace([f"taxon {i}" for i in range(8)] + ["o'brien"])
    from dendropy.simulate import treesim
    rng_trees = dendropy.TreeList(taxon_namespace=tns)
    for seed in range(3):
        import random
        rng_trees.append(treesim.pure_kingman_tree(taxon_namespace=tns, pop_size=1, rng=random.Random(seed)))
    for translate in (True, False):
        text = rng_trees.as_string(schema="nexus", translate_tree_taxa=translate)
        ours = parse_nexus_trees(text)
        assert len(ours) == 3
        for mine, theirs in zip(ours, rng_trees):
            assert sorted(mine.leaf_names) == sorted(t.label for t in tns)
            order = [t.label for t in tns]
            assert split_set(mine, order) == dendropy_split_set(theirs)
            got = dendropy_clusters(theirs)
            for key, (ln, _, _) in our_clusters(mine).items():
                assert ln == pytest.approx(got[key][0], rel=1e-12)


def test_hand_written_nexus_other_styles(tmp_path):
    # source: Maddison, Swofford & Maddison (1997) -- case-insensitive
    # keywords, TRANSLATE with quoted names, comments, several blocks;
    # compared with DendroPy's reading of the same file.
    text = """#nexus
[written by hand]
begin taxa;
  dimensions ntax=4;
  taxlabels 'Homo sapiens' Pan_troglodytes Gorilla 'O''rang';
end;
Begin Trees;
  Translate 1 'Homo sapiens', 2 Pan_troglodytes,
            3 Gorilla, 4 'O''rang';
  tree first = [&U] ((1:0.1,2:0.2)95:0.05,3:0.3,4:0.4);
  Tree * 'second tree' = [&R] (((1,3)60,2),4);
  tree third=((1,4),(2,3));
endblock;
"""
    path = tmp_path / "hand.nex"
    path.write_text(text)
    ours = read_trees(path)
    ref = dendropy.TreeList.get(data=text, schema="nexus")
    assert len(ours) == len(ref) == 3
    assert [t.rooted for t in ours] == [False, True, True]
    for mine, theirs in zip(ours, ref):
        assert sorted(mine.leaf_names) == sorted(t.label for t in ref.taxon_namespace)
        assert split_set(mine, [t.label for t in ref.taxon_namespace]) == dendropy_split_set(theirs)
    assert ours[0].support[ours[0].support == ours[0].support].tolist() == [95.0]


def test_nexus_without_translate_uses_taxlabels():
    # source: Maddison et al. (1997): without TRANSLATE, numbers in a tree
    # refer to the TAXLABELS order.
    text = ("#NEXUS\nBEGIN TAXA; DIMENSIONS NTAX=3; TAXLABELS x y z; END;\n"
            "BEGIN TREES; TREE t = (1,2,3); TREE u = (x,(z,y)); END;\n")
    a, b = parse_nexus_trees(text)
    assert a.leaf_names == ("x", "y", "z") and b.leaf_names == ("x", "z", "y")
    ref = dendropy.TreeList.get(data=text, schema="nexus")
    assert sorted(x.taxon.label for x in ref[0].leaf_node_iter()) == ["x", "y", "z"]


@pytest.mark.parametrize("text,what", [
    ("#NEXUS\nBEGIN TREES;\n TREE t = ((a,b),c;\nEND;\n", "line 3"),
    # without its ';' the TREE command runs on and takes 'END' as a label
    ("#NEXUS\nBEGIN TREES;\n TREE t = (a,b,c)\nEND;\n", "line 2, column 1: block TREES has no 'END;'"),
    ("#NEXUS\nBEGIN TREES;\n TREE t = (a,b,c);\n", "no 'END;'"),
    ("#NEXUS\nBEGIN TAXA; TAXLABELS a b; END;\n", "no TREE"),
    ("#NEXUS\nBEGIN TREES; TRANSLATE 1 a, 2; TREE t = (1,2); END;\n", "TRANSLATE"),
    ("#NEXUS\nBEGIN TREES; TRANSLATE 1 a, 2 a; TREE t = (1,2); END;\n", "twice"),
])
def test_malformed_nexus(text, what):
    # source: common practice (error names the place and the fix)
    with pytest.raises(InputError, match=what):
        parse_nexus_trees(text, source="x.nex")


def test_read_trees_detects_format(tmp_path):
    # source: Maddison et al. (1997): a NEXUS file begins with #NEXUS
    t = random_tree(np.random.default_rng(1), ["a", "b", "c", "d", "e"], rooted=False)
    t.write(tmp_path / "t.nex", format="nexus")
    t.write(tmp_path / "t.nwk")
    for name in ("t.nex", "t.nwk"):
        [back] = read_trees(tmp_path / name)
        assert back.to_newick() == t.to_newick()
    assert (tmp_path / "t.nex").read_text().startswith("#NEXUS")


# ---- round trip -----------------------------------------------------------

label_text = st.text(min_size=1, max_size=8)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(label_text, min_size=2, max_size=12, unique=True), st.integers(0, 2**32 - 1),
       st.booleans(), st.lists(st.floats(allow_nan=False, allow_infinity=False), min_size=23, max_size=23),
       st.lists(st.one_of(st.none(), label_text), min_size=11, max_size=11))
def test_round_trip_random_trees(names, seed, rooted, lengths, inner):
    # source: Newick 1986 specification -- quoting makes any label, and repr
    # any float length, read back exactly (common practice for round trips).
    rng = np.random.default_rng(seed)
    n = len(names)
    if n < 3:
        rooted = True
    t = random_tree(rng, names, rooted)
    m = t.n_nodes
    length = np.array(lengths[:m])
    length[rng.random(m) < 0.2] = np.nan
    sup = t.support.copy()
    labels = [None] * m
    for v in range(n, m):
        if rng.random() < 0.4 and inner[v - n] is not None:
            sup[v] = np.nan
            labels[v] = inner[v - n]
    t = Tree(t.parent, length, names, support=sup, labels=labels, rooted=rooted)
    for text in (format_newick(t), format_nexus([t])):
        [back] = parse_newick(text) if not text.startswith("#") else parse_nexus_trees(text)
        assert sorted(back.leaf_names) == sorted(t.leaf_names)
        assert back.rooted == t.rooted
        mine, got = our_clusters(t), our_clusters(back)
        assert mine.keys() == got.keys()
        for key, (ln, s, lab) in mine.items():
            ln2, s2, lab2 = got[key]
            assert same_float(ln, ln2) and same_float(s, s2) and lab == lab2
        assert format_newick(back) == format_newick(t)
