"""Tree figures and the text drawing.

Files are checked against their open standards: SVG parsed as XML (W3C SVG
1.1; every taxon name present as a text element), PNG by its signature
(RFC 2083) and read back with matplotlib.image.imread, PDF by its header and
end-of-file marker (ISO 32000-1).
"""

import os
import xml.etree.ElementTree as ET

import matplotlib.image
import numpy as np
import pytest

from cladewright.draw import LOW, render_tree
from cladewright.errors import InputError
from cladewright.io.readers import parse_newick
from cladewright.textdraw import text_tree
from cladewright.tree import Tree

from simulate import random_join_tree

SVG = "{http://www.w3.org/2000/svg}"


def random_tree(rng, n):
    """A random unrooted binary tree with short lengths and support, leaves Taxon_000_x, Taxon_001_x, ..."""
    return random_join_tree(rng, n, False, names=[f"Taxon_{i:03d}_x" for i in range(n)], shortest=0.001,
                            longest=0.1, shuffle=False)


def svg_texts(path):
    root = ET.parse(path).getroot()
    assert root.tag == SVG + "svg"
    return root, [("".join(el.itertext()), el.get("style", "")) for el in root.iter(SVG + "text")]


SMALL = "((a:0.1,b:0.2)95:0.05,(c:0.3,(d:0.1,'e & <f>':0.1)40:0.02)60:0.1,g:0.4);"


def test_svg_has_every_label_and_support_as_text(tmp_path):
    # source: W3C SVG 1.1 (text elements), parsed with xml.etree
    tree = parse_newick(SMALL)[0]
    out = tmp_path / "t.svg"
    assert render_tree(tree, out, highlight_below=50, title="Five taxa") == "svg"
    _, texts = svg_texts(out)
    words = [t for t, _ in texts]
    for name in tree.leaf_names:
        assert name in words
    for value in ("95", "60", "40", "Five taxa"):
        assert value in words
    # the value below the threshold, and only it, is drawn in the highlight colour
    low = [t for t, style in texts if LOW in style and t.isdigit()]
    assert low == ["40"]


def test_png_and_pdf(tmp_path):
    # source: PNG signature (RFC 2083); PDF header and %%EOF marker (ISO 32000-1)
    tree = parse_newick(SMALL)[0]
    png, pdf = tmp_path / "t.png", tmp_path / "t.PDF"
    render_tree(tree, png)
    render_tree(tree, pdf, ladderize=False)
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    image = matplotlib.image.imread(png)
    assert image.ndim == 3 and image.shape[2] in (3, 4) and image.shape[0] > 100
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF-") and data.rstrip().endswith(b"%%EOF")


def test_size_follows_the_number_of_leaves(tmp_path):
    # source: W3C SVG 1.1 (width/height attributes); readability from 5 to 500 leaves
    rng = np.random.default_rng(3)
    small, big = random_tree(rng, 5), random_tree(rng, 500)
    render_tree(small, tmp_path / "s.svg")
    render_tree(big, tmp_path / "b.svg", highlight_below=70)
    root_s, texts_s = svg_texts(tmp_path / "s.svg")
    root_b, texts_b = svg_texts(tmp_path / "b.svg")
    words = {t for t, _ in texts_b}
    assert all(name in words for name in big.leaf_names)

    def height(root):
        return float(root.get("height").rstrip("pt"))

    def label_size(texts, name):
        style = next(s for t, s in texts if t == name)
        return float(style.split("font-size:")[1].split("px")[0])

    assert height(root_b) > 10 * height(root_s)
    assert label_size(texts_b, big.leaf_names[0]) < label_size(texts_s, small.leaf_names[0])
    assert label_size(texts_b, big.leaf_names[0]) >= 4.5


def test_bad_suffix_leaves_existing_file_alone(tmp_path):
    # source: common practice (atomic output: a failure never spoils an existing file)
    tree = parse_newick(SMALL)[0]
    out = tmp_path / "t.jpeg"
    out.write_bytes(b"keep")
    with pytest.raises(InputError, match=r"\.svg, \.png or \.pdf"):
        render_tree(tree, out)
    assert out.read_bytes() == b"keep"
    assert os.listdir(tmp_path) == ["t.jpeg"]


def test_cladogram_without_lengths(tmp_path):
    # source: W3C SVG 1.1 text; a tree without lengths is drawn as a cladogram (common practice)
    tree = parse_newick("((a,b)90,(c,d),e);")[0]
    render_tree(tree, tmp_path / "c.svg")
    _, texts = svg_texts(tmp_path / "c.svg")
    words = " ".join(t for t, _ in texts)
    assert "cladogram" in words and "substitutions per site" not in words


def test_text_drawing():
    # source: Unicode box drawing block U+2500..U+257F; ASCII fallback uses only printable ASCII
    tree = parse_newick(SMALL)[0]
    box = text_tree(tree, width=40)
    plain = text_tree(tree, width=40, ascii=True)
    lines = plain.splitlines()
    assert len(lines) == tree.n_leaves + 1  # one line per leaf and the scale bar
    for name in tree.leaf_names:
        assert sum(line.endswith(" " + name) for line in lines) == 1
    for value in ("95", "60", "40"):
        assert value in plain and value in box
    assert all(ord(c) < 128 for c in plain)
    assert any(0x2500 <= ord(c) <= 0x257F for c in box)
    assert "substitutions per site" in lines[-1]


def test_text_drawing_of_a_deep_caterpillar():
    # source: common practice (iterative: a 3,000-leaf caterpillar draws without recursion)
    n = 3000
    parent = np.empty(2 * n - 1, dtype=np.int64)
    parent[0] = parent[1] = n
    parent[2:n] = np.arange(n + 1, 2 * n - 1)
    parent[n:2 * n - 2] = np.arange(n + 1, 2 * n - 1)
    parent[2 * n - 2] = -1
    t = Tree(parent, np.append(np.full(2 * n - 2, 0.01), np.nan), [f"l{i}" for i in range(n)], rooted=True)
    text = text_tree(t, width=60, ascii=True)
    assert len(text.splitlines()) == n + 1
