"""Tree figures: a phylogram with taxon names, support values and a scale bar, written as SVG,
PNG or PDF; rectangular or circular; leaves coloured by a category with a legend.

The look: ink-blue branches with rounded ends, a dot at every tip, the names set in one column at
the right (or round the circle) with faint dotted leaders from each tip, support values in small
grey type placed so that they never sit on a line: above their branch, left of its node, where the
branch is long enough; otherwise beside the node, in the gap between its children (see
:mod:`cladewright.draw.labels`). Values below a chosen threshold turn burnt orange and their
node gets an open ring. Size, type and line weight follow the number of leaves unless a size is
given. SVG keeps text as text (searchable, checkable); PDF embeds TrueType fonts.

matplotlib is driven through its object interface with the Agg canvas: no pyplot, no global
state, safe in scripts, servers and tests.
"""

from __future__ import annotations

import io
import math
import os
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any, Literal

import numpy as np
from numpy.typing import ArrayLike

from ..errors import InputError
from ..textdraw import DEFAULT_UNIT, UNROOTED_NOTE, nice_length, support_labels, tree_layout
from .geometry import LEFT, PT, TOP_PAD, circular, rectangular
from .labels import place_labels
from .palette import (GROUP_COLOURS, INK, LEADER, LOW, MARKERS, MAX_CATEGORIES, MISSING, NAME, NOTE, OKABE_ITO,
                      SINGLE, SUPPORT, leaf_styles, legend_plan)

if TYPE_CHECKING:
    from matplotlib.figure import Figure

    from ..tree import Tree

__all__ = ["render_tree", "tree_figure", "figure_bytes", "scale_unit", "FigureFormat", "FORMATS", "Layout",
           "LAYOUTS", "OKABE_ITO", "GROUP_COLOURS", "MARKERS", "MAX_CATEGORIES", "MISSING", "SINGLE",
           "SCALE_UNITS", "INK", "LOW", "SUPPORT", "NOTE"]

#: The figure formats, as matplotlib names them.
FigureFormat = Literal["svg", "png", "pdf"]
#: File suffix (lower case) -> figure format.
FORMATS: dict[str, FigureFormat] = {".svg": "svg", ".png": "png", ".pdf": "pdf"}
#: The figure's layouts.
Layout = Literal["rectangular", "circular"]
LAYOUTS: tuple[str, ...] = ("rectangular", "circular")

#: What a scale bar measures, for the models whose distances are not substitutions per site;
#: ``"matrix"`` stands for a distance matrix read from a file, in its own units.
SCALE_UNITS: dict[str, str] = {"p": "p-distance", "protein-p": "p-distance", "matrix": "distance units"}


def scale_unit(model: str | None) -> str:
    """The words for a scale bar's unit, from the distance model that made the tree.

    Parameters
    ----------
    model : str or None
        A model name of :data:`cladewright.distances.MODELS` (p-distances are
        ``p-distance``; every other model estimates substitutions per site),
        ``"matrix"`` for distances read from a file (``distance units``), or
        None when nothing is known (a tree file): ``branch length``.

    Returns
    -------
    str

    References
    ----------
    Units of distance: Jukes & Cantor (1969) for p and its corrections; common practice for the wording.

    Example
    -------
    >>> scale_unit("k2p"), scale_unit("p"), scale_unit("matrix"), scale_unit(None)
    ('substitutions per site', 'p-distance', 'distance units', 'branch length')
    """
    from ..distances import MODELS

    if model is None:
        return DEFAULT_UNIT
    key = str(model).strip().lower()
    if key in SCALE_UNITS:
        return SCALE_UNITS[key]
    if key in MODELS:
        return "substitutions per site"
    raise InputError(f"no unit is known for model {model!r}; give a model name, 'matrix' or None")


def _rc(salt: str) -> dict[Any, Any]:
    return {"svg.fonttype": "none", "svg.hashsalt": salt, "pdf.fonttype": 42, "ps.fonttype": 42,
            "font.family": "DejaVu Sans"}


