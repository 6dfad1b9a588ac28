"""Weighted least-squares branch lengths of a given tree, and the fit of a tree
to a distance matrix (Fitch & Margoliash 1967).

The lengths l minimise Q(l) = sum over pairs i < j with d_ij != 0 of
((d_ij − h_ij(l)) / d_ij)^2, h_ij the path length between leaves i and j:
least squares with weights w_ij = 1 / d_ij^2, pairs at distance zero left out.
With A the path-incidence matrix (A[ij, e] = 1 when branch e lies on the path
between i and j) and W = diag(w), the lengths solve the normal equations
A^T W A l = A^T W d. They are found by conjugate gradients, preconditioned
by exact solves on the three branches at each node (:func:`star_preconditioner`):
each product A^T W A p is one O(n^2) pass over the matrix rows (:func:`cladewright._kernels.criteria.weighted_pass`), nothing of
size n x n is formed, and the iteration stops when the normal equations'
residual |A^T W (d − A l)| is at most :data:`WLS_TOLERANCE` times |A^T W d|.

References
----------
Fitch, W. M. & Margoliash, E. (1967) Construction of phylogenetic trees.
Science 155:279–284.
Hestenes, M. R. & Stiefel, E. (1952) Methods of conjugate gradients for solving
linear systems. J. Res. Natl. Bur. Stand. 49:409–436.
Saad, Y. (2003) Iterative Methods for Sparse Linear Systems, 2nd ed., SIAM
(preconditioned conjugate gradients, additive Schwarz).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import NamedTuple

import numpy as np
from numpy.typing import NDArray

from ..errors import CladewrightError
from .._kernels.criteria import subtree_pair_sums, weighted_pass
from ..matrix import DistanceMatrix
from ..tree import Tree
from .leaf_rooted import LeafRootedTree, hang_from_leaf

__all__ = ["WLS_TOLERANCE", "WeightedFit", "weighted_fit", "weighted_least_squares", "fit_of_lengths",
           "star_preconditioner"]

#: Relative residual of the normal equations at which conjugate gradients stop:
#: |A^T W (d − A l)| <= WLS_TOLERANCE * |A^T W d| (Euclidean norms over the branches).
WLS_TOLERANCE = 1e-10

# Recompute the residual from the lengths now and then, so that rounding in
# the updated residual cannot pile up over many steps (common practice).
_REFRESH = 50


class WeightedFit(NamedTuple):
    """How well a tree's path lengths fit a distance matrix (Fitch & Margoliash 1967)."""

    #: sum over pairs i < j with d_ij != 0 of ((d_ij − h_ij) / d_ij)^2.
    weighted_sum_of_squares: float
    #: 100 * sqrt(weighted_sum_of_squares / pairs), in percent; nan when no pair counts.
    percent_standard_deviation: float
    #: The number of pairs i < j with d_ij != 0.
    pairs: int


def fit_of_lengths(g: LeafRootedTree, work: NDArray[np.float64]) -> WeightedFit:
    """The weighted fit of lengths ``work`` on a hung tree (one O(n^2) pass).

    Parameters
    ----------
    g : LeafRootedTree
    work : float64 ndarray (m,)
        Length of the branch above each kept node.

    Returns
    -------
    WeightedFit

    References
    ----------
    Fitch & Margoliash (1967) Science 155:279–284.
    """
    _, squares, pairs = weighted_pass(g.wparent, g.pre, g.rows, g.values, work, 1.0, 0.0)
    psd = 100.0 * float(np.sqrt(squares / pairs)) if pairs else float("nan")
    return WeightedFit(float(squares), psd, int(pairs))


def weighted_fit(tree: Tree, dm: DistanceMatrix, *, source: str | None = None) -> WeightedFit:
    """The weighted sum of squares and percent standard deviation of a tree's
    own branch lengths against a distance matrix.

    Parameters
    ----------
    tree : cladewright.tree.Tree
        Any topology, rooted or not, with a length on every branch; leaves
        matched to ``dm`` by name.
    dm : cladewright.matrix.DistanceMatrix
    source : str, optional
        File name to put in error messages.

    Returns
    -------
    WeightedFit
        ``weighted_sum_of_squares`` = sum_{i<j, d_ij != 0} ((d_ij − h_ij) / d_ij)^2,
        ``percent_standard_deviation`` = 100 sqrt(weighted_sum_of_squares / N)
        and ``pairs`` = N, the number of pairs i < j with d_ij != 0 (pairs at
        distance zero have no relative error and are left out of both).

    References
    ----------
    Fitch & Margoliash (1967) Science 155:279–284.

    Example
    -------
    >>> from cladewright.matrix import DistanceMatrix
    >>> t = Tree([3, 3, 3, -1], [1.0, 2.0, 3.0, np.nan], ["a", "b", "c"])
    >>> dm = DistanceMatrix("abc", [[0, 3, 4], [3, 0, 5], [4, 5, 0]])
    >>> weighted_fit(t, dm).weighted_sum_of_squares
    0.0
    """
    g = hang_from_leaf(tree, dm, source=source)
    return fit_of_lengths(g, g.work_lengths(source))


