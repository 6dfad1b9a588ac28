"""Tree figures and the text drawing.

Files are checked against their open standards: SVG parsed as XML (W3C SVG
1.1; every taxon name present as a text element), PNG by its signature
(RFC 2083) and read back with matplotlib.image.imread, PDF by its header and
end-of-file marker (ISO 32000-1). Label placement is checked with matplotlib's own geometry (the Agg
renderer's text extents, Path.intersects_path); leaf colours against the eight colours of Okabe & Ito (2008),
Color Universal Design.
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
    assert len(lines) == tree.n_leaves + 2  # one line per leaf, the scale bar and the note: the tree is unrooted
    for name in tree.leaf_names:
        assert sum(line.endswith(" " + name) for line in lines) == 1
    for value in ("95", "60", "40"):
        assert value in plain and value in box
    assert all(ord(c) < 128 for c in plain)
    assert any(0x2500 <= ord(c) <= 0x257F for c in box)
    assert " 0.05 branch length" in lines[-2] and lines[-1] == "unrooted tree: drawn from an arbitrary node"


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


# ---- issue 15: labels off lines, units, size, circular layout, colours by a table ------------------------

#: The eight colours of Okabe & Ito (2008), Color Universal Design (J*FLY), as RGB hex, by their names there.
OKABE_ITO_2008 = {"black": "#000000", "orange": "#e69f00", "sky blue": "#56b4e9", "bluish green": "#009e73",
                  "yellow": "#f0e442", "blue": "#0072b2", "vermillion": "#d55e00", "reddish purple": "#cc79a7"}


def hex_of(colour):
    import matplotlib.colors

    return matplotlib.colors.to_hex(colour, keep_alpha=False)


def figure_parts(fig):
    """The figure's support labels (Text), branch and leader segments (display pixels) and their half widths,
    read back from matplotlib's own artists."""
    renderer = fig.canvas.get_renderer()
    ax = fig.axes[0]
    labels = [t for t in ax.texts if (t.get_gid() or "").startswith("support-")]
    segments = []
    for coll in ax.collections:
        if coll.get_gid() in ("branches", "leaders"):
            half = coll.get_linewidths()[0] * fig.dpi / 72.0 / 2.0
            for line in coll.get_segments():
                pts = ax.transData.transform(line)
                segments += [(pts[k:k + 2], half) for k in range(len(pts) - 1)]
    return renderer, labels, segments


def label_outline(text, renderer):
    """The closed outline of a label's box in display pixels: its unturned extent (matplotlib's text layout)
    turned by its rotation about its anchor, which is the box's centre (the labels are set ha/va="center")."""
    import matplotlib.path

    angle = text.get_rotation()
    text.set_rotation(0)
    box = text.get_window_extent(renderer)
    text.set_rotation(angle)
    cx, cy = text.get_transform().transform(text.get_position())
    a, b = box.width / 2, box.height / 2
    t = np.radians(angle)
    c, s = np.cos(t), np.sin(t)
    corners = [(cx + i * a * c - j * b * s, cy + i * a * s + j * b * c) for i, j in ((-1, -1), (1, -1), (1, 1),
                                                                                    (-1, 1), (-1, -1))]
    return matplotlib.path.Path(corners, closed=True)


def crossings(fig):
    """Pairs (label, segment) whose shapes meet, tested with matplotlib.path.Path.intersects_path (matplotlib's
    own geometry); each segment is widened to its drawn line width."""
    import matplotlib.path

    renderer, labels, segments = figure_parts(fig)
    hits = []
    for text in labels:
        outline = label_outline(text, renderer)
        lo, hi = outline.vertices.min(axis=0), outline.vertices.max(axis=0)
        for pts, half in segments:
            if (pts[:, 0].max() + half < lo[0] or pts[:, 0].min() - half > hi[0]
                    or pts[:, 1].max() + half < lo[1] or pts[:, 1].min() - half > hi[1]):
                continue
            d = pts[1] - pts[0]
            norm = np.hypot(*d)
            n = np.array([-d[1], d[0]]) / norm * half if norm > 0 else np.array([0.0, half])
            u = d / norm * half if norm > 0 else np.array([half, 0.0])
            band = matplotlib.path.Path([pts[0] - u + n, pts[1] + u + n, pts[1] + u - n, pts[0] - u - n,
                                         pts[0] - u + n], closed=True)
            if outline.intersects_path(band, filled=True):
                hits.append((text.get_text(), text.get_gid()))
    return labels, hits


