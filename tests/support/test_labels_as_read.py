"""Support labels kept as read, support on a 0-1 scale, clusters without branch
lengths, and the consensus threshold up to the strict consensus.

References: the Newick format (the trade's de facto standard, 1986 informal
specification) and NEXUS (Maddison, Swofford & Maddison 1997, Syst. Biol.
46:590-621), read back with DendroPy and with a plain regular expression;
DendroPy's consensus (TreeList.consensus, a split kept when its frequency is
>= min_freq) for majority rule (Margush & McMorris 1981, Bull. Math. Biol.
43:239-244) and for the strict consensus (min_freq 1.0), and the plain
intersection of the trees' split sets computed in this file; the W3C SVG 1.1
text elements, parsed with xml.etree.
"""

import re
import xml.etree.ElementTree as ET

import dendropy
import numpy as np
import pytest
from click.testing import CliRunner

from cladewright.cli import main
from cladewright.draw import LOW
from cladewright.errors import InputError
from cladewright.io.readers import parse_newick
from cladewright.matrix import DistanceMatrix
from cladewright.report import write_report
from cladewright.support import apply_support, majority_consensus
from cladewright.tree import Tree

SVG = "{http://www.w3.org/2000/svg}"

# Seven internal labels of the issue, each on its own split (lengths unequal so
# that no root falls on a node).
TAXA = list("abcdefghij")
LABELLED = ("(((a:1,b:2)0.9987:1,(c:1,d:1.5)0.004:1)1e308:1.2,((e:1,f:1)95:1,(g:1,h:1)95.0:1)100:1,"
            "(i:1,j:3)0.5:1);\n")
# The labels as written above, by the clade each stands over (read off the text by hand).
EXPECTED = {"ab": "0.9987", "cd": "0.004", "abcd": "1e308", "ef": "95", "gh": "95.0", "efgh": "100", "ij": "0.5"}

NEXUS_INPUT = """#NEXUS
BEGIN TAXA;
    DIMENSIONS NTAX=10;
    TAXLABELS a b c d e f g h i j;
END;
BEGIN TREES;
    TRANSLATE 1 a, 2 b, 3 c, 4 d, 5 e, 6 f, 7 g, 8 h, 9 i, 10 j;
    TREE one = (((1:1,2:2)0.9987:1,(3:1,4:1.5)0.004:1)1e308:1.2,((5:1,6:1)95:1,(7:1,8:1)95.0:1)100:1,(9:1,10:3)0.5:1);
END;
"""


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)


def split_key(side, everyone=frozenset(TAXA)):
    """An unrooted split as the pair of its sides (so both halves of a cut branch coincide)."""
    side = frozenset(side)
    return frozenset({side, everyone - side})


def expected_by_split():
    return {split_key(k): v for k, v in EXPECTED.items()}


def dendropy_labels(path, schema):
    """{split: [label, ...]} for every labelled internal node, as DendroPy reads the file."""
    tree = dendropy.Tree.get(path=str(path), schema=schema, rooting="force-rooted")
    found = {}
    for node in tree.preorder_internal_node_iter():
        if node is tree.seed_node or node.label is None:
            continue
        side = {leaf.taxon.label for leaf in node.leaf_nodes()}
        found.setdefault(split_key(side), []).append(node.label)
    return found


def plain_labels(text):
    """Internal labels by a plain regex: the word right after a ')'."""
    return re.findall(r"\)([^\s:,;()\[\]]+)", text)


# ---- 6. labels kept as read -------------------------------------------------

@pytest.mark.parametrize("args,suffix", [
    (["--root", "midpoint"], ".nwk"),
    (["--root", "outgroup:i,j"], ".nwk"),
    (["--root", "outgroup:a"], ".nwk"),
    (["--root", "outgroup:e,f"], ".nex"),
    (["--root", "midpoint"], ".nexus"),
])
@pytest.mark.parametrize("source", ["newick", "nexus"])
def test_root_writes_labels_exactly_as_read(tmp_path, args, suffix, source):
    # source: the input text itself (EXPECTED, read off by hand), read back with DendroPy and a regex;
    # rooting keeps every split of the unrooted tree (Robinson & Foulds 1981), so every label must come
    # back on its split, character for character
    src = tmp_path / ("in.nwk" if source == "newick" else "in.nex")
    src.write_text(LABELLED if source == "newick" else NEXUS_INPUT)
    out = tmp_path / ("out" + suffix)
    result = run("root", src, "-o", out, *args)
    assert result.exit_code == 0, result.stderr
    schema = "newick" if suffix == ".nwk" else "nexus"
    got = dendropy_labels(out, schema)
    want = expected_by_split()
    assert set(got) == set(want)
    for key, labels in got.items():
        assert set(labels) == {want[key]}  # the two halves of a cut branch carry the same text
    text = out.read_text()
    assert sorted(set(plain_labels(text))) == sorted(EXPECTED.values())
    assert not re.search(r"\d{20}", text)  # 1e308 is not written out as a 309-digit integer