def _figure_size(size: Any) -> tuple[float, float] | None:
    if size is None:
        return None
    try:
        w, h = (float(v) for v in size)
    except (TypeError, ValueError):
        w = h = float("nan")
    if not (0 < w <= 200 and 0 < h <= 200):
        raise InputError(f"size={size!r} is not a figure size; give (width, height) in inches, each above 0 "
                         "and at most 200")
    return w, h


def tree_figure(tree: Tree, highlight_below: float | None = None, ladderize: bool = True, title: str | None = None,
                *, groups: Mapping[str, str] | ArrayLike | None = None, support: bool = True,
                unit: str | None = None, size: tuple[float, float] | None = None, layout: Layout = "rectangular",
                group_title: str | None = None) -> Figure:
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
    groups : mapping or array_like, optional
        A mapping from taxon name to category (e.g. from
        :func:`cladewright.io.leaf_table.read_leaf_groups`): each category's
        names and tips get a colour of Okabe & Ito (2008), in
        :data:`GROUP_COLOURS` order over the categories sorted by name; past
        eight categories the colours repeat with another tip shape
        (:data:`MARKERS`), and more than :data:`MAX_CATEGORIES` is refused.
        A legend gives each category and its count; taxa without one are
        grey (:data:`MISSING`) and counted as "not in table". Or an array
        of group numbers, one per leaf in ``tree.leaf_names`` order (e.g.
        from :func:`cladewright.clusters.clusters_within`): groups coloured
        in drawing order, taxa alone in their group in grey, no legend.
    support : bool
        Print support values, with the tree file's digits where the tree
        was read from one (:func:`cladewright.textdraw.support_labels`).
    unit : str, optional
        What branch lengths measure, printed after the scale bar's length;
        :func:`scale_unit` words it from a model name. Default
        ``"branch length"`` (a tree alone does not say).
    size : (float, float), optional
        Width and height in inches; default from the number of leaves. A
        size too small to keep the names legible is refused, naming the
        least that fits.
    layout : {"rectangular", "circular"}
        A rectangular phylogram, or a circular one (the root at the centre,
        the leaves evenly round it).
    group_title : str, optional
        The legend's title (e.g. the table's column name).

    Returns
    -------
    matplotlib.figure.Figure

    References
    ----------
    Okabe, M. & Ito, K. (2008) Color Universal Design (CUD): how to make figures and presentations
    that are friendly to colorblind people (the eight colours). Layout: common practice
    (rectangular and circular phylograms, a scale bar in the distances' unit).

    Example
    -------
    >>> from cladewright.tree import Tree
    >>> t = Tree([3, 3, 3, -1], [0.1, 0.2, 0.3, np.nan], ["a", "b", "c"])
    >>> fig = tree_figure(t, groups={"a": "bird", "b": "fish"}, size=(5, 3))
    >>> fig.get_size_inches().tolist()
    [5.0, 3.0]
    """
    import matplotlib
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.collections import LineCollection
    from matplotlib.figure import Figure
    from matplotlib.font_manager import FontProperties
    from matplotlib.lines import Line2D

    if layout not in LAYOUTS:
        raise InputError(f"layout={layout!r} is not a layout; give one of {', '.join(LAYOUTS)}")
    fig_size = _figure_size(size)
    unit = DEFAULT_UNIT if unit is None else (str(unit).strip() or DEFAULT_UNIT)
    n, m = tree.n_leaves, tree.n_nodes
    x, y, kids, rows, has_lengths = tree_layout(tree, ladderize)
    names = tree.leaf_names
    threshold = None if highlight_below is None else float(highlight_below)
    labels = support_labels(tree, ladderize) if support else [""] * m
    percent = tree.support_percent()[0]
    nodes = [v for v in range(n, m) if labels[v]]
    low = [v for v in nodes if threshold is not None and percent[v] < threshold]
    colour, mark, legend, group_notes = leaf_styles(tree, groups, rows)
    notes: list[tuple[str, str]] = []
    if not has_lengths:
        notes.append(("no branch lengths: drawn as a cladogram", NOTE))
    if not tree.rooted:
        notes.append((UNROOTED_NOTE, NOTE))
    if low:
        notes.append((f"open ring: support below {threshold:g}", LOW))
    notes += group_notes
    with matplotlib.rc_context(_rc("cladewright")):
        fig = Figure(figsize=(4.0, 4.0))
        canvas = FigureCanvasAgg(fig)
        renderer = canvas.get_renderer()
        ten = FontProperties(family="DejaVu Sans", size=10)

        def width_at_10(texts: list[str]) -> float:
            return max((renderer.get_text_width_height_descent(s, ten, ismath=False)[0] for s in texts),
                       default=0.0) / renderer.dpi

        names_10 = width_at_10(list(names))
        legend_10 = width_at_10([e[0] for e in legend] + ([group_title] if group_title else []))
        top = TOP_PAD + (0.4 if title else 0.0)

        def legend_size(font: float) -> float:
            return float(np.clip(font, 6.0, 9.0))

        def foot_height(font: float, small: float, width: float) -> float:
            fs = legend_size(font)
            legend_h = legend_plan(len(legend), legend_10 * fs / 10.0, fs, width, bool(group_title))[1]
            return (0.42 if has_lengths else 0.1) + 0.2 * len(notes) + legend_h + 0.12

        if layout == "circular":
            frame = circular(x, y, kids, tree.root, n, lambda f: names_10 * f / 10.0, foot_height, top, fig_size)
        else:
            frame = rectangular(x, y, kids, tree.root, tree.rooted, n, lambda f: names_10 * f / 10.0, foot_height,
                                top, fig_size)
        W, H, lw, font, small = frame.width, frame.height, frame.lw, frame.font, frame.small
        fig.set_size_inches(W, H)
        renderer = canvas.get_renderer()
        ax = fig.add_axes((0.0, 0.0, 1.0, 1.0))
        ax.set_axis_off()
        ax.set_xlim(0.0, W)
        ax.set_ylim(0.0, H)
        ax.add_collection(LineCollection(frame.branches, colors=INK, linewidths=lw, capstyle="round",
                                         joinstyle="round", gid="branches"))
        if frame.leaders:
            ax.add_collection(LineCollection(frame.leaders, colors=LEADER, linewidths=0.6 * lw,
                                             linestyles=(0, (1, 2.5)), gid="leaders"))
        tip_area = (1.6 * lw) ** 2 * 2.2
        for shape in MARKERS:
            idx = [i for i in range(n) if mark[i] == shape]
            if idx:
                ax.scatter(frame.x[idx], frame.y[idx], s=tip_area * (0.8 if shape != "o" else 1.0),
                           c=[colour[i] for i in idx], marker=shape, zorder=3, linewidths=0, gid=f"tips-{shape}")
        for i, (nx_, ny_, turn, ha) in enumerate(frame.names):
            ax.text(nx_, ny_, names[i], ha=ha, va="center", rotation=turn, rotation_mode="anchor", fontsize=font,
                    color=NAME if groups is None else colour[i], gid=f"name-{i}")
        # a mark's reach from its centre: a circle's radius, or half the diagonal of the other shapes
        marks = [(float(frame.x[i]), float(frame.y[i]), 0.65 * math.sqrt(tip_area) * PT) for i in range(n)]
        ring_area = (2.6 * lw) ** 2 * 2.2
        marks += [(float(frame.x[v]), float(frame.y[v]), (math.sqrt(ring_area) / 2 + 0.45 * lw) * PT) for v in low]
        texts = []
        for v in nodes:
            is_low = v in low
            texts.append(ax.text(0.0, 0.0, labels[v], ha="center", va="center", rotation_mode="anchor",
                                 fontsize=small, color=LOW if is_low else SUPPORT,
                                 fontweight="bold" if is_low else "normal", gid=f"support-{v}"))
        boxes = [t.get_window_extent(renderer) for t in texts]
        spots, _ = place_labels(frame, nodes, [(b.width / fig.dpi, b.height / fig.dpi) for b in boxes], marks)
        for t, (cx, cy, heading) in zip(texts, spots):
            turn = math.degrees(heading) % 360.0
            t.set_position((cx, cy))
            t.set_rotation(turn - 180.0 if 90.0 < turn < 270.0 else turn)
        if low:
            ax.scatter(frame.x[low], frame.y[low], s=ring_area, facecolors="white", edgecolors=LOW,
                       linewidths=0.9 * lw, zorder=4)
        at = frame.foot - 0.18
        if has_lengths:
            bar = nice_length(float(x.max()) if m > 1 else 0.0)
            length = bar * frame.per_unit
            ax.plot([LEFT, LEFT + length], [at, at], color=INK, lw=lw, solid_capstyle="butt")
            for end in (LEFT, LEFT + length):
                ax.plot([end, end], [at - 0.04, at + 0.04], color=INK, lw=0.7 * lw)
            ax.text(LEFT, at - 0.07, f"{bar:g} {unit}", ha="left", va="top", fontsize=small, color=NOTE,
                    gid="scale-bar")
            at -= 0.3
        else:
            at += 0.08
        for text, ink in notes:
            ax.text(LEFT, at, text, ha="left", va="top", fontsize=small, color=ink)
            at -= 0.2
        if legend:
            fs = legend_size(font)
            ncol = legend_plan(len(legend), legend_10 * fs / 10.0, fs, W, bool(group_title))[0]
            handles = [Line2D([], [], linestyle="none", marker=mk, markersize=0.8 * fs, markerfacecolor=c,
                              markeredgewidth=0) for _, c, mk in legend]
            ax.legend(handles, [e[0] for e in legend], loc="upper left", bbox_to_anchor=(LEFT, at - 0.04),
                      bbox_transform=ax.transData, ncol=ncol, frameon=False, fontsize=fs, title=group_title,
                      title_fontsize=fs, alignment="left", borderaxespad=0.0, borderpad=0.0, handlelength=1.0,
                      handletextpad=0.5, columnspacing=1.5, labelspacing=0.4)
        if title:
            fig.text(LEFT / W, 1.0 - 0.22 / H, title, ha="left", va="top", fontsize=font + 2, fontweight="bold",
                     color=NAME)
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
            # Keep very large figures (hundreds of leaves) within ~12,000 pixels a side.
            dpi = int(min(200, max(72, 12000 / max(fig.get_figheight(), fig.get_figwidth()))))
        fig.savefig(buf, format=fmt, dpi=dpi, metadata=meta, facecolor="white")
    return buf.getvalue()


def render_tree(tree: Tree, path: str | os.PathLike[str], highlight_below: float | None = None,
                ladderize: bool = True, title: str | None = None, *, groups: Mapping[str, str] | ArrayLike | None = None,
                support: bool = True, unit: str | None = None, size: tuple[float, float] | None = None,
                layout: Layout = "rectangular", group_title: str | None = None) -> FigureFormat:
    """Draw a tree to an SVG, PNG or PDF file, chosen by the file's suffix.

    Parameters
    ----------
    tree : Tree
    path : str or os.PathLike
        Ends in ``.svg``, ``.png`` or ``.pdf`` (any case); written
        atomically, so a failure never leaves a partial file.
    highlight_below, ladderize, title, groups, support, unit, size, layout, group_title
        See :func:`tree_figure`.

    Returns
    -------
    str
        The format written.

    References
    ----------
    Layout: common practice (rectangular and circular phylograms).

    Example
    -------
    >>> from cladewright.tree import Tree
    >>> t = Tree([3, 3, 3, -1], [0.1, 0.2, 0.3, np.nan], ["a", "b", "c"])
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     render_tree(t, os.path.join(folder, "tree.svg"), layout="circular")
    'svg'
    """
    from ..io.output import atomic_output

    target = os.fspath(path)
    fmt = FORMATS.get(os.path.splitext(target)[1].lower())
    if fmt is None:
        raise InputError("unknown figure format; give a file name ending in .svg, .png or .pdf", source=target)
    fig = tree_figure(tree, highlight_below, ladderize, title, groups=groups, support=support, unit=unit, size=size,
                      layout=layout, group_title=group_title)
    data = figure_bytes(fig, fmt)
    with atomic_output(target, "wb") as fh:
        fh.write(data)
    return fmt
