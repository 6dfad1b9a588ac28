"""Internal: where each part of a tree figure goes, in inches from the figure's lower left.

Two layouts of one drawing order (:func:`cladewright.textdraw.tree_layout`): rectangular (path
length across the page, one row per leaf down it) and circular (path length out from the centre,
the leaves evenly round it, rows turned into angles). Both give the branches as polylines, and
every node a direction (the way its branch runs) and, where it has two or more children, a *gap*:
the line between the rows of its first child's leaves and the next child's, which no branch
crosses to the right of (outside) the node, so a label set there meets no line. The support
labels are placed on this frame by :mod:`cladewright.draw.labels`.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError

__all__ = ["Frame", "rectangular", "circular", "font_for_row", "MIN_ROW", "PT", "LEFT", "TOP_PAD"]

PT = 1.0 / 72.0  # one point, in inches
#: The narrowest row (inches) that keeps a name legible (4.5-point type).
MIN_ROW = 0.11
LEFT = 0.3  # margin left of the drawing, inches
TOP_PAD = 0.3


def font_for_row(row: float, n: int) -> tuple[float, float, float]:
    """Name size and support size (points) and line weight for rows ``row`` inches apart."""
    font = float(np.clip(0.58 * row * 72.0, 4.5, 10.0))
    return font, max(3.5, 0.78 * font), float(np.clip(1.8 - n / 350.0, 0.5, 1.8))


def _default_row(n: int) -> float:
    return float(np.clip(0.30 * (30.0 / max(n, 1)) ** 0.3, MIN_ROW, 0.30))


@dataclass
class Frame:
    """A laid-out figure: its size, every node's place, the lines to draw and where names go."""

    width: float
    height: float
    x: NDArray[np.float64]          # node positions (m,), inches
    y: NDArray[np.float64]
    heading: NDArray[np.float64]    # the direction each node's branch runs, radians (0: rightwards)
    gap_x: NDArray[np.float64]      # where each node's gap starts (nan: no gap), inches
    gap_y: NDArray[np.float64]
    gap_heading: NDArray[np.float64]
    row_angle: float                # radians between neighbouring leaves (0 in the rectangular layout)
    branches: list[NDArray[np.float64]]
    leaders: list[NDArray[np.float64]]
    names: list[tuple[float, float, float, str]]  # per leaf: x, y, rotation (degrees), alignment
    per_unit: float                 # inches per unit of branch length
    font: float
    small: float
    lw: float
    foot: float                     # height of the footer below the drawing, inches
    top: float
    radius: NDArray[np.float64] | None  # circular: each node's distance from the centre, inches
    reach: NDArray[np.float64]      # the drawn length of each node's branch, inches (0 at the root)


def _rows(kids: list[list[int]], order: Sequence[int], y: NDArray[np.float64], n: int) -> NDArray[np.int64]:
    """The last leaf row below every node (rows as :func:`tree_layout` numbers them)."""
    last = np.zeros(len(kids), dtype=np.int64)
    for v in reversed(order):
        last[v] = int(y[v]) if v < n else last[kids[v][-1]]
    return last


def _preorder(root: int, kids: list[list[int]]) -> list[int]:
    order, stack = [], [root]
    while stack:
        v = stack.pop()
        order.append(v)
        stack.extend(kids[v])
    return order


def _gap_rows(kids: list[list[int]], order: Sequence[int], y: NDArray[np.float64], n: int) -> NDArray[np.float64]:
    """For every node with two or more children, the row half-way between the blocks of two
    neighbouring children nearest the node's own row; nan elsewhere."""
    last = _rows(kids, order, y, n)
    out = np.full(len(kids), np.nan)
    for v in range(n, len(kids)):
        ks = kids[v]
        if len(ks) > 1:
            cuts = [last[k] + 0.5 for k in ks[:-1]]
            out[v] = min(cuts, key=lambda c: abs(c - y[v]))
    return out


def _reach(depth: NDArray[np.float64], kids: list[list[int]]) -> NDArray[np.float64]:
    out = np.zeros(len(kids))
    for v, ks in enumerate(kids):
        for c in ks:
            out[c] = depth[c] - depth[v]
    return out