def short_branch_tree(rng, n=90):
    """Many short internal branches (0.0005-0.004) beside a few long ones, a polytomy, support everywhere."""
    tree = random_join_tree(rng, n, False, names=[f"T{i:03d}" for i in range(n)], shortest=0.0005, longest=0.004)
    text = tree.to_newick(support_digits=0).strip().rstrip(";")
    extra = "(long_a:0.2,(p1:0.001,p2:0.001,p3:0.002,p4:0.001)77:0.0004)12:0.0003"
    return parse_newick(f"({text[1:-1]},{extra});")[0]


@pytest.mark.parametrize("layout", ["rectangular", "circular"])
def test_support_labels_never_sit_on_a_line(layout):
    # source: matplotlib's own geometry (Text extents from the Agg renderer, Path.intersects_path on the
    # branch and leader segments widened to their line width); the rule itself is common practice
    from cladewright.draw import tree_figure

    rng = np.random.default_rng(15)
    tree = short_branch_tree(rng)
    fig = tree_figure(tree, highlight_below=70, layout=layout)
    labels, hits = crossings(fig)
    internal = sum(1 for v in range(tree.n_leaves, tree.n_nodes) if v != tree.root)
    assert len(labels) >= internal - 1  # every branch's support is shown (one root split may be merged)
    assert hits == []


def test_the_crossing_check_catches_a_label_on_a_line():
    # the check itself (matplotlib's geometry): a label moved onto the middle of a branch is caught
    from cladewright.draw import tree_figure

    fig = tree_figure(parse_newick(SMALL)[0])
    _, labels, segments = figure_parts(fig)
    pts = max((pts for pts, _ in segments), key=lambda p: np.hypot(*(p[1] - p[0])))
    labels[0].set_position(fig.axes[0].transData.inverted().transform(pts.mean(axis=0)))
    assert crossings(fig)[1]


def test_long_branches_keep_their_label_above_the_branch_left_of_the_node():
    # source: common practice (support above its branch, just left of the node) checked with matplotlib's
    # text extents: the label's box lies above the branch's line and ends left of the node
    from cladewright.draw import tree_figure

    tree = parse_newick("((a:1,b:1)88:1,(c:1,d:1)64:1,e:1);")[0]
    fig = tree_figure(tree)
    renderer, labels, segments = figure_parts(fig)
    for text in labels:
        box = text.get_window_extent(renderer)
        node = int(text.get_gid().split("-")[1])
        branch = [pts for pts, _ in segments if abs(pts[0, 1] - pts[1, 1]) < 1e-9 and pts[0, 0] < pts[1, 0]]
        above = [pts for pts in branch if pts[0, 0] <= box.x0 and box.x1 <= pts[1, 0] and box.y0 > pts[0, 1]
                 and box.y0 - pts[0, 1] < box.height]
        assert above, (node, text.get_text())


def test_scale_bar_names_the_unit(tmp_path):
    # source: the distances' units (Jukes & Cantor 1969: p is a proportion of sites; the corrected distances
    # estimate substitutions per site); a matrix read from a file is in its own units (common practice)
    from cladewright.draw import scale_unit

    assert scale_unit("p") == scale_unit("protein-p") == "p-distance"
    assert scale_unit("k2p") == scale_unit("tn93") == scale_unit("lg") == "substitutions per site"
    assert scale_unit("matrix") == "distance units"
    assert scale_unit(None) == "branch length"
    with pytest.raises(InputError, match="no unit"):
        scale_unit("no-such-model")
    tree = parse_newick(SMALL)[0]
    for unit, expected in ((None, "branch length"), ("p-distance", "p-distance"),
                           ("substitutions per site", "substitutions per site")):
        render_tree(tree, tmp_path / "u.svg", unit=unit)
        _, texts = svg_texts(tmp_path / "u.svg")
        bars = [t for t, _ in texts if t.endswith(expected) and t.split()[0].replace(".", "").isdigit()]
        assert len(bars) == 1, texts
    assert " 0.05 p-distance" in text_tree(tree, width=40, unit="p-distance").splitlines()[-2]


