"""Trees and matrices handed to and taken from scikit-bio, DendroPy, Bio.Phylo and ete3.

Sources: each library is an independent reference. A converted object is checked against what that library
itself reads from our Newick text (its own reader: names, branch lengths, support, splits), and a tree the
library read is checked against cladewright's reading of the same text; the Robinson-Foulds distance
(Robinson & Foulds 1981) is DendroPy's ``treecompare.symmetric_difference``. That a tree whose root has two
children is rooted is the Newick convention (1986 informal specification).
"""

import io
import math
import sys
import warnings

import dendropy
import numpy as np
import pytest
import skbio
from Bio import Phylo
from dendropy.calculate import treecompare
from simulate import random_join_tree

import cladewright as cw
from cladewright import interop
from cladewright.errors import InputError

with warnings.catch_warnings():
    warnings.simplefilter("ignore", DeprecationWarning)  # ete3 3.1 imports the deprecated cgi module
    import ete3

NAMES = ["Homo_sapiens", "Pan troglodytes", "it's", "Gorilla", "x1.2-3", "Müller", "a(b)", "t7", "t8", "t9",
         "t10", "t11"]


def our_clusters(tree):
    """{frozenset of leaf names below a non-root node: (length, support)}, nan for missing."""
    out, below = {}, [set() for _ in range(tree.n_nodes)]
    for v in tree.postorder():
        if v < tree.n_leaves:
            below[v].add(tree.leaf_names[v])
        p = tree.parent[v]
        if p >= 0:
            below[p] |= below[v]
            out[frozenset(below[v])] = (float(tree.length[v]), float(tree.support[v]))
    return out


def same(a, b):
    """Cluster maps equal, nan matching nan."""
    if a.keys() != b.keys():
        return False
    return all(all(x == y or (math.isnan(x) and math.isnan(y)) for x, y in zip(a[k], b[k])) for k in a)


def nan_if_none(x):
    return math.nan if x is None else float(x)


def foreign_clusters(root, children, leaf_name, length, support):
    """The same map from another library's tree, walked with the library's own accessors."""
    out, stack, order = {}, [root], []
    while stack:
        v = stack.pop()
        order.append(v)
        stack.extend(children(v))
    below = {}
    for v in reversed(order):
        kids = children(v)
        below[id(v)] = frozenset([leaf_name(v)]) if not kids else frozenset().union(*(below[id(c)] for c in kids))
        if v is not root:
            out[below[id(v)]] = (nan_if_none(length(v)), nan_if_none(support(v)) if kids else math.nan)
    return out


@pytest.fixture(params=[(False, 3), (True, 4)], ids=["unrooted", "rooted"])
def tree(request):
    rooted, seed = request.param
    return random_join_tree(np.random.default_rng(seed), len(NAMES), rooted, names=NAMES, shortest=0.0,
                            longest=0.5, one_root_support=False)


# ---- to the library: the object equals the library's reading of our Newick ---------------------------

def test_to_skbio_tree(tree):
    mine = interop.to_skbio_tree(tree)
    # reference: skbio.TreeNode.read of our Newick (convert_underscores=False keeps '_'), supports assigned
    ref = skbio.TreeNode.read(io.StringIO(tree.to_newick()), convert_underscores=False)
    ref.assign_supports()
    walk = dict(children=lambda x: x.children, leaf_name=lambda x: x.name, length=lambda x: x.length,
                support=lambda x: x.support)
    assert same(foreign_clusters(mine, **walk), foreign_clusters(ref, **walk))
    assert same(foreign_clusters(mine, **walk), our_clusters(tree))
    assert mine.compare_rfd(ref) == 0


def test_to_dendropy(tree):
    ns = dendropy.TaxonNamespace()
    mine = interop.to_dendropy(tree, taxon_namespace=ns)
    # reference: dendropy.Tree.get of our Newick in the same namespace, preserve_underscores=True
    # (our Newick says [&R]/[&U] only where the root's degree would mislead, so the rooting is given here)
    ref = dendropy.Tree.get(data=tree.to_newick(), schema="newick", taxon_namespace=ns, preserve_underscores=True,
                            rooting="force-rooted" if tree.rooted else "force-unrooted")
    assert mine.is_rooted is tree.rooted
    assert treecompare.symmetric_difference(mine, ref) == 0
    walk = dict(children=lambda x: x.child_nodes(), leaf_name=lambda x: x.taxon.label,
                length=lambda x: x.edge.length, support=lambda x: x.label)
    assert same(foreign_clusters(mine.seed_node, **walk), foreign_clusters(ref.seed_node, **walk))


