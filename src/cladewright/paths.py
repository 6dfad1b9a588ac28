"""Internal: the longest-path pass behind midpoint_root and clusters_within.

Longest paths in a tree: every node's height and every clade's diameter
in one postorder pass, shared by midpoint rooting and by grouping taxa
within a divergence threshold.

With ``height(v)`` the longest path from ``v`` down to a leaf,

    height(v)   = max over children c of (height(c) + len(c)),
    diameter(v) = max( max over children c of diameter(c),
                       max over children a != b of (height(a) + len(a) + height(b) + len(b)) ),

so a node needs only the two longest downward paths through different
children, and the diameter of the whole tree is that of its top node. This
is exact for any signs of the lengths.

References
----------
Sokal, R. R. & Rohlf, F. J. (1962) Taxon 11:33-40 (cophenetic values of a
dendrogram). Longest path of a tree by one postorder pass: common practice.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["LongestPaths", "longest_paths"]


class LongestPaths(NamedTuple):
    """What :func:`longest_paths` finds, one entry per node."""

    #: float64 (m,): longest path from the node down to a leaf (a leaf is a
    #: path of length 0 to itself; -inf for an internal node without children).
    height: NDArray[np.float64]
    #: int64 (m,): the leaf at the end of that path (the node itself for a leaf).
    far_leaf: NDArray[np.int64]
    #: float64 (m,): longest leaf-to-leaf path inside the node's clade, -inf
    #: where there is none (a clade of one leaf).
    diameter: NDArray[np.float64]
    #: int64 (m, 3): that path's far end, its near end and its apex (the node
    #: where its two arms meet); the far end closes the longer arm. -1 where
    #: the diameter is -inf.
    ends: NDArray[np.int64]


def longest_paths(parent: ArrayLike, length: ArrayLike, post: ArrayLike, n_leaves: int) -> LongestPaths:
    """Height and far leaf of every node, diameter and its ends of every clade.

    Parameters
    ----------
    parent : int array (m,)
        Parent of each node, -1 for the top (and for nodes outside ``post``).
        Nodes 0..n_leaves-1 are leaves; a leaf may have children (a leaf at
        the top of an unrooted tree).
    length : float array (m,)
        Length of the branch to the parent; NaN counts as 0.
    post : int array
        The nodes to visit, in depth-first postorder of ``parent`` (children
        before their parent, a clade's nodes contiguous).
    n_leaves : int

    Returns
    -------
    LongestPaths
        Among paths of equal length the first found in ``post`` is kept: a
        clade's pair of arms wins over its own node's only when strictly
        longer, and the children are taken in the order of ``post``.

    Notes
    -----
    O(m), one pass; a node keeps the two longest downward paths through
    different children, so the two arms of a diameter never share a branch.

    References
    ----------
    Sokal & Rohlf (1962) Taxon 11:33-40.

    Example
    -------
    >>> p = longest_paths([3, 3, 4, 4, -1], [1.0, 2.0, 1.0, 0.5, np.nan], [0, 1, 3, 2, 4], 3)
    >>> p.diameter.tolist(), p.height.tolist()
    ([-inf, -inf, -inf, 3.0, 3.5], [0.0, 0.0, 0.0, 2.0, 2.5])
    >>> p.ends[4].tolist()
    [1, 2, 4]
    """
    n = int(n_leaves)
    par = np.asarray(parent, dtype=np.int64).tolist()
    m = len(par)
    ln = np.nan_to_num(np.asarray(length, dtype=np.float64), nan=0.0).tolist()
    best1 = [0.0 if v < n else -math.inf for v in range(m)]
    best2 = [-math.inf] * m
    leaf1 = [v if v < n else -1 for v in range(m)]
    leaf2 = [-1] * m
    diam = [-math.inf] * m
    end1, end2, apex = [-1] * m, [-1] * m, [-1] * m
    for v in np.asarray(post, dtype=np.int64).tolist():
        # The children are done: best1/best2 hold the two longest downward
        # paths through different children, diam the longest of their clades.
        b2 = best2[v]
        if b2 > -math.inf:
            pair = best1[v] + b2
            if pair > diam[v]:
                diam[v], end1[v], end2[v], apex[v] = pair, leaf1[v], leaf2[v], v
        p = par[v]
        if p < 0:
            continue
        if diam[v] > diam[p]:
            diam[p], end1[p], end2[p], apex[p] = diam[v], end1[v], end2[v], apex[v]
        c = best1[v] + ln[v]
        if c > best1[p]:
            best2[p], leaf2[p] = best1[p], leaf1[p]
            best1[p], leaf1[p] = c, leaf1[v]
        elif c > best2[p]:
            best2[p], leaf2[p] = c, leaf1[v]
    return LongestPaths(np.array(best1, dtype=np.float64), np.array(leaf1, dtype=np.int64),
                        np.array(diam, dtype=np.float64),
                        np.column_stack([end1, end2, apex]).astype(np.int64).reshape(m, 3))
