"""Internal: greedy balanced-minimum-evolution insertion behind
cladewright.build_tree(method="bme").

Taxa are added one at a time, in matrix order, each on the branch where the
balanced minimum-evolution length of the tree so far,

    L = sum over pairs i < j of 2^(1 − p_ij) d_ij   (Pauplin 2000),

is least; the branches are priced by one walk over the tree with the table
of average distances between subtrees, O(n^2 diam) in all
(:mod:`cladewright._kernels.insertion`).

References
----------
Desper, R. & Gascuel, O. (2002) Fast and accurate phylogeny reconstruction
algorithms based on the minimum-evolution principle. J. Comput. Biol.
9:687–705.
Pauplin, Y. (2000) J. Mol. Evol. 51:41–47.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._kernels.insertion import bme_insertion
from .search import search_table

__all__ = ["insertion_arrays"]


def insertion_arrays(values: ArrayLike) -> NDArray[np.int64]:
    """The topology of greedy BME insertion on a distance matrix.

    Parameters
    ----------
    values : array_like (n, n), n >= 3
        Symmetric distances with zero diagonal (float64 or float32; read,
        not copied when already a C-ordered float array).

    Returns
    -------
    parent : int64 ndarray (2n − 2,)
        Leaves 0..n−1 in matrix order, internal nodes n..2n−3, the root a
        basal trifurcation (common practice for unrooted trees), parent −1.
        Branch lengths are for the caller to fit (e.g. :func:`cladewright.build.criteria.fit_lengths`).

    References
    ----------
    Desper & Gascuel (2002) J. Comput. Biol. 9:687–705.

    Example
    -------
    >>> d = [[0, 3, 7, 8], [3, 0, 8, 9], [7, 8, 0, 5], [8, 9, 5, 0]]  # ((0,1),(2,3))
    >>> p = insertion_arrays(d)
    >>> bool(p[0] == p[1]) or bool(p[2] == p[3])
    True
    """
    d = np.asarray(values)
    if d.dtype not in (np.float32, np.float64):
        d = d.astype(np.float64)
    parent = bme_insertion(np.ascontiguousarray(d), search_table(d.shape[0])[0])
    # hung from leaf 0: its neighbour becomes the root
    first = int(np.flatnonzero(parent == 0)[0])
    parent[first] = -1
    parent[0] = first
    return parent