def test_figure_size_is_the_svg_size(tmp_path):
    # source: W3C SVG 1.1 (width and height attributes of the root svg element); 72 points to the inch
    tree = parse_newick(SMALL)[0]
    for layout, (w, h) in (("rectangular", (6.5, 4.0)), ("circular", (7.0, 7.5))):
        render_tree(tree, tmp_path / "s.svg", size=(w, h), layout=layout)
        root = ET.parse(tmp_path / "s.svg").getroot()
        assert float(root.get("width").removesuffix("pt")) == pytest.approx(72 * w)
        assert float(root.get("height").removesuffix("pt")) == pytest.approx(72 * h)
    big = random_tree(np.random.default_rng(2), 200)
    with pytest.raises(InputError, match=r"too small for 200 taxa.*give at least"):
        render_tree(big, tmp_path / "x.svg", size=(3, 3))
    with pytest.raises(InputError, match="not a figure size"):
        render_tree(tree, tmp_path / "x.svg", size=(0, 3))
    assert not (tmp_path / "x.svg").exists()


def test_circular_layout_draws_every_leaf_once(tmp_path):
    # source: W3C SVG 1.1 text elements; a circular phylogram shows each taxon once (common practice)
    rng = np.random.default_rng(8)
    tree = random_tree(rng, 40)
    render_tree(tree, tmp_path / "c.svg", layout="circular", highlight_below=50)
    _, texts = svg_texts(tmp_path / "c.svg")
    words = [t for t, _ in texts]
    for name in tree.leaf_names:
        assert words.count(name) == 1
    with pytest.raises(InputError, match="rectangular, circular"):
        render_tree(tree, tmp_path / "c.svg", layout="radial")


def tip_colours(fig):
    """Each leaf's name colour and the colour and shape of the tip mark at the same place, by taxon name."""
    ax = fig.axes[0]
    names = {t.get_text(): t for t in ax.texts if (t.get_gid() or "").startswith("name-")}
    marks = {}
    for coll in ax.collections:
        if (coll.get_gid() or "").startswith("tips-"):
            shape = coll.get_gid().split("-")[1]
            for xy, face in zip(coll.get_offsets(), coll.get_facecolors()):
                marks[round(float(xy[1]), 6)] = (hex_of(face), shape)
    out = {}
    for name, text in names.items():
        x, y = text.get_position()
        out[name] = (hex_of(text.get_color()), marks[round(float(y), 6)])
    return out


def test_leaves_take_the_colour_of_their_category():
    # source: Okabe & Ito (2008) for the colour values; categories take the palette in the documented order
    # (blue, orange, bluish green, ...) sorted by name; leaves not in the table are grey; legend entries
    # count the leaves (common practice)
    from cladewright.draw import tree_figure

    tree = parse_newick("((a:1,b:1):1,(c:1,d:1):1,(e:1,f:1):1);")[0]
    groups = {"a": "fish", "b": "bird", "c": "bird", "e": "moss", "zz": "fish"}
    fig = tree_figure(tree, groups=groups, group_title="host")
    seen = tip_colours(fig)
    expected = {"bird": OKABE_ITO_2008["blue"], "fish": OKABE_ITO_2008["orange"],
                "moss": OKABE_ITO_2008["bluish green"]}
    for name in "abce":  # the name and the tip mark (a circle) in the category's colour
        assert seen[name] == (expected[groups[name]], (expected[groups[name]], "o"))
    grey = {seen["d"][0], seen["f"][0], seen["d"][1][0], seen["f"][1][0]}
    assert len(grey) == 1
    shade = grey.pop()
    r, g, b = (int(shade[k:k + 2], 16) for k in (1, 3, 5))
    assert r == g == b and shade not in OKABE_ITO_2008.values()  # a neutral grey, none of the eight colours
    legend = fig.axes[0].get_legend()
    assert [t.get_text() for t in legend.get_texts()] == ["bird (2)", "fish (1)", "moss (1)", "not in table (2)"]
    assert legend.get_title().get_text() == "host"