def star_preconditioner(g: LeafRootedTree) -> Callable[[NDArray[np.float64]], NDArray[np.float64]]:
    """An additive Schwarz preconditioner for A^T W A over the stars of the tree.

    Each internal node's three branches make one block, solved exactly:
    P^-1 = sum over stars s of R_s^T (A^T W A)_ss^-1 R_s. Two branches at one
    node are crossed by nearly the same pairs, which makes A^T W A badly
    conditioned; a star block takes exactly that coupling out, where a diagonal
    scaling does not. A branch in no star (a polytomy's branches, the one
    branch of a two-leaf tree) is scaled by its diagonal entry.
    The blocks' entries are sums of w_ij over clades, one O(n^2) pass.

    Parameters
    ----------
    g : LeafRootedTree

    Returns
    -------
    callable
        r -> P^-1 r, on arrays of length m.

    References
    ----------
    Saad, Y. (2003) Iterative Methods for Sparse Linear Systems, 2nd ed., SIAM,
    ch. 14 (additive Schwarz); Hestenes & Stiefel (1952).
    """
    m = g.wparent.shape[0]
    n = g.n_leaves
    branches = g.branches
    if g.first_polytomy() < 0:
        kid1, kid2, sib = g.children_pairs()
        # across: sum of w over the pairs a branch separates (the diagonal of
        # A^T W A); halves: over the pairs between a node's two child clades
        diag, halves = subtree_pair_sums(g.wparent, g.pre, kid1, kid2, sib, g.rows, g.values, 1.0, True)
        u = branches[branches >= n]
        a, b = kid1[u], kid2[u]
    else:
        diag = weighted_pass(g.wparent, g.pre, g.rows, g.values, np.zeros(m), 0.0, 1.0)[0]
        u = a = b = np.zeros(0, np.int64)
        halves = np.zeros(m)
    star = np.stack([u, a, b], axis=1)
    h = halves[u]
    da, db = diag[a], diag[b]
    block = np.empty((u.size, 3, 3))
    block[:, 0, 0], block[:, 1, 1], block[:, 2, 2] = diag[u], da, db
    block[:, 0, 1] = block[:, 1, 0] = da - h   # pairs from X_a to outside X_u
    block[:, 0, 2] = block[:, 2, 0] = db - h
    block[:, 1, 2] = block[:, 2, 1] = h
    inverse = np.linalg.pinv(block, hermitian=True) if u.size else block
    alone = np.ones(m, bool)
    alone[star.ravel()] = False
    alone[g.pre[0]] = False
    alone &= g.wparent >= 0
    lone = np.flatnonzero(alone & (diag > 0))
    scale = 1.0 / diag[lone]
    flat = star.ravel()

    def apply(r: NDArray[np.float64]) -> NDArray[np.float64]:
        # an empty bincount is of integers
        z = np.bincount(flat, weights=np.einsum("kij,kj->ki", inverse, r[star]).ravel(),
                        minlength=m).astype(np.float64)
        z[lone] += scale * r[lone]
        return z

    return apply


def weighted_least_squares(g: LeafRootedTree, start: NDArray[np.float64] | None = None, *,
                           tol: float = WLS_TOLERANCE,
                           max_iterations: int | None = None) -> tuple[NDArray[np.float64], int]:
    """Weighted least-squares lengths of a hung tree, by preconditioned
    conjugate gradients on the normal equations.

    Parameters
    ----------
    g : LeafRootedTree
        Any topology.
    start : float64 ndarray (m,), optional
        Lengths to start from (e.g. the ordinary least-squares ones, close on
        tree-like data); zero by default.
    tol : float
        Stop when |A^T W (d − A l)| <= tol |A^T W d|.
    max_iterations : int, optional
        Default 10 times the number of branches, plus 100.

    Returns
    -------
    lengths : float64 ndarray (m,)
        On the branch above each kept node. A branch whose every crossing
        pair is at distance zero carries no weight and keeps its start.
    iterations : int

    Raises
    ------
    CladewrightError
        When the residual does not fall to ``tol`` within ``max_iterations``.

    References
    ----------
    Fitch & Margoliash (1967); Hestenes & Stiefel (1952).
    """
    m = g.wparent.shape[0]
    wp, pre, rows, d = g.wparent, g.pre, g.rows, g.values
    branches = g.branches
    b = weighted_pass(wp, pre, rows, d, np.zeros(m), 1.0, 0.0)[0]
    x = np.zeros(m) if start is None else np.array(start, dtype=np.float64)
    bnorm = float(np.linalg.norm(b[branches]))
    if bnorm == 0.0:
        # every distance is zero: no pair carries weight, nothing to fit
        return x, 0
    limit = 10 * branches.size + 100 if max_iterations is None else int(max_iterations)
    precondition = star_preconditioner(g)
    it = 0
    stalled = False
    while True:
        # the residual from the lengths themselves decides, not the updated one
        r = weighted_pass(wp, pre, rows, d, x, 1.0, 0.0)[0]
        rnorm = float(np.linalg.norm(r[branches]))
        if rnorm <= tol * bnorm:
            return x, it
        if it >= limit or stalled:
            raise CladewrightError(
                f"weighted least squares did not converge in {it} iterations (relative residual "
                f'{rnorm / bnorm:.3g}); the matrix may be far from tree-like: use criterion="ols"')
        z = precondition(r)
        p = z.copy()
        rz = float(r @ z)
        stalled = True
        while it < limit:
            q = -weighted_pass(wp, pre, rows, d, p, 0.0, 0.0)[0]
            pq = float(p @ q)
            if not pq > 0.0:
                break  # no descent left along p
            stalled = False
            alpha = rz / pq
            x += alpha * p
            it += 1
            if it % _REFRESH == 0:
                r = weighted_pass(wp, pre, rows, d, x, 1.0, 0.0)[0]
            else:
                r -= alpha * q
            if float(np.linalg.norm(r[branches])) <= tol * bnorm:
                break
            z = precondition(r)
            rz_new = float(r @ z)
            p = z + (rz_new / rz) * p
            rz = rz_new