def test_library_round_trip_keeps_the_text():
    # source: the Newick text itself (the labels as written)
    [t] = parse_newick(LABELLED)
    assert sorted(plain_labels(t.to_newick())) == sorted(EXPECTED.values())
    # the values read are the numbers written (Python float of the text)
    assert sorted(x for x in t.support.tolist() if x == x) == sorted(float(x) for x in EXPECTED.values())


def test_computed_support_replaces_the_text(tmp_path):
    # source: Felsenstein (1985): a split found in every replicate has support 100%; computed support is
    # written as before (integer percentages), whatever the labels read with the tree
    src = tmp_path / "in.nwk"
    src.write_text(LABELLED)
    reps = tmp_path / "reps.nwk"
    reps.write_text(LABELLED * 3)
    out = tmp_path / "out.nwk"
    assert run("tally", reps, "--onto", src, "-o", out).exit_code == 0
    assert plain_labels(out.read_text()) == ["100"] * 7
    [t] = parse_newick(LABELLED)
    assert apply_support(t, np.full(7, 12.5)).to_newick(support_digits=1).count(")12.5") == 7


def test_text_that_no_longer_reads_as_the_value_is_not_used():
    # source: the Newick text (a label is written only while it still states the node's value)
    [t] = parse_newick("((a:1,b:1)0.9987:1,c:1,d:1);")
    changed = Tree(t.parent, t.length, t.leaf_names, support=np.where(np.isnan(t.support), np.nan, 40.0),
                   support_text=t.support_text)
    assert plain_labels(changed.to_newick()) == ["40"]


# ---- 6. support on a 0-1 scale ----------------------------------------------

PROPORTIONS = "((a:1,b:1)0.6:1,((c:1,d:1)0.8:1,e:1)0.95:1,f:1);\n"
PERCENT = "((a:1,b:1)60:1,((c:1,d:1)80:1,e:1)95:1,f:1);\n"


def svg_support_words(path):
    texts = [("".join(e.itertext()), e.get("style", "")) for e in ET.parse(path).getroot().iter(SVG + "text")]
    return {t for t, _ in texts}, [t for t, style in texts if LOW in style and t.isdigit()]


@pytest.mark.parametrize("text,note", [(PROPORTIONS, True), (PERCENT, False)])
def test_highlight_below_on_proportions(tmp_path, text, note):
    # source: common practice: support 0.6 on a 0-1 scale is 60%, below a 70% threshold; 0.8 and 0.95
    # (80%, 95%) are not. Compared as fractions against 70 all three would be marked.
    src = tmp_path / "t.nwk"
    src.write_text(text)
    fig = tmp_path / "t.svg"
    result = run("draw", src, "-o", fig, "--highlight-below", 70)
    assert result.exit_code == 0, result.stderr
    words, low = svg_support_words(fig)
    assert {"60", "80", "95"} <= words
    assert low == ["60"]
    assert ("read as proportions" in result.stderr) is note


def test_show_proportions_as_percentages(tmp_path):
    # source: common practice (a proportion p is 100 p percent)
    src = tmp_path / "t.nwk"
    src.write_text(PROPORTIONS)
    result = run("show", src, "--ascii", "--width", 40)
    assert result.exit_code == 0
    for value in ("60", "80", "95"):
        assert f"-{value}-" in result.stdout
    assert "0.6" not in result.stdout and "read as proportions" in result.stderr
    src.write_text(PERCENT)  # a percent tree gets no note
    assert "proportions" not in run("show", src).stderr


