"""Notebook display: Tree._repr_svg_ (a small SVG picture) and DistanceMatrix._repr_html_ (a small table).

Sources: the SVG is parsed by Python's XML parser (xml.etree, an independent reader of XML 1.0; SVG 1.1 is an
XML language, W3C Recommendation 2011) and the HTML by html.parser (the HTML standard's entity rules); the
leaf positions are checked against brute-force path lengths from the root (tests/simulate.py's walk).
IPython's display protocol (``_repr_svg_``, ``_repr_html_``; returning None means "no such form") is common
practice.
"""

import xml.etree.ElementTree as ET
from html.parser import HTMLParser

import numpy as np
import pytest
from simulate import random_join_tree

import cladewright as cw

SVG = "{http://www.w3.org/2000/svg}"
NAMES = ["Homo_sapiens", "a<b", "c&d", 'say "hi"', "it's", "Müller 東京", "x>y", "plain", "t9", "t10"]


def texts(svg):
    root = ET.fromstring(svg)
    assert root.tag == SVG + "svg"
    return [(float(e.get("x")), float(e.get("y")), e.text) for e in root.iter(SVG + "text")]


def root_depths(tree):
    """Path length from the root to every leaf, walking up (brute force)."""
    out = []
    for leaf in range(tree.n_leaves):
        v, acc = leaf, 0.0
        while tree.parent[v] >= 0:
            acc += tree.length[v]
            v = tree.parent[v]
        out.append(acc)
    return np.array(out)


@pytest.mark.parametrize("rooted", [True, False])
def test_svg_parses_and_shows_every_leaf_name_once(rooted):
    tree = random_join_tree(np.random.default_rng(1), len(NAMES), rooted, names=NAMES)
    found = texts(tree._repr_svg_())
    words = [t for _, _, t in found]
    for name in NAMES:
        assert words.count(name) == 1
    # one more text: the scale bar's length, a number
    extra = [t for t in words if t not in NAMES]
    assert len(extra) == 1 and float(extra[0]) > 0


def test_leaves_sit_at_their_distance_from_the_root():
    # reference: brute-force root-to-leaf path lengths; x is linear in them, one row per leaf
    tree = random_join_tree(np.random.default_rng(2), 12, True)
    found = {t: (x, y) for x, y, t in texts(tree._repr_svg_())}
    xs = np.array([found[name][0] for name in tree.leaf_names])
    depth = root_depths(tree)
    slope, offset = np.polyfit(depth, xs, 1)
    assert slope > 0 and np.allclose(xs, slope * depth + offset, atol=0.1)  # coordinates have one decimal
    ys = sorted(found[name][1] for name in tree.leaf_names)
    assert len(set(np.round(np.diff(ys), 6))) == 1  # evenly spaced rows


def test_tree_without_lengths_has_no_scale_bar():
    # source: common practice (a scale bar needs lengths)
    tree = cw.parse_newick("((a,b),(c,d),e);")[0]
    assert sorted(t for _, _, t in texts(tree._repr_svg_())) == list("abcde")


def test_svg_of_one_leaf_and_of_a_large_tree():
    assert [t for _, _, t in texts(cw.Tree([-1], [np.nan], ["only"])._repr_svg_())] == ["only"]
    # a tree of more than 2,000 leaves is not drawn (None: the notebook shows the text form instead)
    rng = np.random.default_rng(3)
    assert random_join_tree(rng, 2001, True)._repr_svg_() is None
    big = random_join_tree(rng, 2000, True)
    assert len(texts(big._repr_svg_())) == 2001  # every name and the scale bar


def test_svg_replaces_characters_xml_forbids():
    # source: XML 1.0 (W3C), the Char production: control characters other than tab, LF and CR are not
    # allowed; they are shown as U+FFFD so that the document still parses
    tree = cw.Tree([2, 2, -1], [np.nan, np.nan, np.nan], ["bell\x07", "ok"])
    assert sorted(t for _, _, t in texts(tree._repr_svg_())) == ["bell\ufffd", "ok"]


# ---- DistanceMatrix._repr_html_ ---------------------------------------------------------------------------

class Cells(HTMLParser):
    """Header and data cells of an HTML table, entities resolved (html.parser, convert_charrefs)."""

    def __init__(self):
        super().__init__()
        self.rows, self.caption, self._where = [], "", None

    def handle_starttag(self, tag, attrs):
        if tag == "tr":
            self.rows.append([])
        if tag in ("th", "td", "caption"):
            self._where = tag
            if tag != "caption":
                self.rows[-1].append("")

    def handle_endtag(self, tag):
        self._where = None

    def handle_data(self, data):
        if self._where == "caption":
            self.caption += data
        elif self._where in ("th", "td"):
            self.rows[-1][-1] += data


def table(dm):
    p = Cells()
    p.feed(dm._repr_html_())
    return p


def test_html_table_holds_names_and_values():
    rng = np.random.default_rng(0)
    d = rng.random((5, 5))
    d = np.triu(d, 1) + np.triu(d, 1).T
    names = ["a<b", "c&d", 'q"r', "it's", "Müller"]
    p = table(cw.DistanceMatrix(names, d))
    assert p.rows[0] == [""] + names
    for i, row in enumerate(p.rows[1:]):
        assert row[0] == names[i]
        assert np.allclose([float(x) for x in row[1:]], d[i], rtol=1e-5)  # six significant digits
    assert "5 taxa" in p.caption


def test_large_matrix_is_cut_with_a_note():
    n = 45
    dm = cw.DistanceMatrix([f"s{i}" for i in range(n)], np.ones((n, n)) - np.eye(n))
    p = table(dm)
    assert len(p.rows) == 21 and all(len(r) == 21 for r in p.rows)
    assert "45 taxa" in p.caption and "first 20" in p.caption
