"""Internal: where each support label of a tree figure goes, clear of every line.

Each label tries a few spots in turn (above its branch, left of the node, where the branch holds
it; in its node's gap, see :mod:`cladewright.draw.geometry`; below its branch; past the node; in
the circular layout, round the node and then farther out along the gap) and takes the first whose
box meets no branch, leader, tip mark or label already placed, tested by clipping every segment
against the box (Liang & Barsky 1984).

References
----------
Liang, Y.-D. & Barsky, B. A. (1984) A new concept and method for line clipping. ACM Trans. Graph.
3:1-22.
"""

from __future__ import annotations

import math
from collections.abc import Iterator, Sequence

import numpy as np
from numpy.typing import NDArray

from .geometry import PT, Frame

__all__ = ["place_labels", "box_hits"]


def _segments(lines: Sequence[NDArray[np.float64]]) -> NDArray[np.float64]:
    parts = [np.column_stack([p[:-1], p[1:]]) for p in lines if len(p) > 1]
    return np.concatenate(parts) if parts else np.zeros((0, 4))


def box_hits(seg: NDArray[np.float64], half: NDArray[np.float64], cx: float, cy: float, heading: float,
             a: float, b: float) -> NDArray[np.bool_]:
    """Which segments meet a box.

    Parameters
    ----------
    seg : float array (k, 4)
        Segments ``x0, y0, x1, y1``.
    half : float array (k,)
        Half the width of each segment's line (a point obstacle is a segment of length 0).
    cx, cy, heading : float
        The box's centre and the direction of its long side (radians).
    a, b : float
        Half the box's length and height.

    Returns
    -------
    bool array (k,)

    References
    ----------
    Liang & Barsky (1984) ACM Trans. Graph. 3:1-22 (parametric clipping against a box).
    """
    c, s = math.cos(heading), math.sin(heading)
    px, py = seg[:, 0] - cx, seg[:, 1] - cy
    qx, qy = seg[:, 2] - cx, seg[:, 3] - cy
    x0, y0 = px * c + py * s, -px * s + py * c
    x1, y1 = qx * c + qy * s, -qx * s + qy * c
    ea, eb = a + half, b + half
    dx, dy = x1 - x0, y1 - y0
    lo = np.zeros(len(seg))
    hi = np.ones(len(seg))
    inside = np.ones(len(seg), dtype=bool)
    with np.errstate(divide="ignore", invalid="ignore"):
        for p, q in ((-dx, x0 + ea), (dx, ea - x0), (-dy, y0 + eb), (dy, eb - y0)):
            flat = p == 0
            inside &= ~(flat & (q < 0))
            r = q / p
            lo = np.where(p < 0, np.maximum(lo, r), lo)
            hi = np.where(p > 0, np.minimum(hi, r), hi)
    return inside & (lo <= hi)