def test_computed_support_in_0_1_is_not_a_proportion():
    # source: the documented rule: only support read from a file can be on a 0-1 scale; computed support
    # is a percentage (here 0.5% and 1%)
    t = Tree([5, 5, 6, 6, 7, 7, 7, -1], [1.0] * 7 + [np.nan], list("abcde"),
             support=[np.nan] * 5 + [0.5, 1.0, np.nan])
    percent, proportions = t.support_percent()
    assert not proportions and np.nanmax(percent) == 1.0


def test_report_on_proportions(tmp_path):
    # source: the median of 60, 80 and 95 (percent) is 80; one value (60) is below 70 (plain arithmetic)
    [t] = parse_newick(PROPORTIONS)
    dm = DistanceMatrix(t.leaf_names, t.patristic())
    path = tmp_path / "r.html"
    write_report(path, dm=dm, tree=t)
    body = " ".join(re.sub(r"<[^>]+>", " ", path.read_text()).split())
    assert "3 internal branches; median 80%; 1 below 70%" in body
    assert "read as proportions" in body


# ---- 9. clusters need branch lengths ----------------------------------------

@pytest.mark.parametrize("text,what", [
    ("((a,b),(c,d),e);\n", "no branch lengths"),
    ("((a:1,b)90:1,(c:1,d:1):1,e:1);\n", "taxon 'b'"),
    ("((a:1,b:1):1,(c:1,d:1),e:1);\n", "clade of 'c', 'd'"),
])
@pytest.mark.parametrize("command", ["clusters", "draw"])
def test_clusters_without_lengths_is_an_error(tmp_path, text, what, command):
    # source: common practice (a path length needs the lengths of the branches on the path; counting a
    # missing length as 0 would silently put taxa together)
    src = tmp_path / "t.nwk"
    src.write_text(text)
    out = tmp_path / ("g.tsv" if command == "clusters" else "g.svg")
    args = ["--within", 0.5] if command == "clusters" else ["--groups-within", 0.5]
    result = run(command, src, "-o", out, *args)
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and what in lines[0] and str(src) in lines[0]
    assert not out.exists()


# ---- 9. consensus threshold -------------------------------------------------

GROUPS = [["a1", "a2", "a3"], ["b1", "b2", "b3"], ["c1", "c2", "c3"], ["d1", "d2", "d3"]]
EVERYONE = frozenset(x for g in GROUPS for x in g)


def replicate_newick(rng, pairing, cherries):
    """One tree: each group of three resolved with the cherry given, the four groups paired as given."""
    def ln():
        return f":{rng.uniform(0.01, 0.5):.4f}"

    def group(g, cherry):
        x, y = cherry
        z = next(t for t in g if t not in cherry)
        return f"(({x}{ln()},{y}{ln()}){ln()},{z}{ln()})"

    parts = [group(GROUPS[i], cherries[i]) for i in range(4)]
    (p, q), (r, s) = pairing
    return f"(({parts[p]}{ln()},{parts[q]}{ln()}){ln()},{parts[r]}{ln()},{parts[s]}{ln()});\n"


def replicate_set(seed, count, first_pairing_in):
    """``count`` trees: the groups are in every tree, a1+a2 always a cherry, the other cherries random,
    and the pairing (a,b)(c,d) in exactly ``first_pairing_in`` trees."""
    rng = np.random.default_rng(seed)
    pairings = [((0, 1), (2, 3)), ((0, 2), (1, 3)), ((0, 3), (1, 2))]
    lines = []
    for k in range(count):
        pairing = pairings[0] if k < first_pairing_in else pairings[1 + int(rng.integers(2))]
        cherries = [("a1", "a2")] + [tuple(rng.choice(g, 2, replace=False)) for g in GROUPS[1:]]
        lines.append(replicate_newick(rng, pairing, cherries))
    order = rng.permutation(count)
    return "".join(lines[i] for i in order)


def splits_of_file(path, schema="newick", tns=None):
    """Nontrivial splits of every tree of a file, as DendroPy reads them, plus each split's support label."""
    trees = dendropy.TreeList.get(path=str(path), schema=schema, taxon_namespace=tns or dendropy.TaxonNamespace())
    out = []
    for tree in trees:
        found = {}
        for node in tree.preorder_internal_node_iter():
            side = frozenset(leaf.taxon.label for leaf in node.leaf_nodes())
            if 1 < len(side) < len(EVERYONE) - 1:
                found[frozenset({side, EVERYONE - side})] = node.label
        out.append(found)
    return out