def test_to_biophylo(tree):
    mine = interop.to_biophylo(tree)
    # reference: Bio.Phylo.read of our Newick. Bio.Phylo (1.88) does not read a name that starts with a
    # quote, which NAMES avoids.
    ref = Phylo.read(io.StringIO(tree.to_newick()), "newick")
    walk = dict(children=lambda x: x.clades, leaf_name=lambda x: x.name, length=lambda x: x.branch_length,
                support=lambda x: x.confidence)
    assert same(foreign_clusters(mine.root, **walk), foreign_clusters(ref.root, **walk))
    assert mine.rooted == tree.rooted


def test_to_ete3(tree):
    mine = interop.to_ete3(tree)
    # reference: ete3.Tree(newick, format=0, quoted_node_names=True); names with a quote are beyond ete3
    # 3.1's quoted reader, so this tree renames that leaf for the check
    safe = [x.replace("'", "") for x in tree.leaf_names]
    t2 = cw.Tree(tree.parent, tree.length, safe, support=tree.support, rooted=tree.rooted)
    ref = ete3.Tree(t2.to_newick(), format=0, quoted_node_names=True)
    walk = dict(children=lambda x: x.children, leaf_name=lambda x: x.name.replace("'", ""),
                length=lambda x: x.dist, support=lambda x: x.support)
    assert same(foreign_clusters(mine, **walk), foreign_clusters(ref, **walk))


# ---- round trips and trees the library read ------------------------------------------------------------

PAIRS = [(interop.to_skbio_tree, interop.from_skbio_tree), (interop.to_dendropy, interop.from_dendropy),
         (interop.to_biophylo, interop.from_biophylo), (interop.to_ete3, interop.from_ete3)]


@pytest.mark.parametrize("to, back", PAIRS, ids=["skbio", "dendropy", "biophylo", "ete3"])
def test_round_trip_keeps_names_lengths_support_rooting(tree, to, back):
    # source: the round trip; RF 0 by DendroPy (Robinson & Foulds 1981)
    again = back(to(tree))
    assert sorted(again.leaf_names) == sorted(tree.leaf_names)
    assert same(our_clusters(again), our_clusters(tree))
    assert again.rooted == tree.rooted
    ns = dendropy.TaxonNamespace()
    a = dendropy.Tree.get(data=tree.to_newick(), schema="newick", taxon_namespace=ns, preserve_underscores=True)
    b = dendropy.Tree.get(data=again.to_newick(), schema="newick", taxon_namespace=ns, preserve_underscores=True)
    assert treecompare.symmetric_difference(a, b) == 0


TEXT = "((a_1:1,'b c':2)90:0.5,((d:1,e:1.5)label_x:0.25,f:3)75:0.125,g:0.75);"


def test_trees_each_library_read_come_back_as_cladewright_reads_them():
    # reference: each library's own Newick reader on TEXT, against cladewright's parse_newick of it
    [ours] = cw.parse_newick(TEXT)
    want = our_clusters(ours)
    sk = skbio.TreeNode.read(io.StringIO(TEXT), convert_underscores=False)
    assert same(our_clusters(interop.from_skbio_tree(sk)), want)  # support read from the names
    d = dendropy.Tree.get(data=TEXT, schema="newick", preserve_underscores=True)
    got = interop.from_dendropy(d)
    assert same(our_clusters(got), want) and "label_x" in got.labels
    b = interop.from_biophylo(Phylo.read(io.StringIO(TEXT), "newick"))
    assert same(our_clusters(b), want) and "label_x" in b.labels
    # ete3's format 1 keeps internal names: a number among them is taken as support (as our reader does)
    e1 = interop.from_ete3(ete3.Tree(TEXT, format=1, quoted_node_names=True))
    assert same(our_clusters(e1), want) and "label_x" in e1.labels


def test_rooting_from_each_library():
    # source: the Newick convention (a root of two children is rooted); DendroPy's and Bio.Phylo's flags
    rooted, unrooted = "((a:1,b:1):1,(c:1,d:1):1);", "((a:1,b:1):1,c:1,d:1);"
    for text, want in [(rooted, True), (unrooted, False)]:
        assert interop.from_skbio_tree(skbio.TreeNode.read(io.StringIO(text))).rooted == want
        assert interop.from_ete3(ete3.Tree(text)).rooted == want
        assert interop.from_dendropy(dendropy.Tree.get(data=text, schema="newick")).rooted == want
    d = dendropy.Tree.get(data="[&U] " + rooted, schema="newick")
    assert interop.from_dendropy(d).rooted is False
    b = Phylo.read(io.StringIO(unrooted), "newick", rooted=True)
    assert b.rooted and interop.from_biophylo(b).rooted is True
    assert interop.from_biophylo(Phylo.read(io.StringIO(rooted), "newick")).rooted is False  # Bio.Phylo's default
    assert interop.from_ete3(ete3.Tree(rooted), rooted=False).rooted is False


