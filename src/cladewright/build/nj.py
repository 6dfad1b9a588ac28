"""Internal: the neighbour-joining and BIONJ step behind cladewright.build_tree.

Unrooted trees by neighbour joining and BIONJ.

Thin wrapper around :func:`cladewright._kernels.nj.nj_kernel`, which does the
work with an exact bounded pair search (Simonsen, Mailund & Pedersen 2008).

References
----------
Saitou, N. & Nei, M. (1987) Mol. Biol. Evol. 4:406–425.
Studier, J. A. & Keppler, K. J. (1988) Mol. Biol. Evol. 5:729–731.
Gascuel, O. (1997) Mol. Biol. Evol. 14:685–695.
Simonsen, M., Mailund, T. & Pedersen, C. N. S. (2008) WABI, LNCS 5251.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .linkage import working_dtype
from .._kernels.nj import LIST_LENGTH, N_CLASSES, ROW_SWITCH, nj_kernel

__all__ = ["nj_arrays"]


def nj_arrays(values: ArrayLike, bionj: bool = False, list_length: int = LIST_LENGTH,
              n_classes: int = N_CLASSES, overwrite: bool = False, row_switch: float = ROW_SWITCH
              ) -> tuple[NDArray[np.int64], NDArray[np.float64]]:
    """Neighbour joining (or BIONJ) on a distance matrix.

    Parameters
    ----------
    values : array_like (n, n), n >= 3
        Symmetric distances with zero diagonal (float64 or float32; one
        float64 copy is made, plus a second for BIONJ's variances).
    bionj : bool
        Gascuel's (1997) variance-weighted reduction instead of the
        canonical one.
    list_length, n_classes : int
        Sorted entries kept per row and R class, and the number of R classes,
        of the bounded search (speed only: the tree is the same).
    overwrite : bool
        Use ``values`` itself as the work space when it is a C-ordered float64
        or float32 array (its contents are then lost): no copy, for callers
        that filled the matrix for this purpose.
    row_switch : float
        Lists rebuilt or rows read in full per join, as a fraction of the
        clusters left (over 64 joins), past which the search keeps a lower
        bound per row instead, for matrices far from tree-like; 0 from the
        start, inf never (speed only).

    Returns
    -------
    parent : int64 ndarray (2n − 2,)
        Leaves 0..n−1 in matrix order; the t-th join is node n + t; the root
        2n − 3 joins the last three clusters (a basal trifurcation, common
        practice for unrooted trees) and has parent −1.
    length : float64 ndarray (2n − 2,)
        Branch lengths as computed (may be negative); nan for the root.

    Notes
    -----
    The pair joined is the least Q(i, j) = (r − 2) d(i, j) − R_i − R_j;
    ties go to the lowest (i, j), i < j, in row-major order of the current
    clusters, where a joined pair's new cluster takes the smaller index and
    the larger is removed. This is exactly the choice of a plain O(n^3) scan.
    With four clusters left a pair and its complement always tie, so the
    pair is taken among those with the first cluster, as the exact scan
    would, without letting rounding decide.

    References
    ----------
    Saitou & Nei (1987); Studier & Keppler (1988); Gascuel (1997).

    Example
    -------
    >>> d = [[0, 3, 4, 5], [3, 0, 5, 6], [4, 5, 0, 5], [5, 6, 5, 0]]
    >>> p, l = nj_arrays(d)
    >>> l[:2].tolist()
    [1.0, 2.0]
    """
    own = overwrite and isinstance(values, np.ndarray) and values.flags.c_contiguous and values.flags.writeable \
        and values.dtype in (np.float32, np.float64)
    D = values if own else np.array(values, dtype=working_dtype(values), order="C", copy=True)
    return nj_kernel(D, bool(bionj), int(list_length), int(n_classes), float(row_switch))