def _too_small(size: tuple[float, float], n: int, layout: str, need: tuple[float, float]) -> InputError:
    return InputError(f"a figure of {size[0]:g}x{size[1]:g} inches is too small for {n} tax{'on' if n == 1 else 'a'} in the {layout} "
                      f"layout; give at least {math.ceil(need[0] * 10) / 10:g}x{math.ceil(need[1] * 10) / 10:g}")


def rectangular(x: NDArray[np.float64], y: NDArray[np.float64], kids: list[list[int]], root: int, rooted: bool,
                n: int, name_width: Callable[[float], float], foot_height: Callable[[float, float, float], float],
                top: float, size: tuple[float, float] | None) -> Frame:
    """The rectangular layout (a phylogram: path length across, one row per leaf).

    ``name_width(font)``: the widest name in inches; ``foot_height(font, small, width)``: the
    footer's height for that type size and figure width.
    """
    m = len(kids)
    span = float(x.max()) if m > 1 else 0.0
    span = span if span > 0 else 1.0
    stub = 0.03 * span
    row = _default_row(n)
    font, small, lw = font_for_row(row, n)
    if size is None:
        tree_w = float(np.clip(4.0 + 0.01 * n, 4.5, 8.0))
        width = LEFT + tree_w + name_width(font) + 0.45
        foot = foot_height(font, small, width)
        height = top + n * row + foot
    else:
        width, height = size
        for _ in range(2):  # the footer depends on the type size, the type size on the rows left
            foot = foot_height(font, small, width)
            row = (height - top - foot) / n
            font, small, lw = font_for_row(max(row, MIN_ROW), n)
        foot = foot_height(font, small, width)
        row = (height - top - foot) / n
        tree_w = width - LEFT - name_width(font) - 0.45
        if row < MIN_ROW or tree_w < 1.0:
            f_min = font_for_row(MIN_ROW, n)
            need = (LEFT + 1.0 + name_width(f_min[0]) + 0.45, top + foot_height(*f_min[:2], width) + n * MIN_ROW)
            raise _too_small(size, n, "rectangular", need)
    per_unit = tree_w / (span * 1.01 + stub)
    X = LEFT + (x + stub) * per_unit
    Y = foot + (n - 0.5 - y) * row
    order = _preorder(root, kids)
    branches, leaders = [], []
    for v in range(m):
        ks = kids[v]
        for c in ks:
            branches.append(np.array([[X[v], Y[c]], [X[c], Y[c]]]))
        if len(ks) > 1:
            branches.append(np.array([[X[v], Y[ks[0]]], [X[v], Y[ks[-1]]]]))
    if rooted:
        branches.append(np.array([[X[root] - stub * per_unit, Y[root]], [X[root], Y[root]]]))
    end = LEFT + (stub + span * 1.01) * per_unit
    names: list[tuple[float, float, float, str]] = []
    for i in range(n):
        if end - X[i] > 0.015 * span * per_unit:
            leaders.append(np.array([[X[i], Y[i]], [end, Y[i]]]))
        names.append((end + 4 * PT, float(Y[i]), 0.0, "left"))
    gap_rows = _gap_rows(kids, order, y, n)
    has_gap = np.isfinite(gap_rows)
    gap_y = np.where(has_gap, foot + (n - 0.5 - np.nan_to_num(gap_rows)) * row, np.nan)
    gap_x = np.where(has_gap, X, np.nan)
    zero = np.zeros(m)
    return Frame(width, height, X, Y, zero, gap_x, gap_y, zero.copy(), 0.0, branches, leaders, names, per_unit,
                 font, small, lw, foot, top, None, _reach(X, kids))


def _arc(cx: float, cy: float, r: float, a0: float, a1: float) -> NDArray[np.float64]:
    k = max(2, int(math.ceil(abs(a1 - a0) / math.radians(2.0))) + 1)
    t = np.linspace(a0, a1, k)
    return np.column_stack([cx + r * np.cos(t), cy + r * np.sin(t)])


