"""Newick written for other software: names read back exactly by ete3, Bio.Phylo, DendroPy and scikit-bio.

Sources. The quoting rules: Newick format, the trade's de facto standard (1986 informal specification: single
quotes, a doubled quote inside, an unquoted '_' read as a blank); that most readers today keep an unquoted
'_' as an underscore is common practice, checked here against each reader. The readers, each an independent
implementation used as a reference:

- ete3 3.1, its default reader ``ete3.Tree(text, format=1)`` (format 1: internal node names), which does not
  take quotes off a name, and ``quoted_node_names=True``, which does;
- Bio.Phylo (Biopython) ``Phylo.read(StringIO(text), "newick")``;
- DendroPy ``Tree.get(schema="newick", preserve_underscores=True)`` (its default follows the strict rule);
- scikit-bio ``TreeNode.read``, whose default (``convert_underscores=True``) follows the strict rule and
  ``convert_underscores=False`` keeps underscores.

The known limits of the references are named where a name is left out of one reader's check.
"""

import io
import warnings

import dendropy
import numpy as np
import pytest
import skbio
from Bio import Phylo

from cladewright import Tree, parse_newick
from cladewright.errors import InputError

with warnings.catch_warnings():
    warnings.simplefilter("ignore", DeprecationWarning)  # ete3 3.1 imports the deprecated cgi module
    import ete3

#: Names that need no quotes but for the strict underscore rule: underscores, digits, dots, hyphens.
PLAIN = ["Homo_sapiens", "Pan_troglodytes_verus", "x1_2.3-4", "sp._nov-2", "a__b", "_", "_lead", "trail_",
         "9_1", "plain", "E.coli-K12"]
#: Names that must stay quoted in both modes: blanks, quotes, Newick punctuation, non-ASCII.
QUOTED = ["Homo sapiens", "it's", "o'brien_2", "a(b)", "co:lon", "com,ma", "semi;colon", "br[a]ck",
          "Müller_1", "Ørsted", "東京", "two  blanks", "under_score and blank"]
ALL = PLAIN + QUOTED


def star(names, labelled=None):
    """A tree over ``names``: the first two joined under an internal node (labelled ``labelled`` when given),
    the rest hanging from the root; leaf i has length (i + 1) / 8 (exact in binary)."""
    n = len(names)
    parent = [n] * 2 + [n + 1] * (n - 2) + [n + 1, -1]
    length = [(i + 1) / 8 for i in range(n)] + [0.5, np.nan]
    labels = [None] * n + [labelled, None]
    return Tree(parent, length, names, labels=labels)


def leaf_pairs(tree):
    """{name: length} of our tree's leaves."""
    return {tree.leaf_names[i]: float(tree.length[i]) for i in range(tree.n_leaves)}


# ---- the readers, each returning {leaf name: branch length} -----------------------------------------

def read_ete3(text, quoted=False):
    return {x.name: x.dist for x in ete3.Tree(text, format=1, quoted_node_names=quoted).get_leaves()}


def read_biophylo(text):
    return {c.name: c.branch_length for c in Phylo.read(io.StringIO(text), "newick").get_terminals()}


def read_dendropy(text, preserve=True):
    tree = dendropy.Tree.get(data=text, schema="newick", preserve_underscores=preserve)
    return {x.taxon.label: x.edge.length for x in tree.leaf_node_iter()}


def read_skbio(text, convert=True):
    return {x.name: x.length for x in skbio.TreeNode.read(io.StringIO(text), convert_underscores=convert).tips()}


# ---- the writer ------------------------------------------------------------------------------------------

def test_plain_writes_underscore_names_bare_and_strict_quotes_them():
    # source: the two quoting rules (module docstring); a name with only '_' to quote is bare in "plain"
    t = star(PLAIN)
    plain, strict = t.to_newick(), t.to_newick(quoting="strict")
    assert plain == t.to_newick(quoting="plain")
    for name in PLAIN:
        assert f"{name}:" in plain and f"'{name}'" not in plain
        assert (f"'{name}':" in strict) == ("_" in name)
    assert "'" not in plain