def test_past_eight_categories_the_shapes_tell_them_apart():
    # source: Okabe & Ito (2008) give eight colours; past eight, a second mark shape (our documented choice)
    from cladewright.draw import tree_figure

    names = [f"t{i:02d}" for i in range(10)]
    tree = parse_newick("(" + ",".join(f"{x}:1" for x in names) + ");")[0]
    groups = {x: f"kind {i + 1}" for i, x in enumerate(names)}  # 10 categories, sorted kind 1, 2, ..., 10
    fig = tree_figure(tree, groups=groups)
    seen = tip_colours(fig)
    assert seen["t08"][1] == (OKABE_ITO_2008["blue"], "s") and seen["t00"][1] == (OKABE_ITO_2008["blue"], "o")
    words = [t.get_text() for t in fig.axes[0].texts]
    assert any("10 categories" in w for w in words)
    many = {x: str(i) for i, x in enumerate(f"n{i}" for i in range(40))}
    wide = parse_newick("(" + ",".join(f"{x}:1" for x in many) + ");")[0]
    with pytest.raises(InputError, match="40 categories.*at most 32"):
        tree_figure(wide, groups=many)
    with pytest.raises(InputError, match="none of the tree's taxa"):
        tree_figure(tree, groups={"nobody": "x"})


def test_support_labels_keep_the_tree_files_digits():
    # source: the tree file itself (Newick text): a value written 95.0 is drawn 95.0; proportions read on a
    # 0-1 scale are drawn as percentages with the file's digits (0.9987 -> 99.87)
    from cladewright.draw import tree_figure

    for newick, expected in (("((a:1,b:1)95.0:1,(c:1,d:1)60:1,e:1);", {"95.0", "60"}),
                             ("((a:1,b:1)0.9987:1,(c:1,d:1)0.5:1,e:1);", {"99.87", "50"})):
        tree = parse_newick(newick)[0]
        fig = tree_figure(tree)
        shown = {t.get_text() for t in fig.axes[0].texts if (t.get_gid() or "").startswith("support-")}
        assert shown == expected
        drawing = text_tree(tree, width=40)
        assert all(value in drawing for value in expected)


def test_show_notes_an_unrooted_tree_as_draw_does(tmp_path):
    # source: common practice (a drawing of an unrooted tree says its root is arbitrary); the figure's note
    # (SVG text) and the text drawing's last line carry the same words
    tree = parse_newick(SMALL)[0]
    rooted = Tree(tree.parent, tree.length, tree.leaf_names, support=tree.support, rooted=True)
    note = "unrooted tree: drawn from an arbitrary node"
    assert text_tree(tree, width=30).splitlines()[-1] == note
    assert note not in text_tree(rooted, width=30)
    render_tree(tree, tmp_path / "u.svg")
    assert note in [t for t, _ in svg_texts(tmp_path / "u.svg")[1]]


def test_draw_command_colours_by_a_leaf_table(tmp_path):
    # source: W3C SVG 1.1 (text elements and their fill colour), Okabe & Ito (2008) for the colours,
    # IANA text/tab-separated-values for the table
    from click.testing import CliRunner

    from cladewright.cli import main

    src = tmp_path / "t.nwk"
    src.write_text("((a:0.1,b:0.2)95:0.05,(c:0.3,d:0.1)40:0.02,e:0.4);\n")
    table = tmp_path / "taxa.tsv"
    table.write_text("taxon\thost\tyear\na\tbird\t2001\nb\tfish\t2002\nq\tfish\t2003\n")
    fig = tmp_path / "t.svg"
    result = CliRunner().invoke(main, ["draw", str(src), "-o", str(fig), "--leaf-table", str(table), "--colour-by",
                                       "host", "--size", "6x4", "--layout", "circular", "--unit", "p-distance"])
    assert result.exit_code == 0, result.output
    root, texts = svg_texts(fig)
    assert root.get("width") == "432pt" and root.get("height") == "288pt"
    styles = dict(texts)
    assert OKABE_ITO_2008["blue"] in styles["a"].lower() and OKABE_ITO_2008["orange"] in styles["b"].lower()
    words = [t for t, _ in texts]
    assert {"bird (1)", "fish (1)", "not in table (3)", "host"} <= set(words)
    assert any(w.endswith("p-distance") for w in words)
    assert "1 taxon of" in result.output and "3 taxa with no value" in result.output
    bad = CliRunner().invoke(main, ["draw", str(src), "-o", str(fig), "--leaf-table", str(table), "--colour-by",
                                    "colour"])
    assert bad.exit_code == 2 and "the columns are 'host', 'year'" in bad.output
    alone = CliRunner().invoke(main, ["draw", str(src), "-o", str(fig), "--colour-by", "host"])
    assert alone.exit_code == 2 and "together" in alone.output
    shown = CliRunner().invoke(main, ["show", str(src), "--unit", "p-distance", "--root", "midpoint"])
    assert shown.exit_code == 0 and "p-distance" in shown.output and "unrooted" not in shown.output
