"""Rooted, ultrametric trees by reducible Lance–Williams linkage.

The four methods are rows of one coefficient table (Lance & Williams 1967),
run by the nearest-neighbour chain, which is exact for reducible linkages
(Murtagh 1983; Müllner 2011). A merge at distance d places the new node at
height d / 2; a branch's length is its parent's height minus its own.

References
----------
Lance, G. N. & Williams, W. T. (1967) Computer Journal 9:373–380.
Sokal, R. R. & Michener, C. D. (1958) Univ. Kansas Sci. Bull. 38:1409–1438
(UPGMA, WPGMA).
Murtagh, F. (1983) Computer Journal 26:354–359.
Müllner, D. (2011) arXiv:1109.2378.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..errors import InputError
from .._kernels.linkage import nn_chain_linkage
from .._kernels.matrix import condense_upper

__all__ = ["linkage_condensed", "LanceWilliams", "LINKAGE_METHODS", "linkage_arrays"]


class LanceWilliams(NamedTuple):
    """Coefficients of d(k, i∪j) = a_i d(k,i) + a_j d(k,j) + b d(i,j) + g |d(k,i) − d(k,j)|.

    With ``size_weighted`` the kernel uses a_i = n_i / (n_i + n_j) and
    a_j = n_j / (n_i + n_j) (cluster sizes) in place of ``ai`` and ``aj``.
    """

    ai: float
    aj: float
    beta: float
    gamma: float
    size_weighted: bool = False


#: Lance & Williams (1967), Table 1. A new method is a new row, provided it is
#: reducible (d(k, i∪j) >= min(d(k,i), d(k,j)) whenever i, j are closest):
#: the nearest-neighbour chain is exact only then.
LINKAGE_METHODS: dict[str, LanceWilliams] = {
    "single": LanceWilliams(0.5, 0.5, 0.0, -0.5),
    "complete": LanceWilliams(0.5, 0.5, 0.0, 0.5),
    "upgma": LanceWilliams(0.5, 0.5, 0.0, 0.0, size_weighted=True),
    "wpgma": LanceWilliams(0.5, 0.5, 0.0, 0.0),
}


def working_dtype(values: object) -> type[np.float32] | type[np.float64]:
    """float32 for a single-precision matrix (half the memory of a run), else float64."""
    return np.float32 if getattr(values, "dtype", None) == np.float32 else np.float64


def linkage_arrays(values: ArrayLike, method: str, sizes: ArrayLike | None = None
                   ) -> tuple[NDArray[np.int64], NDArray[np.float64], NDArray[np.float64]]:
    """Agglomerate a distance matrix into a rooted ultrametric tree.

    Parameters
    ----------
    values : array_like (n, n), n >= 2
        Symmetric distances with zero diagonal; only the upper triangle is
        read and the input is not changed. The work space is one condensed
        copy of that triangle, n (n − 1) / 2 numbers (half a square matrix),
        in float32 for a float32 matrix and in float64 otherwise.
    method : str
        A key of :data:`LINKAGE_METHODS`.
    sizes : int array_like (n,), optional
        How many sequences each row stands for (default 1 each). UPGMA weights
        its averages by them, so a group of k identical sequences entered
        once with size k gives the tree UPGMA gives with all k rows; the
        other methods do not depend on sizes.

    Returns
    -------
    parent : int64 ndarray (2n − 1,)
        Leaves 0..n−1 in matrix order, internal nodes n..2n−2 in order of
        height, root 2n − 2 with parent −1.
    length : float64 ndarray (2n − 1,)
        Parent height − node height (>= 0); nan for the root.
    height : float64 ndarray (2n − 1,)
        Node heights (half the merge distance).

    Notes
    -----
    Ties follow the chain's rule (see
    :func:`cladewright._kernels.linkage.nn_chain_linkage`): the same input
    gives the same tree every run.

    References
    ----------
    Lance & Williams (1967); Murtagh (1983); Müllner (2011).

    Example
    -------
    >>> p, l, h = linkage_arrays([[0, 2, 6], [2, 0, 6], [6, 6, 0]], "upgma")
    >>> h[-2:].tolist()
    [1.0, 3.0]
    """
    square = np.ascontiguousarray(values, dtype=working_dtype(values))
    n = square.shape[0]
    # Allocated here rather than in the kernel so that numpy's large-array
    # allocator can back it with huge pages (fewer TLB misses on the
    # one-entry-per-row column reads).
    C = np.empty(n * (n - 1) // 2, square.dtype)
    condense_upper(square, C)
    del square
    return linkage_condensed(C, n, method, sizes)


def linkage_condensed(C: NDArray[np.floating], n: int, method: str, sizes: ArrayLike | None = None
                      ) -> tuple[NDArray[np.int64], NDArray[np.float64], NDArray[np.float64]]:
    """:func:`linkage_arrays` on the upper triangle of the matrix, condensed row by row
    (float64 or float32, n (n − 1) / 2 entries, see :func:`cladewright._kernels.matrix.condense_upper`),
    used as the work space and overwritten: for a caller that fills the triangle itself, e.g. from a store,
    with no square matrix in memory."""
    row = LINKAGE_METHODS[method]
    sizes = np.ones(n, np.int64) if sizes is None else np.array(sizes, dtype=np.int64).reshape(-1)
    if sizes.shape != (n,) or (n and sizes.min() < 1):
        raise InputError(f"sizes must hold {n} whole numbers >= 1, one per taxon of the matrix")
    parent, height = nn_chain_linkage(C, n, float(row.ai), float(row.aj), float(row.beta),
                                      float(row.gamma), bool(row.size_weighted), sizes)
    del C
    length = np.full(parent.shape[0], np.nan)
    has = parent >= 0
    length[has] = height[parent[has]] - height[has]
    return parent, length, height