@pytest.mark.parametrize("quoting", ["plain", "strict"])
def test_names_with_blanks_or_punctuation_stay_quoted(quoting):
    # source: Newick 1986 informal specification (blanks and punctuation need quotes, a quote is doubled);
    # non-ASCII is quoted for portability (common practice)
    text = star(QUOTED).to_newick(quoting=quoting)
    for name in QUOTED:
        assert "'" + name.replace("'", "''") + "':" in text


@pytest.mark.parametrize("quoting", ["plain", "strict"])
def test_our_reader_reads_both_back_exactly(quoting):
    # source: the round trip; the reader keeps an unquoted '_' (common practice, module docstring)
    t = star(ALL, labelled="clade_one")
    [back] = parse_newick(t.to_newick(quoting=quoting))
    assert leaf_pairs(back) == leaf_pairs(t)
    assert [x for x in back.labels if x] == ["clade_one"]


def test_unknown_quoting_is_refused():
    with pytest.raises(InputError, match="quoting='loose'.*'plain'.*'strict'"):
        star(PLAIN).to_newick(quoting="loose")


# ---- plain mode: every reader that keeps underscores gets every name -----------------------------------

def test_plain_underscore_names_read_exactly_by_every_reader():
    t = star(PLAIN, labelled="clade_one")
    text = t.to_newick()
    want = leaf_pairs(t)
    # reference: ete3's default reader (format=1), which keeps quotes as part of a name, so only bare
    # names come back exactly: the reason for the plain default
    assert read_ete3(text) == want
    assert [x.name for x in ete3.Tree(text, format=1).traverse() if x.children and x.name] == ["clade_one"]
    # reference: Bio.Phylo's Newick reader
    assert read_biophylo(text) == want
    assert [c.name for c in Phylo.read(io.StringIO(text), "newick").get_nonterminals() if c.name] == ["clade_one"]
    # reference: DendroPy with preserve_underscores=True
    assert read_dendropy(text) == want
    # reference: scikit-bio with convert_underscores=False
    assert read_skbio(text, convert=False) == want


def test_readers_of_the_strict_rule_take_strict_output():
    # reference: scikit-bio's and DendroPy's default readers turn an unquoted '_' into a blank (the 1986
    # rule), so plain output changes these names for them; strict output reads back exactly
    t = star(PLAIN)
    want = leaf_pairs(t)
    assert read_skbio(t.to_newick()) != want
    assert read_skbio(t.to_newick(quoting="strict")) == want
    assert read_dendropy(t.to_newick(), preserve=False) != want
    assert read_dendropy(t.to_newick(quoting="strict"), preserve=False) == want
    # reference: ete3's default reader keeps the quotes of strict output as part of the name
    assert set(read_ete3(t.to_newick(quoting="strict"))) == {f"'{x}'" if "_" in x else x for x in PLAIN}


# ---- every name, both modes: the readers that honour quotes ------------------------------------------

@pytest.mark.parametrize("quoting", ["plain", "strict"])
def test_every_name_read_exactly_by_readers_that_honour_quotes(quoting):
    t = star(ALL)
    text = t.to_newick(quoting=quoting)
    want = leaf_pairs(t)
    # reference: Bio.Phylo (1.85 and later read doubled quotes inside a name)
    assert read_biophylo(text) == want
    # reference: DendroPy, preserve_underscores=True; in strict mode its default reader too
    assert read_dendropy(text) == want
    if quoting == "strict":
        assert read_dendropy(text, preserve=False) == want
    # reference: scikit-bio, convert_underscores=False; in strict mode its default reader too
    assert read_skbio(text, convert=False) == want
    if quoting == "strict":
        assert read_skbio(text) == want
    # reference: ete3 with quoted_node_names=True. ete3 3.1 fails on a doubled quote inside a quoted
    # name, so names holding "'" are left out of this check.
    no_quote = [x for x in ALL if "'" not in x]
    u = star(no_quote)
    assert read_ete3(u.to_newick(quoting=quoting), quoted=True) == leaf_pairs(u)
