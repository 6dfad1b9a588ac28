"""How well a tree's path lengths fit the distances it was built from.

References
----------
Sokal, R. R. & Rohlf, F. J. (1962) The comparison of dendrograms by objective
methods. Taxon 11:33–40 (cophenetic correlation).
Fitch, W. M. & Margoliash, E. (1967) Construction of phylogenetic trees.
Science 155:279–284 (percent standard deviation).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Callable

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..choices import LINKAGE_METHODS, METHODS
from ..errors import InputError
from .._kernels.patristic import fit_sums, leaf_intervals, patristic_rows, upper_pearson, upper_relative_squares

if TYPE_CHECKING:
    from ..matrix import DistanceMatrix
    from ..tree import Tree

__all__ = ["fit_statistic", "fit_from_rows", "cophenetic_correlation", "percent_standard_deviation",
           "COPHENETIC", "PSD"]

COPHENETIC = "cophenetic correlation"
PSD = "percent standard deviation"


def cophenetic_correlation(patristic: ArrayLike, distances: ArrayLike) -> float:
    """Pearson correlation of the pairs i < j of patristic and input distances.

    Parameters
    ----------
    patristic, distances : float ndarray (n, n)
        Same taxon order.

    Returns
    -------
    float
        r in [−1, 1]; nan when either side is constant or n < 3.

    References
    ----------
    Sokal & Rohlf (1962) Taxon 11:33–40.
    """
    return float(upper_pearson(np.ascontiguousarray(patristic, dtype=np.float64),
                               np.ascontiguousarray(distances, dtype=np.float64)))


def percent_standard_deviation(patristic: ArrayLike, distances: ArrayLike) -> float:
    """Fitch & Margoliash's percent standard deviation.

    PSD = 100 * sqrt( sum_{i<j, d_ij != 0} ((d_ij − p_ij) / d_ij)^2 / N ),
    N = the number of pairs i < j with d_ij != 0 (n(n−1)/2 when no distance
    is zero): pairs at distance zero have no relative error and are left out
    of both the sum and the count.

    Parameters
    ----------
    patristic, distances : float ndarray (n, n)
        Path lengths p and input distances d, same taxon order.

    Returns
    -------
    float
        PSD in percent; nan when every distance is zero.

    References
    ----------
    Fitch & Margoliash (1967) Science 155:279–284.
    """
    total, cnt = upper_relative_squares(np.ascontiguousarray(distances, dtype=np.float64),
                                        np.ascontiguousarray(patristic, dtype=np.float64))
    if cnt == 0:
        return float("nan")
    return float(100.0 * np.sqrt(total / cnt))


def fit_statistic(tree: Tree, dm: DistanceMatrix, method: str | None = None) -> tuple[str, float]:
    """The fit of a tree to a distance matrix.

    Parameters
    ----------
    tree : cladewright.tree.Tree
        Its leaves must all be taxa of ``dm`` (any order).
    dm : cladewright.matrix.DistanceMatrix
    method : str, optional
        The method that built the tree. Without it, a rooted tree is taken
        for a linkage tree and an unrooted one for a joining tree.

    Returns
    -------
    (name, value) : (str, float)
        ("cophenetic correlation", r) for linkage trees (upgma, wpgma,
        single, complete); ("percent standard deviation", psd) for nj and
        bionj trees.

    References
    ----------
    Sokal & Rohlf (1962); Fitch & Margoliash (1967).
    """
    names = tuple(dm.names)
    leaves = tuple(tree.leaf_names)
    values = np.asarray(dm.values)
    if leaves != names:
        pos = {x: i for i, x in enumerate(names)}
        missing = [x for x in leaves if x not in pos]
        if missing or len(leaves) != len(names):
            what = f"taxon {missing[0]!r} is not in the matrix" if missing else \
                f"the tree has {len(leaves)} leaves and the matrix {len(names)} taxa"
            raise InputError(f"{what}; give the matrix the tree was built from")
        idx = np.array([pos[x] for x in leaves], dtype=np.int64)
        values = values[np.ix_(idx, idx)]
    P = tree.patristic()
    if method is None:
        linkage = bool(tree.rooted)
    else:
        method = str(method).lower()
        if method not in METHODS:
            raise InputError(f"unknown tree method {method!r}; choose one of {', '.join(METHODS)}")
        linkage = method in LINKAGE_METHODS
    if linkage:
        return COPHENETIC, cophenetic_correlation(P, values)
    return PSD, percent_standard_deviation(P, values)


def fit_from_rows(tree: Tree, rows: Callable[[int, int], NDArray[np.floating]], block: int,
                  method: str) -> tuple[str, float]:
    """:func:`fit_statistic` with the distances read a block of rows at a time,
    for a matrix that is not held in memory (a store): the same value, bit
    for bit, with no n x n array of distances or path lengths.

    Parameters
    ----------
    tree : cladewright.tree.Tree
        Leaves 0..n−1 in the matrix's order.
    rows : callable
        ``rows(r0, r1)`` gives rows r0..r1 of the distances, (r1 − r0, n).
    block : int
        Rows per call.
    method : str
        The method that built the tree (linkage trees: cophenetic correlation,
        read twice, as it needs the means first; the others: PSD, read once).

    References
    ----------
    Sokal & Rohlf (1962); Fitch & Margoliash (1967).
    """
    n = tree.n_leaves
    parent = np.ascontiguousarray(tree.parent)
    length = np.nan_to_num(np.asarray(tree.length, dtype=np.float64), nan=0.0)
    depth, seq, lo, hi = leaf_intervals(parent, length, np.ascontiguousarray(tree.postorder()), n)
    linkage = str(method).lower() in LINKAGE_METHODS

    def sweep(mx: float, my: float) -> NDArray[np.float64]:
        sums = np.zeros(8)
        for r0 in range(0, n, block):
            r1 = min(n, r0 + block)
            d = np.ascontiguousarray(rows(r0, r1))  # float32 rows are widened in the sums, exactly
            fit_sums(d, patristic_rows(parent, depth, seq, lo, hi, r0, r1), r0, sums, mx, my)
        return sums

    first = sweep(0.0, 0.0)
    if not linkage:
        return PSD, float(100.0 * np.sqrt(first[6] / first[7])) if first[7] else float("nan")
    if first[0] < 2.0:
        return COPHENETIC, float("nan")
    second = sweep(first[1] / first[0], first[2] / first[0])
    sxx, syy, sxy = second[3], second[4], second[5]
    # upper_pearson's order: distances are its Y, path lengths its X
    if sxx <= 0.0 or syy <= 0.0:
        return COPHENETIC, float("nan")
    return COPHENETIC, float(sxy / np.sqrt(syy * sxx))
