"""A tree drawn in text for the terminal, with support values.

One line per leaf. Horizontal runs are branches, to scale; an internal branch
too short to hold its support value is stretched to fit it (the drawing says
so under the scale line). Box-drawing characters by default, plain ASCII on
request. Everything is iterative, so very deep trees draw too.

Also the child ordering shared with :mod:`cladewright.draw`: ladderized
(smaller clades above larger ones) or as stored.
"""

from __future__ import annotations

import math
import shutil
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import NDArray

if TYPE_CHECKING:
    from .tree import Tree

__all__ = ["text_tree", "child_lists", "tree_layout", "nice_length", "support_labels", "UNROOTED_NOTE",
           "DEFAULT_UNIT"]

#: The note under a drawing of an unrooted tree (the figure and the text drawing say the same).
UNROOTED_NOTE = "unrooted tree: drawn from an arbitrary node"
#: The scale bar's unit when none is given: a tree file does not say what its branch lengths measure.
DEFAULT_UNIT = "branch length"

_BOX = {"h": "─", "v": "│", "first": "┌", "last": "└", "mid": "├", "node": "┤",
        "node_first": "┬", "node_last": "┴", "node_mid": "┼", "root": "─"}
_ASCII = {"h": "-", "v": "|", "first": "+", "last": "+", "mid": "+", "node": "+",
          "node_first": "+", "node_last": "+", "node_mid": "+", "root": "-"}


def child_lists(tree: Tree, ladderize: bool = True) -> list[list[int]]:
    """Children of every node in drawing order.

    Parameters
    ----------
    tree : Tree
    ladderize : bool
        Order siblings by the number of leaves below them, fewest first
        (ties keep the stored order); else the stored order.

    Returns
    -------
    list of list of int, length m
    """
    kids = [tree.children(v).tolist() for v in range(tree.n_nodes)]
    if ladderize:
        count = tree.leaf_counts().tolist()
        for v in range(tree.n_leaves, tree.n_nodes):
            kids[v].sort(key=count.__getitem__)
    return kids


def tree_layout(tree: Tree, ladderize: bool = True) -> tuple[
        NDArray[np.float64], NDArray[np.float64], list[list[int]], NDArray[np.int64], bool]:
    """Coordinates for a rectangular drawing.

    Parameters
    ----------
    tree : Tree
    ladderize : bool
        See :func:`child_lists`.

    Returns
    -------
    x : float64 array (m,)
        Path length from the root (missing lengths count as 0; when no branch
        has a length, every branch counts as 1: a cladogram).
    y : float64 array (m,)
        Leaves on rows 0..n-1 from the top; an internal node halfway between
        its first and last child.
    kids : list of list of int
        Children in drawing order.
    leaf_rows : int64 array (n,)
        The leaves from top to bottom.
    has_lengths : bool
    """
    n, m = tree.n_leaves, tree.n_nodes
    kids = child_lists(tree, ladderize)
    has_lengths = bool(np.any(np.isfinite(tree.length[np.arange(m) != tree.root])))
    ln = np.nan_to_num(np.asarray(tree.length, dtype=np.float64), nan=0.0) if has_lengths else np.ones(m)
    ln = ln.tolist()
    x = [0.0] * m
    y = [0.0] * m
    order = []
    stack = [tree.root]
    while stack:
        v = stack.pop()
        order.append(v)
        for c in kids[v]:
            x[c] = x[v] + ln[c]
        stack.extend(reversed(kids[v]))
    rows = [v for v in order if v < n]
    for i, v in enumerate(rows):
        y[v] = float(i)
    for v in reversed(order):
        if v >= n and kids[v]:
            y[v] = 0.5 * (y[kids[v][0]] + y[kids[v][-1]])
    return np.array(x), np.array(y), kids, np.array(rows, dtype=np.int64), has_lengths


def nice_length(span: float) -> float:
    """A round length (1, 2 or 5 times a power of ten) near a fifth of ``span``."""
    if not span > 0 or not math.isfinite(span):
        return 0.0
    target = span / 5.0
    base = 10.0 ** math.floor(math.log10(target))
    for f in (5.0, 2.0, 1.0):
        if f * base <= target:
            return f * base
    return base


def _support_text(value: float) -> str:
    if value != value:
        return ""
    if abs(value) >= 1000:  # not a percentage; keep the label short
        return f"{value:.3g}"
    r = round(value)
    return str(int(r)) if abs(value - r) < 0.05 else f"{value:.1f}"


