"""A small, self-contained SVG picture of a tree: the body of
:meth:`cladewright.tree.Tree._repr_svg_`, which notebooks call on every
display.

Written as text, without matplotlib, so that it is quick: a rectangular
layout (each node a vertical line joining its children, each branch a
horizontal line as long as its length), the leaf names, and a scale bar when
the tree has branch lengths. A tree without lengths is drawn with every
branch one step long. :func:`cladewright.render_tree` makes the full figure.

References
----------
Scalable Vector Graphics (SVG) 1.1, W3C Recommendation (2011); XML 1.0, W3C
Recommendation (the characters a document may hold).
"""

from __future__ import annotations

import math
import re
from html import escape

import numpy as np

from ..io.newick_writer import TreeLike

__all__ = ["tree_svg", "NOTEBOOK_MAX_LEAVES"]

#: Trees with more leaves than this are not drawn for a notebook (the picture
#: would be too tall to read and slow to show); their text form is shown.
NOTEBOOK_MAX_LEAVES = 2000

# Characters XML 1.0 does not allow in a document, shown as U+FFFD.
_NOT_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")


def _text(s: str) -> str:
    return escape(_NOT_XML.sub("\ufffd", s), quote=False)


def _scale_bar(span: float) -> float:
    """A round length (1, 2 or 5 times a power of ten) near a fifth of ``span``."""
    target = span / 5.0
    step = 10.0 ** math.floor(math.log10(target))
    return max(x * step for x in (1.0, 2.0, 5.0) if x * step <= target)


def tree_svg(tree: TreeLike, width: int = 480, row: int = 16, font_size: int = 11,
             max_leaves: int | None = None) -> str | None:
    """The tree drawn as SVG text.

    Parameters
    ----------
    tree : Tree
    width : int
        Width of the drawing of the branches, in pixels (the names are
        added to its right).
    row : int
        Height of one leaf's row, in pixels.
    font_size : int
        Size of the names, in pixels.
    max_leaves : int, optional
        Return None for a tree with more leaves than this.

    Returns
    -------
    str or None
        An ``<svg>`` element, names XML-escaped.

    References
    ----------
    Scalable Vector Graphics (SVG) 1.1, W3C Recommendation (2011).

    Examples
    --------
    >>> from cladewright import Tree
    >>> svg = tree_svg(Tree([3, 3, 3, -1], [0.1, 0.2, 0.3, float("nan")], ["a", "b<c", "d"]))
    >>> svg.startswith("<svg") and "b&lt;c" in svg
    True
    """
    n, m = tree.n_leaves, tree.n_nodes
    if max_leaves is not None and n > max_leaves:
        return None
    parent = np.asarray(tree.parent).tolist()
    root = tree.root
    length = np.array(tree.length, dtype=np.float64)
    length[root] = np.nan
    scaled = bool(np.any(np.isfinite(length)))
    step = np.nan_to_num(length, nan=0.0) if scaled else np.ones(m)
    pre = np.asarray(tree.preorder()).tolist()
    depth = [0.0] * m
    st = step.tolist()
    for v in pre[1:]:
        depth[v] = depth[parent[v]] + st[v]
    y = [0.0] * m
    lo, hi = [math.inf] * m, [-math.inf] * m
    k = 0
    for v in pre:  # leaves in preorder: top to bottom
        if v < n:
            y[v] = k
            k += 1
    for v in np.asarray(tree.postorder()).tolist():
        if v >= n:
            y[v] = (lo[v] + hi[v]) / 2.0
        p = parent[v]
        if p >= 0:
            lo[p], hi[p] = min(lo[p], y[v]), max(hi[p], y[v])
    left, right = min(depth), max(depth)
    span = right - left
    unit = width / span if span > 0 else 0.0
    pad = 8.0

    def X(v: float) -> str:
        return f"{pad + (v - left) * unit:.1f}"

    def Y(v: float) -> str:
        return f"{pad + (v + 0.5) * row:.1f}"

    d = []
    for v in pre:
        if v != root:
            d.append(f"M{X(depth[parent[v]])},{Y(y[v])}H{X(depth[v])}")
        if v >= n:
            d.append(f"M{X(depth[v])},{Y(lo[v])}V{Y(hi[v])}")
    names = tree.leaf_names
    longest = max(len(x) for x in names)
    total_w = int(pad * 2 + width + 6 + longest * font_size * 0.62)
    total_h = pad * 2 + n * row + (2 * row if scaled else 0)
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{total_w}" height="{total_h:.0f}" '
           f'viewBox="0 0 {total_w} {total_h:.0f}" font-family="sans-serif" font-size="{font_size}">',
           f'<path d="{"".join(d)}" fill="none" stroke="black" stroke-width="1"/>']
    for v in range(n):
        out.append(f'<text x="{float(X(depth[v])) + 4:.1f}" y="{Y(y[v])}" dy="0.35em">{_text(names[v])}</text>')
    if scaled and span > 0:
        bar = _scale_bar(span)
        yb = pad + (n + 1) * row
        out.append(f'<path d="M{pad:.1f},{yb:.1f}h{bar * unit:.1f}" fill="none" stroke="black" stroke-width="1"/>')
        out.append(f'<text x="{pad + bar * unit + 4:.1f}" y="{yb:.1f}" dy="0.35em">{bar:g}</text>')
    out.append("</svg>")
    return "\n".join(out)
