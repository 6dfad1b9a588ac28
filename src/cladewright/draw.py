"""Tree figures: a rectangular phylogram with taxon names, support values and
a scale bar, written as SVG, PNG or PDF.

The look: ink-blue branches with rounded ends, a dot at every tip, the names
set in one column at the right with faint dotted leaders from each tip (so
names are easy to scan however long the branches), support values in small
grey type just above the branch they belong to, left of its node; values
below a chosen threshold turn burnt orange and their node gets an open ring.
Figure height, type size and line weight follow the number of leaves, so the
same call serves 5 leaves and 500. SVG keeps text as text (searchable,
checkable); PDF embeds TrueType fonts.

matplotlib is driven through its object interface with the Agg canvas: no
pyplot, no global state, safe in scripts, servers and tests.
"""

from __future__ import annotations

import io
import os
from typing import TYPE_CHECKING, Any, Literal

import numpy as np
from numpy.typing import ArrayLike

from .errors import InputError
from .textdraw import nice_length, tree_layout

if TYPE_CHECKING:
    from matplotlib.figure import Figure

    from .tree import Tree

__all__ = ["render_tree", "tree_figure", "figure_bytes", "FigureFormat", "FORMATS", "GROUP_COLOURS", "SINGLE"]

#: The figure formats, as matplotlib names them.
FigureFormat = Literal["svg", "png", "pdf"]
#: File suffix (lower case) -> figure format.
FORMATS: dict[str, FigureFormat] = {".svg": "svg", ".png": "png", ".pdf": "pdf"}

INK = "#1f3a56"
LEADER = "#c3ccd6"
SUPPORT = "#6a7886"
LOW = "#c4501a"
NOTE = "#55616d"
#: Colours of taxon groups (``groups=``), given in drawing order from the top
#: and cycled, so neighbouring groups always differ; single taxa stay grey.
GROUP_COLOURS: tuple[str, ...] = ("#1b7f79", "#b03a5b", "#2f6db5", "#c07a00", "#7a4ea3", "#5a8f29", "#8c5a2b", "#d0577b")
#: Colour of a taxon alone in its group.
SINGLE: str = "#7d8894"

def _rc(salt: str) -> dict[Any, Any]:
    return {"svg.fonttype": "none", "svg.hashsalt": salt, "pdf.fonttype": 42, "ps.fonttype": 42,
            "font.family": "DejaVu Sans"}


def _support_text(value: float) -> str:
    if abs(value) >= 1000:  # not a percentage; keep the label short
        return f"{value:.3g}"
    r = round(value)
    return str(int(r)) if abs(value - r) < 0.05 else f"{value:.1f}"