def _percent_from_text(text: str) -> str | None:
    """A proportion written as a plain decimal (``0.9987``) as the percentage with the
    file's digits (``99.87``); None for any other spelling (exponents, signs)."""
    whole, dot, frac = text.strip().partition(".")
    if not whole.isdigit() and not (whole == "" and frac):
        return None
    if dot and not frac.isdigit():
        return None
    digits = (whole or "0") + frac.ljust(2, "0")
    cut = len(digits) - max(len(frac) - 2, 0)
    head, tail = digits[:cut].lstrip("0") or "0", digits[cut:]
    return head + ("." + tail if tail else "")


def support_labels(tree: Tree, ladderize: bool = True) -> list[str]:
    """The support label of every node, as a drawing shows it ("" where none).

    Percentages (support read on a 0-1 scale is multiplied by 100, see
    :meth:`cladewright.tree.Tree.support_percent`). Support read from a file
    is written with the file's own digits (:attr:`cladewright.tree.Tree.support_text`):
    ``95.0`` stays ``95.0``, and a proportion ``0.9987`` becomes ``99.87``.
    The root carries no label (it is on no branch), and at a root of degree 2,
    whose two branches are one split, only the lower branch is drawn labelled.

    Parameters
    ----------
    tree : Tree
    ladderize : bool
        The drawing's child order (:func:`child_lists`), which says which
        branch at a degree-2 root is the lower one.

    Returns
    -------
    list of str, length m

    Example
    -------
    >>> from cladewright.io.readers import parse_newick
    >>> [x for x in support_labels(parse_newick("((a,b)0.950:1,c,d);")[0]) if x]
    ['95.0']
    """
    n, m = tree.n_leaves, tree.n_nodes
    percent, proportions = tree.support_percent()
    raw = np.asarray(tree.support, dtype=np.float64)
    text = tree.support_text
    labels = [""] * m
    for v in range(n, m):
        if v == tree.root:
            continue
        label = _support_text(float(percent[v]))
        written = text[v] if text is not None else None
        if label and written is not None:
            try:
                same = float(written) == float(raw[v])  # the text still reads as this node's value
            except ValueError:
                same = False
            if same:
                label = (_percent_from_text(written) or label) if proportions else written.strip()
        labels[v] = label
    kids = child_lists(tree, ladderize)[tree.root]
    if len(kids) == 2 and labels[kids[0]] and labels[kids[0]] == labels[kids[1]]:
        # The two branches at a degree-2 root are one split: label one of them only.
        labels[kids[0]] = ""
    return labels


def _columns(root: int, kids: list[list[int]], x: list[float], scale: float, labels: list[str], m: int, *,
             stretch: bool) -> tuple[list[int], list[int], bool]:
    """Column of every node: to scale; with ``stretch`` every branch at least
    one column wide and wide enough for its label."""
    col = [0] * m
    stretched = False
    order = []
    stack = [root]
    while stack:
        v = stack.pop()
        order.append(v)
        for c in kids[v]:
            want = int(round(x[c] * scale)) - int(round(x[v] * scale))
            need = (len(labels[c]) + 3 if labels[c] else 1) if stretch else 0
            if want < need:
                stretched = stretched or bool(labels[c])
                want = need
            col[c] = col[v] + want
        stack.extend(kids[v])
    return order, col, stretched