def place_labels(frame: Frame, nodes: Sequence[int], sizes: Sequence[tuple[float, float]],
                 points: Sequence[tuple[float, float, float]]) -> tuple[list[tuple[float, float, float]], list[int]]:
    """Where each support label goes: its centre and direction, clear of every line.

    Parameters
    ----------
    frame : Frame
    nodes : sequence of int
        The node of each label.
    sizes : sequence of (float, float)
        Each label's width and height, inches (unturned).
    points : sequence of (x, y, radius)
        Marks to keep clear of besides the lines (tips, rings), inches.

    Returns
    -------
    spots : list of (x, y, heading)
        The centre of each label's box and the direction of its baseline, radians.
    crowded : list of int
        Nodes whose label found no clear spot (put above their branch regardless).
    """
    lines = _segments(frame.branches)
    leads = _segments(frame.leaders)
    pts = np.array([[px, py, px, py] for px, py, _ in points]).reshape(-1, 4)
    seg = np.concatenate([lines, leads, pts, np.zeros((6 * len(nodes), 4))])
    half = np.concatenate([np.full(len(lines), frame.lw * PT / 2), np.full(len(leads), 0.35 * frame.lw * PT),
                           np.array([r for _, _, r in points]), np.zeros(6 * len(nodes))])
    used = len(lines) + len(leads) + len(pts)
    pad = 1.0 * PT
    lo_x = np.minimum(seg[:, 0], seg[:, 2]) - half
    hi_x = np.maximum(seg[:, 0], seg[:, 2]) + half
    lo_y = np.minimum(seg[:, 1], seg[:, 3]) - half
    hi_y = np.maximum(seg[:, 1], seg[:, 3]) + half
    widest = float(half[:used].max()) if used else 0.0
    gap = (2.4 * frame.lw + 2.0) * PT  # clear of the ring a node with low support gets
    off = frame.lw * PT / 2 + 1.5 * PT

    def clear(cx: float, cy: float, heading: float, a: float, b: float) -> bool:
        reach = a + b + pad
        near = ~((hi_x[:used] < cx - reach) | (lo_x[:used] > cx + reach) | (hi_y[:used] < cy - reach)
                 | (lo_y[:used] > cy + reach))
        if not near.any():
            return True
        idx = np.flatnonzero(near)
        return not box_hits(seg[idx], half[idx], cx, cy, heading, a + pad, b + pad).any()

    def gap_spots(v: int, a: float, b: float) -> list[tuple[float, tuple[float, float, float]]]:
        """Spots in node v's gap (see the module's docstring), nearest first, with their distances."""
        if not np.isfinite(frame.gap_x[v]):
            return []
        g = float(frame.gap_heading[v])
        gx, gy = float(frame.gap_x[v]), float(frame.gap_y[v])
        far = gap
        if frame.row_angle > 0:
            # The gap widens outwards: from this distance on the label's height fits between the
            # rows on either side whatever lies there; nearer spots are tried first.
            need = (b + pad + widest) / math.sin(min(frame.row_angle / 2.0, math.pi / 2.0))
            far = max(gap, need - float(frame.radius[v]))  # type: ignore[index]
        steps = max(1, min(12, int(math.ceil((far - gap) / max(b, 1e-3)))))
        return [(d, (gx + (d + a) * math.cos(g), gy + (d + a) * math.sin(g), g))
                for d in (np.linspace(gap, far, steps + 1) if far > gap else [gap])]

    def spots(v: int, a: float, b: float) -> Iterator[tuple[float, float, float]]:
        """Where the label of node v may go, best first."""
        t = float(frame.heading[v])
        ux, uy, nx, ny = math.cos(t), math.sin(t), -math.sin(t), math.cos(t)
        vx, vy = float(frame.x[v]), float(frame.y[v])
        # Beside the branch only where the label fits between the node and the branch's start.
        along_branch = 2 * a + gap + 2 * pad <= float(frame.reach[v])
        if along_branch:  # above the branch, left of (inside) the node
            yield vx - (gap + a) * ux + (off + b) * nx, vy - (gap + a) * uy + (off + b) * ny, t
        in_gap = gap_spots(v, a, b)
        near = gap + 4 * b
        yield from (spot for d, spot in in_gap if d <= near)
        if along_branch:  # below the branch
            yield vx - (gap + a) * ux - (off + b) * nx, vy - (gap + a) * uy - (off + b) * ny, t
        yield vx + (gap + a) * ux + (off + b) * nx, vy + (gap + a) * uy + (off + b) * ny, t  # past the node
        if frame.row_angle > 0:  # round the node, nearest first, before going far out along the gap
            for k in (0.0, 1.0, 2.0, 3.0, 4.0, 6.0):
                rho = gap + a + k * b
                for j in range(16):
                    phi = t + j * math.pi / 8.0
                    yield vx + rho * math.cos(phi), vy + rho * math.sin(phi), t
        yield from (spot for d, spot in in_gap if d > near)

    out = []
    crowded: list[int] = []
    for v, (w, h) in zip(nodes, sizes):
        a, b = w / 2.0, h / 2.0
        chosen = next((sp for sp in spots(v, a, b) if clear(sp[0], sp[1], sp[2], a, b)), None)
        if chosen is None:
            crowded.append(v)
            # the farthest spot of the gap is clear of lines by construction; else above the branch
            in_gap = gap_spots(v, a, b)
            chosen = in_gap[-1][1] if in_gap else next(spots(v, a, b))
        out.append(chosen)
        cx, cy, hd = chosen
        c, s = math.cos(hd), math.sin(hd)
        corners = [(cx + i * a * c - j * b * s, cy + i * a * s + j * b * c) for i, j in ((-1, -1), (1, -1), (1, 1),
                                                                                        (-1, 1))]
        box = [corners[k] + corners[(k + 1) % 4] for k in range(4)] + [corners[0] + corners[2],
                                                                        corners[1] + corners[3]]
        seg[used:used + 6] = box
        half[used:used + 6] = 0.0
        blk = seg[used:used + 6]
        lo_x[used:used + 6] = np.minimum(blk[:, 0], blk[:, 2])
        hi_x[used:used + 6] = np.maximum(blk[:, 0], blk[:, 2])
        lo_y[used:used + 6] = np.minimum(blk[:, 1], blk[:, 3])
        hi_y[used:used + 6] = np.maximum(blk[:, 1], blk[:, 3])
        used += 6
    return out, crowded