def test_deep_caterpillar_converts_without_recursion():
    # source: common practice (no recursion limit on deep trees); 3,000 leaves > the default limit of 1,000
    n = 3000
    parent = np.empty(2 * n - 1, dtype=np.int64)
    parent[0] = parent[1] = n
    parent[2:n] = np.arange(n + 1, 2 * n - 1)
    parent[n:2 * n - 2] = np.arange(n + 1, 2 * n - 1)
    parent[2 * n - 2] = -1
    t = cw.Tree(parent, np.r_[np.ones(2 * n - 2), np.nan], [f"t{i}" for i in range(n)], rooted=True)
    for to, back in PAIRS:
        again = back(to(t))
        assert again.n_leaves == n and again.rooted
        assert np.array_equal(np.sort(again.leaf_counts()), np.sort(t.leaf_counts()))


# ---- matrices -------------------------------------------------------------------------------------------

def test_matrices_to_and_from_skbio():
    # reference: skbio.DistanceMatrix built from the same values; scipy-free check of every cell
    rng = np.random.default_rng(5)
    x = rng.random((7, 3))
    d = np.sqrt(((x[:, None] - x[None]) ** 2).sum(-1))
    names = ["Homo_sapiens", "b c", "d", "e", "f", "g", "h"]
    dm = cw.DistanceMatrix(names, d)
    sk = interop.to_skbio_matrix(dm)
    ref = skbio.DistanceMatrix(d, ids=names)
    assert list(sk.ids) == names and np.array_equal(sk.data, ref.data)
    back = interop.from_skbio_matrix(ref)
    assert back.names == tuple(names) and np.array_equal(back.values, d)
    # a matrix symmetric only to rounding is made exactly symmetric for scikit-bio
    e = d.copy()
    e[0, 1] *= 1 + 1e-15
    assert np.array_equal(interop.to_skbio_matrix(cw.DistanceMatrix(names, e)).data,
                          interop.to_skbio_matrix(cw.DistanceMatrix(names, e)).data.T)


# ---- errors ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("func, module, package", [
    (interop.to_skbio_tree, "skbio", "scikit-bio"), (interop.to_dendropy, "dendropy", "DendroPy"),
    (interop.to_biophylo, "Bio.Phylo.Newick", "biopython"), (interop.to_ete3, "ete3", "ete3")])
def test_a_missing_library_is_named(monkeypatch, func, module, package):
    # source: common practice (the error names what to install); None in sys.modules makes import fail
    monkeypatch.setitem(sys.modules, module, None)
    t = cw.Tree([2, 2, -1], [1.0, 1.0, np.nan], ["a", "b"])
    with pytest.raises(InputError, match=f"pip install {package}"):
        func(t)


def test_ete3_without_cgi_says_what_to_install(monkeypatch):
    # source: Python 3.13 removed the cgi module (PEP 594), which ete3 3.1 imports; shown here by hiding it
    for name in [m for m in sys.modules if m == "ete3" or m.startswith("ete3.")]:
        monkeypatch.delitem(sys.modules, name)
    monkeypatch.setitem(sys.modules, "cgi", None)
    with pytest.raises(InputError, match="legacy-cgi"):
        interop.to_ete3(cw.Tree([2, 2, -1], [1.0, 1.0, np.nan], ["a", "b"]))


def test_bad_inputs_are_input_errors():
    with pytest.raises(InputError, match="not a cladewright Tree"):
        interop.to_dendropy("((a,b),c);")
    with pytest.raises(InputError, match="not a dendropy.Tree"):
        interop.from_dendropy(cw.parse_newick("((a,b),c);")[0])
    with pytest.raises(InputError, match="unique name"):
        interop.from_biophylo(Phylo.read(io.StringIO("((a,b),a);"), "newick"))
    e = ete3.Tree()
    e.add_child(name="a")
    e.add_child()  # ete3 names it ""
    with pytest.raises(InputError, match="has no name"):
        interop.from_ete3(e)