def text_tree(tree: Tree, width: int | None = None, *, ascii: bool = False, ladderize: bool = True,
              support: bool = True, unit: str | None = None) -> str:
    """The tree as text lines, to print on a terminal.

    Parameters
    ----------
    tree : Tree
    width : int, optional
        Columns for the branches (the labels come after); default from the
        terminal's width, between 20 and 100. Every branch takes at least
        one column, so a very deep tree (a long caterpillar) is wider.
    ascii : bool
        Use ``- | +`` instead of box-drawing characters.
    ladderize : bool
        Smaller clades above larger ones.
    support : bool
        Write support values on the branches above internal nodes, as
        percentages (support read on a 0-1 scale is multiplied by 100, see
        :meth:`cladewright.tree.Tree.support_percent`), with the tree
        file's digits (:func:`support_labels`).
    unit : str, optional
        What the branch lengths measure, named after the scale bar's length
        (``"substitutions per site"``; :func:`cladewright.draw.scale_unit`
        words it from a model's name); default :data:`DEFAULT_UNIT`.

    Returns
    -------
    str
        Lines ending in ``"\\n"``: one per leaf, then a scale bar when the
        tree has branch lengths (or a note that it is a cladogram), then for
        an unrooted tree the note :data:`UNROOTED_NOTE`.

    References
    ----------
    Layout: common practice (rectangular phylogram).

    Example
    -------
    >>> from cladewright.tree import Tree
    >>> t = Tree([3, 3, 4, 4, -1], [1.0, 1.0, 2.0, 1.0, np.nan], list("abc"), rooted=True)
    >>> print(text_tree(t, width=12, ascii=True, unit="substitutions per site"), end="")
    -+---------- c
     +----+----- a
          +----- b
     |----| 1 substitutions per site
    """
    ch = _ASCII if ascii else _BOX
    n, m = tree.n_leaves, tree.n_nodes
    x, y, kids, rows, has_lengths = tree_layout(tree, ladderize)
    names = tree.leaf_names
    root = tree.root
    labels = support_labels(tree, ladderize) if support else [""] * m
    unit = DEFAULT_UNIT if unit is None else str(unit).strip() or DEFAULT_UNIT
    if width is None:
        cols = shutil.get_terminal_size((100, 24)).columns
        longest = max(len(s) for s in names)
        width = max(20, min(100, cols - longest - 3))
    width = max(4, int(width))
    span = float(x.max()) if m > 1 else 0.0
    scale = (width - 2) / span if span > 0 else 0.0
    x_l = x.tolist()
    order, col, stretched = _columns(root, kids, x_l, scale, labels, m, stretch=True)
    merged = False
    if max(col) > max(4 * width, 400):
        # Too deep to give every branch a column (a long caterpillar would need
        # one per level, and the drawing would grow with the square of n): draw
        # to scale only, short branches merged, labels where they fit.
        order, col, _ = _columns(root, kids, x_l, scale, labels, m, stretch=False)
        merged, stretched = True, False
    # Rows: leaves one per line from the top; an internal node on the row of
    # the middle of its first and last child (rounded up the page).
    row_of = [0] * m
    for i, leaf in enumerate(rows.tolist()):
        row_of[leaf] = i
    for v in reversed(order):
        if v >= n:
            row_of[v] = (row_of[kids[v][0]] + row_of[kids[v][-1]]) // 2
    total_cols = max(col) + 1
    grid = [[" "] * total_cols for _ in range(n)]
    for v in order:
        if v < n:
            continue
        r, c0 = row_of[v], col[v]
        ks = kids[v]
        top, bottom = row_of[ks[0]], row_of[ks[-1]]
        for r2 in range(top + 1, bottom):
            grid[r2][c0] = ch["v"]
        for i, k in enumerate(ks):
            rk = row_of[k]
            kind = "first" if i == 0 else "last" if i == len(ks) - 1 else "mid"
            if len(ks) == 1:
                grid[rk][c0] = ch["h"]
            else:
                grid[rk][c0] = ch["node_" + kind] if rk == r else ch[kind]
            # a leaf's line runs through its own column, so it shows at least one dash
            for c in range(c0 + 1, col[k] + (1 if k < n else 0)):
                grid[rk][c] = ch["h"]
            if labels[k] and col[k] - c0 >= len(labels[k]) + 2:
                start = col[k] - len(labels[k]) - 1  # one dash either side
                for j, s in enumerate(labels[k]):
                    grid[rk][start + j] = s
        if all(row_of[k] != r for k in ks):
            grid[r][c0] = ch["node"]
    rr = row_of[root]
    lines = []
    for r in range(n):
        # A branch leads into the root from the left margin.
        stub = ch["root"] if r == rr else " "
        lines.append(stub + "".join(grid[r]).rstrip() + " " + names[int(rows[r])])
    if has_lengths and scale > 0:
        # A bar of a round length, a fifth of the tree or at least 6 columns.
        bar = nice_length(5.0 * max(span / 5.0, 6.0 / scale))
        cols_bar = max(2, int(round(bar * scale)))
        ends = ("|", "|") if ascii else ("├", "┤")
        # the bar's end marks stand on the columns cols_bar apart
        lines.append(" " + ends[0] + ch["h"] * (cols_bar - 1) + ends[1] + f" {bar:g} {unit}"
                     + (" (some branches stretched to fit their support value)" if stretched else "")
                     + (" (too deep to show every branch: short branches merged)" if merged else ""))
    elif not has_lengths:
        lines.append("no branch lengths: drawn as a cladogram")
    if not tree.rooted:
        lines.append(UNROOTED_NOTE)
    return "\n".join(lines) + "\n"