@pytest.mark.parametrize("seed,count,first", [(1, 9, 5), (2, 10, 7), (3, 21, 11)])
def test_strict_consensus(tmp_path, seed, count, first):
    # reference: the plain intersection of the trees' split sets (computed here from DendroPy's reading of
    # the file), and DendroPy TreeList.consensus(min_freq=1.0): the strict consensus
    reps = tmp_path / "reps.nwk"
    reps.write_text(replicate_set(seed, count, first))
    out = tmp_path / "strict.nwk"
    result = run("consensus", reps, "-o", out, "--threshold", 100)
    assert result.exit_code == 0, result.stderr
    every = set.intersection(*(set(s) for s in splits_of_file(reps)))
    assert len(every) >= 5  # the four groups and the a1+a2 cherry, by construction
    [ours] = splits_of_file(out)
    assert set(ours) == every
    assert set(ours.values()) == {"100"}
    tns = dendropy.TaxonNamespace()
    theirs = dendropy.TreeList.get(path=str(reps), schema="newick", taxon_namespace=tns).consensus(min_freq=1.0)
    dp = {frozenset({frozenset(x.taxon.label for x in n.leaf_nodes()),
                     EVERYONE - frozenset(x.taxon.label for x in n.leaf_nodes())})
          for n in theirs.preorder_internal_node_iter() if 1 < len(n.leaf_nodes()) < len(EVERYONE) - 1}
    assert set(ours) == dp


@pytest.mark.parametrize("seed,count,first", [(4, 9, 5), (5, 21, 11), (6, 21, 10)])
def test_majority_at_the_default_equals_dendropy(tmp_path, seed, count, first):
    # reference: DendroPy TreeList.consensus(min_freq=0.5) (Margush & McMorris 1981); an odd number of
    # trees, so that no split sits at exactly one half (DendroPy keeps frequency >= min_freq)
    reps = tmp_path / "reps.nwk"
    reps.write_text(replicate_set(seed, count, first))
    out = tmp_path / "maj.nwk"
    assert run("consensus", reps, "-o", out).exit_code == 0
    [ours] = splits_of_file(out)
    tns = dendropy.TaxonNamespace()
    theirs = dendropy.TreeList.get(path=str(reps), schema="newick", taxon_namespace=tns).consensus(min_freq=0.5)
    dp = {frozenset({frozenset(x.taxon.label for x in n.leaf_nodes()),
                     EVERYONE - frozenset(x.taxon.label for x in n.leaf_nodes())})
          for n in theirs.preorder_internal_node_iter() if 1 < len(n.leaf_nodes()) < len(EVERYONE) - 1}
    assert set(ours) == dp
    # the (a,b)(c,d) pairing is in `first` of `count` trees: in the majority exactly when more than half
    ab = frozenset({frozenset(GROUPS[0] + GROUPS[1]), frozenset(GROUPS[2] + GROUPS[3])})
    assert (ab in ours) is (2 * first > count)


def test_majority_excludes_exactly_half_and_a_share_is_inclusive():
    # source: Margush & McMorris (1981): majority rule keeps splits in MORE than half of the trees; the
    # documented rule keeps a split in at least the share t of the trees for t > 0.5 (as DendroPy's
    # min_freq does). (a,b)(c,d) is in 5 of 10 trees, then in 7 of 10.
    ab = frozenset({frozenset(GROUPS[0] + GROUPS[1]), frozenset(GROUPS[2] + GROUPS[3])})

    def has_ab(text, threshold):
        con = majority_consensus(parse_newick(text), threshold)
        return ab in {split_key_from(con, v) for v in range(con.n_leaves, con.n_nodes) if con.parent[v] >= 0}

    half = replicate_set(7, 10, 5)
    seven = replicate_set(8, 10, 7)
    assert not has_ab(half, 0.5)
    assert has_ab(seven, 0.5) and has_ab(seven, 0.7) and not has_ab(seven, 0.71)
    with pytest.raises(InputError, match="threshold"):
        majority_consensus(parse_newick(seven), 1.01)


def split_key_from(tree, v):
    below = {tree.leaf_names[i] for i in range(tree.n_leaves) if _is_below(tree, i, v)}
    return frozenset({frozenset(below), EVERYONE - frozenset(below)})


def _is_below(tree, leaf, v):
    while leaf >= 0:
        if leaf == v:
            return True
        leaf = int(tree.parent[leaf])
    return False