def circular(x: NDArray[np.float64], y: NDArray[np.float64], kids: list[list[int]], root: int, n: int,
             name_width: Callable[[float], float], foot_height: Callable[[float, float, float], float],
             top: float, size: tuple[float, float] | None) -> Frame:
    """The circular layout: path length out from the centre, leaves evenly round the circle
    clockwise from the top, in the rectangular layout's order."""
    m = len(kids)
    span = float(x.max()) if m > 1 else 0.0
    span = span if span > 0 else 1.0
    step = 2.0 * math.pi / n
    row = _default_row(n)
    font, small, lw = font_for_row(row, n)
    side = 0.2  # margin round the disc, inches
    if size is None:
        r_tip = max(1.2, n * row / (2.0 * math.pi))
        disc = 2.0 * (1.01 * r_tip + name_width(font) + 0.45)
        width = disc + 2 * side
        foot = foot_height(font, small, width)
        height = top + disc + foot
    else:
        width, height = size
        foot = foot_height(font, small, width)
        disc = min(width - 2 * side, height - top - foot)

        def room(r: float) -> float:  # grows with r: the disc's radius that tips at radius r need
            return 1.01 * r + name_width(font_for_row(max(r * step, MIN_ROW), n)[0]) + 0.45

        lo, hi = 0.0, max(disc / 2.0, 0.0)
        for _ in range(40):  # the largest tip radius whose names still fit on the disc
            mid = 0.5 * (lo + hi)
            lo, hi = (mid, hi) if room(mid) <= disc / 2.0 else (lo, mid)
        r_tip = lo
        row = r_tip * step
        font, small, lw = font_for_row(max(row, MIN_ROW), n)
        foot = foot_height(font, small, width)
        if row < MIN_ROW or r_tip < 0.5:
            f_min = font_for_row(MIN_ROW, n)
            need_disc = 2.0 * (1.01 * max(0.5, n * MIN_ROW / (2.0 * math.pi)) + name_width(f_min[0]) + 0.45)
            raise _too_small(size, n, "circular",
                             (need_disc + 2 * side, need_disc + top + foot_height(*f_min[:2], width)))
    cx = width / 2.0
    cy = foot + (height - top - foot) / 2.0
    per_unit = r_tip / span
    radius = x * per_unit
    angle = math.pi / 2.0 - step * y
    X = cx + radius * np.cos(angle)
    Y = cy + radius * np.sin(angle)
    order = _preorder(root, kids)
    branches, leaders = [], []
    for v in range(m):
        ks = kids[v]
        for c in ks:
            branches.append(np.array([[cx + radius[v] * math.cos(angle[c]), cy + radius[v] * math.sin(angle[c])],
                                      [X[c], Y[c]]]))
        if len(ks) > 1 and radius[v] > 0:
            branches.append(_arc(cx, cy, float(radius[v]), float(angle[ks[0]]), float(angle[ks[-1]])))
    end = 1.01 * r_tip
    names: list[tuple[float, float, float, str]] = []
    for i in range(n):
        a = float(angle[i])
        u = (math.cos(a), math.sin(a))
        if end - radius[i] > 0.015 * r_tip:
            leaders.append(np.array([[X[i], Y[i]], [cx + end * u[0], cy + end * u[1]]]))
        at = end + 4 * PT
        turn = math.degrees(a) % 360.0
        flip = 90.0 < turn < 270.0  # names on the left half read outwards from the right
        names.append((cx + at * u[0], cy + at * u[1], turn - 180.0 if flip else turn, "right" if flip else "left"))
    gap_rows = _gap_rows(kids, order, y, n)
    has_gap = np.isfinite(gap_rows)
    gap_heading = np.where(has_gap, math.pi / 2.0 - step * np.nan_to_num(gap_rows), np.nan)
    gap_x = np.where(has_gap, cx + radius * np.cos(gap_heading), np.nan)
    gap_y = np.where(has_gap, cy + radius * np.sin(gap_heading), np.nan)
    return Frame(width, height, X, Y, angle, gap_x, gap_y, gap_heading, step, branches, leaders, names, per_unit,
                 font, small, lw, foot, top, radius, _reach(radius, kids))