def tree_figure(tree: Tree, highlight_below: float | None = None, ladderize: bool = True, title: str | None = None,
                *, groups: ArrayLike | None = None, support: bool = True) -> Figure:
    """The figure of a tree (a matplotlib Figure on an Agg canvas).

    Parameters
    ----------
    tree : Tree
    highlight_below : float, optional
        Support values (percentages) below this are drawn in orange with an
        open ring on their node, and a note says so. Support read from a
        file on a 0-1 scale (:meth:`cladewright.tree.Tree.support_percent`)
        is drawn, and compared, as percentages.
    ladderize : bool
        Smaller clades above larger ones; else the stored order.
    title : str, optional
        Printed at the top left.
    groups : array_like of int (n,), optional
        A group number per leaf (``tree.leaf_names`` order), e.g. from
        :func:`cladewright.clusters.clusters_within`: names and tips are
        coloured by group (taxa alone in their group in grey).
    support : bool
        Print support values.

    Returns
    -------
    matplotlib.figure.Figure

    References
    ----------
    Layout: common practice (rectangular phylogram, scale bar in
    substitutions per site).
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.collections import LineCollection
    from matplotlib.figure import Figure
    from matplotlib.transforms import offset_copy
    import matplotlib

    n, m = tree.n_leaves, tree.n_nodes
    x, y, kids, rows, has_lengths = tree_layout(tree, ladderize)
    names = tree.leaf_names
    root = tree.root
    threshold = None if highlight_below is None else float(highlight_below)
    span = float(x.max()) if m > 1 else 0.0
    if span <= 0:
        span = 1.0
    # Sizes in inches and points, following the number of leaves.
    row_in = float(np.clip(0.30 * (30.0 / max(n, 1)) ** 0.3, 0.11, 0.30))
    font = float(np.clip(0.58 * row_in * 72.0, 4.5, 10.0))
    small = max(3.5, 0.78 * font)
    lw = float(np.clip(1.8 - n / 350.0, 0.5, 1.8))
    tree_w = float(np.clip(4.0 + 0.01 * n, 4.5, 8.0))
    label_w = max(len(s) for s in names) * font * 0.62 / 72.0 + 0.45
    top = 0.3 + (0.4 if title else 0.0)
    bottom = 1.15
    left = 0.3
    height = n * row_in + top + bottom
    width = left + tree_w + label_w
    with matplotlib.rc_context(_rc("cladewright")):
        fig = Figure(figsize=(width, height))
        FigureCanvasAgg(fig)
        ax = fig.add_axes((left / width, bottom / height, tree_w / width, n * row_in / height))
        ax.set_axis_off()
        stub = 0.03 * span
        ax.set_xlim(-stub, span * 1.01)
        ax.set_ylim(n - 0.5, -0.5)
        horiz, vert = [], []
        for v in range(m):
            if v == root:
                continue
            p = int(tree.parent[v])
            horiz.append(((x[p], y[v]), (x[v], y[v])))
        for v in range(n, m):
            ks = kids[v]
            if len(ks) > 1:
                vert.append(((x[v], y[ks[0]]), (x[v], y[ks[-1]])))
        if tree.rooted:
            horiz.append(((-stub, y[root]), (0.0, y[root])))
        style: dict[str, Any] = dict(colors=INK, linewidths=lw, capstyle="round", joinstyle="round")
        ax.add_collection(LineCollection(horiz + vert, **style))
        # Dotted leaders from each tip to the column of names.
        tip_x = x[:n]
        end = span * 1.01
        leaders = [((tip_x[i], y[i]), (end, y[i])) for i in range(n) if end - tip_x[i] > 0.015 * span]
        if leaders:
            ax.add_collection(LineCollection(leaders, colors=LEADER, linewidths=0.6 * lw,
                                             linestyles=(0, (1, 2.5))))
        colour = [INK] * n
        if groups is not None:
            g = np.asarray(groups).reshape(-1)
            if g.shape != (n,):
                raise ValueError(f"groups has {g.size} entries for {n} leaves")
            _, gi, count = np.unique(g, return_inverse=True, return_counts=True)
            gi = gi.reshape(-1)
            tint, used = {}, 0
            for leaf in rows.tolist():
                k = int(gi[leaf])
                if k not in tint:
                    if count[k] > 1:
                        tint[k] = GROUP_COLOURS[used % len(GROUP_COLOURS)]
                        used += 1
                    else:
                        tint[k] = SINGLE
            colour = [tint[int(k)] for k in gi]
        ax.scatter(tip_x, y[:n], s=(1.6 * lw) ** 2 * 2.2, c=colour, zorder=3, linewidths=0)
        label_at = offset_copy(ax.transData, fig=fig, x=4, y=0, units="points")
        for i in range(n):
            ax.text(end, y[i], names[i], transform=label_at, ha="left", va="center", fontsize=font,
                    color=colour[i] if groups is not None else "#1b1f24", clip_on=False)
        low_x, low_y = [], []
        if support:
            sup, _ = tree.support_percent()
            root_kids = kids[root]
            skip = -1
            if len(root_kids) == 2 and min(root_kids) >= n and sup[root_kids[0]] == sup[root_kids[1]]:
                # The two branches at a degree-2 root are one split: label the lower one only.
                skip = root_kids[0]
            above = offset_copy(ax.transData, fig=fig, x=-2.5, y=1.2, units="points")
            halo = dict(boxstyle="square,pad=0.04", facecolor="white", edgecolor="none", alpha=0.8)
            for v in range(n, m):
                s = float(sup[v])
                if v == root or v == skip or s != s:
                    continue
                is_low = threshold is not None and s < threshold
                if is_low:
                    low_x.append(x[v])
                    low_y.append(y[v])
                # A faint white box keeps the number legible where it crosses a branch.
                ax.text(x[v], y[v], _support_text(s), transform=above, ha="right", va="bottom",
                        fontsize=small, color=LOW if is_low else SUPPORT,
                        fontweight="bold" if is_low else "normal", clip_on=False, bbox=halo)
        if low_x:
            ax.scatter(low_x, low_y, s=(2.6 * lw) ** 2 * 2.2, facecolors="white", edgecolors=LOW,
                       linewidths=0.9 * lw, zorder=4)
        foot = fig.add_axes((left / width, 0.1 / height, tree_w / width, 0.9 / height), sharex=ax)
        foot.set_axis_off()
        foot.set_ylim(0.0, 1.0)
        notes = []
        if has_lengths:
            bar = nice_length(span)
            foot.plot([0.0, bar], [0.9, 0.9], color=INK, lw=lw, solid_capstyle="butt")
            foot.plot([0.0, 0.0], [0.83, 0.97], color=INK, lw=0.7 * lw)
            foot.plot([bar, bar], [0.83, 0.97], color=INK, lw=0.7 * lw)
            foot.text(0.0, 0.76, f"{bar:g} substitutions per site", ha="left", va="top", fontsize=small,
                      color=NOTE)
        else:
            notes.append(("no branch lengths: drawn as a cladogram", NOTE))
        if not tree.rooted:
            notes.append(("unrooted tree: drawn from an arbitrary node", NOTE))
        if low_x:
            notes.append((f"open ring: support below {threshold:g}", LOW))
        if groups is not None:
            notes.append(("names coloured by group; grey: alone in its group", NOTE))
        for k, (text, ink) in enumerate(notes):
            foot.text(0.0, 0.48 - 0.2 * k, text, ha="left", va="top",
                      fontsize=small, color=ink)
        if title:
            fig.text(left / width, 1.0 - 0.22 / height, title, ha="left", va="top", fontsize=font + 2,
                     fontweight="bold", color="#1b1f24")
    return fig


def figure_bytes(fig: Figure, fmt: FigureFormat, salt: str = "cladewright") -> bytes:
    """The figure encoded as ``fmt`` (``svg``, ``png`` or ``pdf``), bytes.

    Output is reproducible: no dates in SVG or PDF metadata, fixed SVG ids.
    """
    import matplotlib

    buf = io.BytesIO()
    meta = {"svg": {"Date": None}, "pdf": {"CreationDate": None, "ModDate": None}, "png": {}}[fmt]
    with matplotlib.rc_context(_rc(salt)):
        dpi = 200
        if fmt == "png":
            # Keep very tall figures (hundreds of leaves) within ~12,000 pixels.
            dpi = int(min(200, max(72, 12000 / fig.get_figheight())))
        fig.savefig(buf, format=fmt, dpi=dpi, metadata=meta, facecolor="white")
    return buf.getvalue()


def render_tree(tree: Tree, path: str | os.PathLike[str], highlight_below: float | None = None,
                ladderize: bool = True, title: str | None = None, *, groups: ArrayLike | None = None,
                support: bool = True) -> FigureFormat:
    """Draw a tree to an SVG, PNG or PDF file, chosen by the file's suffix.

    Parameters
    ----------
    tree : Tree
    path : str or os.PathLike
        Ends in ``.svg``, ``.png`` or ``.pdf`` (any case); written
        atomically, so a failure never leaves a partial file.
    highlight_below, ladderize, title, groups, support
        See :func:`tree_figure`.

    Returns
    -------
    str
        The format written.

    References
    ----------
    Layout: common practice (rectangular phylogram).

    Example
    -------
    >>> from cladewright.tree import Tree
    >>> t = Tree([3, 3, 3, -1], [0.1, 0.2, 0.3, np.nan], ["a", "b", "c"])
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     render_tree(t, os.path.join(folder, "tree.svg"))
    'svg'
    """
    from .io.output import atomic_output

    target = os.fspath(path)
    fmt = FORMATS.get(os.path.splitext(target)[1].lower())
    if fmt is None:
        raise InputError("unknown figure format; give a file name ending in .svg, .png or .pdf", source=target)
    fig = tree_figure(tree, highlight_below, ladderize, title, groups=groups, support=support)
    data = figure_bytes(fig, fmt)
    with atomic_output(target, "wb") as fh:
        fh.write(data)
    return fmt
