"""Internal: the colours and marks of a tree figure, and the legend's entries (see :mod:`cladewright.draw`).

References
----------
Okabe, M. & Ito, K. (2008) Color Universal Design (CUD): how to make figures and presentations that are
friendly to colorblind people. J*FLY (the eight colours).
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import numpy as np

from ..errors import InputError
from .geometry import LEFT, PT

if TYPE_CHECKING:
    from ..tree import Tree

__all__ = ["INK", "LEADER", "SUPPORT", "LOW", "NOTE", "NAME", "OKABE_ITO", "GROUP_COLOURS", "MARKERS",
           "MAX_CATEGORIES", "MISSING", "SINGLE", "leaf_styles", "legend_plan"]

INK = "#1f3a56"
LEADER = "#c3ccd6"
SUPPORT = "#6a7886"
LOW = "#c4501a"
NOTE = "#55616d"
NAME = "#1b1f24"
#: The eight colours of Okabe & Ito (2008), Color Universal Design, told apart under the common
#: forms of colour blindness; keyed by their names there.
OKABE_ITO: dict[str, str] = {"black": "#000000", "orange": "#E69F00", "sky blue": "#56B4E9",
                             "bluish green": "#009E73", "yellow": "#F0E442", "blue": "#0072B2",
                             "vermillion": "#D55E00", "reddish purple": "#CC79A7"}
#: The order categories are given these colours (the strongest first; the pale yellow and the
#: black, which reads as plain text, last).
GROUP_COLOURS: tuple[str, ...] = tuple(OKABE_ITO[k] for k in ("blue", "orange", "bluish green", "reddish purple",
                                                              "sky blue", "vermillion", "yellow", "black"))
#: Tip marks: past eight categories the colours repeat and the mark's shape tells them apart.
MARKERS: tuple[str, ...] = ("o", "s", "^", "D")
#: The most categories a figure tells apart (colours times shapes); more is refused.
MAX_CATEGORIES = len(GROUP_COLOURS) * len(MARKERS)
#: Leaves with no category (not in the table, or a blank cell).
MISSING = "#9e9e9e"
#: Colour of a taxon alone in its cluster (``groups`` given as cluster numbers).
SINGLE: str = "#7d8894"


def _natural(text: str) -> tuple[Any, ...]:
    return tuple((0, int(p), "") if p.isdigit() else (1, 0, p) for p in re.split(r"(\d+)", text) if p)


def leaf_styles(tree: Tree, groups: Any, rows: Any) -> tuple[list[str], list[str], list[tuple[str, str, str]],
                                                              list[tuple[str, str]]]:
    """Colour and mark of every leaf, the legend's entries (label, colour, mark) and notes."""
    n = tree.n_leaves
    if groups is None:
        return [INK] * n, ["o"] * n, [], []
    if isinstance(groups, Mapping):
        names = tree.leaf_names
        cats = {x: str(groups[x]).strip() for x in names if x in groups and str(groups[x]).strip()}
        if not cats:
            raise InputError("groups names none of the tree's taxa; key it by taxon name (tree.leaf_names)")
        kinds = sorted(set(cats.values()), key=_natural)
        if len(kinds) > MAX_CATEGORIES:
            raise InputError(f"groups has {len(kinds)} categories; a figure tells at most {MAX_CATEGORIES} apart "
                             f"({len(GROUP_COLOURS)} colours x {len(MARKERS)} marks): choose a coarser column")
        style = {k: (GROUP_COLOURS[i % len(GROUP_COLOURS)], MARKERS[i // len(GROUP_COLOURS)])
                 for i, k in enumerate(kinds)}
        colour = [style[cats[x]][0] if x in cats else MISSING for x in names]
        mark = [style[cats[x]][1] if x in cats else "o" for x in names]
        counts = {k: 0 for k in kinds}
        for k in cats.values():
            counts[k] += 1
        legend = [(f"{k} ({counts[k]})", style[k][0], style[k][1]) for k in kinds]
        if len(cats) < n:
            legend.append((f"not in table ({n - len(cats)})", MISSING, "o"))
        notes = []
        if len(kinds) > len(GROUP_COLOURS):
            notes.append((f"{len(kinds)} categories: past {len(GROUP_COLOURS)} the colours repeat and the tip's "
                          "shape tells them apart", NOTE))
        return colour, mark, legend, notes
    g = np.asarray(groups).reshape(-1)
    if g.shape != (n,):
        raise InputError(f"groups has {g.size} entries for {n} leaves; give one group per leaf "
                         "(tree.leaf_names order) or a mapping from taxon name to category")
    _, gi, count = np.unique(g, return_inverse=True, return_counts=True)
    gi = gi.reshape(-1)
    tint: dict[int, str] = {}
    used = 0
    for leaf in rows.tolist():  # in drawing order, so that neighbouring groups differ
        gk = int(gi[leaf])
        if gk not in tint:
            tint[gk] = SINGLE
            if count[gk] > 1:
                tint[gk] = GROUP_COLOURS[used % len(GROUP_COLOURS)]
                used += 1
    return [tint[int(k)] for k in gi], ["o"] * n, [], [("names coloured by group; grey: alone in its group", NOTE)]


def legend_plan(entries: int, label_w: float, fs: float, width: float, title: bool) -> tuple[int, float]:
    """Columns of the legend and its height (inches) for ``entries`` labels at most ``label_w`` wide."""
    if not entries:
        return 1, 0.0
    entry = label_w + (1.0 + 0.5 + 1.5) * fs * PT
    ncol = max(1, min(entries, int((width - LEFT - 0.2) // entry)))
    rows = math.ceil(entries / ncol)
    return ncol, 0.1 + (rows + (1 if title else 0)) * 1.7 * fs * PT


