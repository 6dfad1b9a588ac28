"""Branch lengths and tree length of a given topology under balanced minimum
evolution (BME), ordinary least squares (OLS) and weighted least squares (WLS).

A tree is seen as unrooted (a rooted tree's two branches at the root are one
branch). Hang it from a leaf: the branch above node v then has the clade X_v
on one side and U_v, the rest, on the other; X_v splits into its children's
clades A and B, and U_v, at v's parent p, into the sibling's clade C = X_s and
D = U_p. For subtrees X and Y, Δ_{X|Y} is an average of d_ij over i in X, j in Y.

BME (Pauplin 2000; Desper & Gascuel 2002) uses the balanced average, which
weights leaf i of subtree X by 2^-(edges from X's first node to i), and

    l(v) = 1/4 (Δ_AC + Δ_AD + Δ_BC + Δ_BD) − 1/2 (Δ_AB + Δ_CD)
         = Δ_{X_v|U_v} − 1/2 (Δ_AB + Δ_CD)

(Δ_AB = 0 for a leaf v; Δ_CD = 0 for the branch to the leaf the tree hangs
from). Summed over the branches this is Pauplin's tree length
L = sum_{i<j} 2^(1 − p_ij) d_ij, p_ij the number of branches between i and j.

OLS (Vach 1989; Rzhetsky & Nei 1993; in the form of Desper & Gascuel 2002)
uses the plain average, S_XY / (n_X n_Y) with S_XY the sum of d_ij, and

    internal:  l = 1/2 [λ (Δ_AC + Δ_BD) + (1 − λ)(Δ_AD + Δ_BC) − Δ_AB − Δ_CD],
               λ = (n_A n_D + n_B n_C) / ((n_A + n_B)(n_C + n_D)),
    to leaf i, with the other side split into A and B:
               l = 1/2 (Δ_Ai + Δ_Bi − Δ_AB);

its tree length is the sum of these lengths. WLS (Fitch & Margoliash 1967) is
in :mod:`cladewright.build.weighted`. Every fit is O(n^2) time and O(n)
memory beyond the matrix (:mod:`cladewright._kernels.criteria`).

References
----------
Pauplin, Y. (2000) Direct calculation of a tree length using a distance
matrix. J. Mol. Evol. 51:41–47.
Desper, R. & Gascuel, O. (2002) Fast and accurate phylogeny reconstruction
algorithms based on the minimum-evolution principle. J. Comput. Biol.
9:687–705.
Rzhetsky, A. & Nei, M. (1993) Theoretical foundation of the minimum-evolution
method of phylogenetic inference. Mol. Biol. Evol. 10:1073–1095.
Vach, W. (1989) Least squares approximation of additive trees. In Opitz (ed.)
Conceptual and Numerical Analysis of Data, Springer, 230–238.
Fitch, W. M. & Margoliash, E. (1967) Science 155:279–284.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..choices import CRITERIA, LENGTH_CRITERIA, Criterion, LengthCriterion
from ..errors import InputError
from .._kernels.criteria import subtree_pair_sums
from ..matrix import DistanceMatrix
from ..tree import Tree
from .leaf_rooted import LeafRootedTree, hang_from_leaf
from .weighted import fit_of_lengths, weighted_least_squares

__all__ = ["Criterion", "CRITERIA", "LengthCriterion", "LENGTH_CRITERIA", "fit_lengths", "fit_lengths_with_info",
           "minimum_evolution_lengths",
           "tree_length", "balanced_lengths", "ols_lengths"]


def balanced_lengths(g: LeafRootedTree) -> NDArray[np.float64]:
    """BME lengths of a binary hung tree, on the branch above each kept node.

    References
    ----------
    Desper & Gascuel (2002) J. Comput. Biol. 9:687–705; Pauplin (2000).
    """
    kid1, kid2, sib = g.children_pairs()
    across, halves = subtree_pair_sums(g.wparent, g.pre, kid1, kid2, sib, g.rows, g.values, 0.5)
    v = g.branches
    p = g.wparent[v]
    inner = p != g.top
    far = np.zeros(g.wparent.shape[0])
    # Δ_{C|D} from Δ_{X_s|U_s} = 1/2 (Δ_{X_s|X_v} + Δ_{X_s|U_p}), U_s split at p
    far[v[inner]] = 2.0 * across[sib[v[inner]]] - halves[p[inner]]
    out = np.zeros(g.wparent.shape[0])
    out[v] = across[v] - 0.5 * (halves[v] + far[v])
    return out


def ols_lengths(g: LeafRootedTree) -> NDArray[np.float64]:
    """OLS lengths of a binary hung tree, on the branch above each kept node.

    References
    ----------
    Vach (1989); Rzhetsky & Nei (1993) Mol. Biol. Evol. 10:1073–1095;
    Desper & Gascuel (2002) J. Comput. Biol. 9:687–705.
    """
    m = g.wparent.shape[0]
    n = g.n_leaves
    out = np.zeros(m)
    if n == 2:
        out[g.branches] = float(g.values[g.rows[0], g.rows[1]])
        return out
    kid1, kid2, sib = g.children_pairs()
    across, halves = subtree_pair_sums(g.wparent, g.pre, kid1, kid2, sib, g.rows, g.values, 1.0)
    size = g.size.astype(np.float64)
    v = g.branches
    p = g.wparent[v]
    inner = p != g.top
    # F(u) = S(X_u, U_parent(u)): X_u against everything outside its parent's clade
    F = np.zeros(m)
    F[v[inner]] = across[v[inner]] - halves[p[inner]]
    leaf = v < n
    # the branch to the leaf the tree hangs from: A, B = the clades of its child
    c = v[~inner][0]
    a, b = kid1[c], kid2[c]
    out[c] = 0.5 * (F[a] / size[a] + F[b] / size[b] - halves[c] / (size[a] * size[b]))
    # branches to the other leaves: i = v, A = X_s, B = U_p
    u = v[inner & leaf]
    pu, s = g.wparent[u], sib[u]
    nC, nD = size[s], n - size[pu]
    out[u] = 0.5 * (halves[pu] / nC + F[u] / nD - F[s] / (nC * nD))
    # internal branches: A, B = the children's clades, C = X_s, D = U_p
    u = v[inner & ~leaf]
    pu, s, a, b = g.wparent[u], sib[u], kid1[u], kid2[u]
    nA, nB, nX, nC, nD = size[a], size[b], size[u], size[s], n - size[pu]
    nY = n - nX
    # λ(Δ_AC + Δ_BD) + (1 − λ)(Δ_AD + Δ_BC), regrouped by side: the sums of A
    # and of B against all of Y, and of all of X against C and against D
    mixed = (F[a] * nB / nA + F[b] * nA / nB + halves[pu] * nD / nC + F[u] * nC / nD) / (nX * nY)
    out[u] = 0.5 * (mixed - halves[u] / (nA * nB) - F[s] / (nC * nD))
    return out


def _criterion(criterion: object, allowed: tuple[str, ...], source: str | None) -> str:
    c = criterion.lower() if isinstance(criterion, str) else None
    if c not in allowed:
        raise InputError(f"unknown criterion criterion={criterion!r}; choose one of {', '.join(allowed)}",
                         source=source)
    return c


def _require_binary(g: LeafRootedTree, criterion: str, source: str | None) -> None:
    v = g.first_polytomy()
    if v < 0:
        return
    tree = g.tree
    leaf = v
    while leaf >= tree.n_leaves:
        leaf = int(tree.children(leaf)[0])
    raise InputError(f"the tree is not binary: a node has {int(g.n_children[v]) + 1} branches (on the path to "
                     f"taxon {tree.leaf_names[leaf]!r}); {criterion} needs a binary tree: resolve polytomies "
                     'first (resolve_polytomies(tree) gives zero-length branches), or use criterion="wls"',
                     source=source)


def minimum_evolution_lengths(g: LeafRootedTree, criterion: str, source: str | None = None
                              ) -> NDArray[np.float64]:
    """The BME or OLS lengths of a binary hung tree, per node (see :func:`balanced_lengths`, :func:`ols_lengths`).

    Raises
    ------
    InputError
        When the tree has a polytomy.
    """
    _require_binary(g, criterion, source)
    return balanced_lengths(g) if criterion == "bme" else ols_lengths(g)


def _work_lengths(g: LeafRootedTree, criterion: str, source: str | None) -> tuple[NDArray[np.float64], int | None]:
    if criterion == "wls":
        start = ols_lengths(g) if g.first_polytomy() < 0 else None
        return weighted_least_squares(g, start)
    return minimum_evolution_lengths(g, criterion, source), None


def fit_lengths_with_info(tree: Tree, dm: DistanceMatrix, criterion: Criterion = "bme", *,
                          source: str | None = None, fit: bool = True) -> tuple[Tree, dict[str, Any]]:
    """Fit branch lengths to a given tree and report on the fit.

    Parameters
    ----------
    tree, dm, criterion, source
        As for :func:`fit_lengths`.
    fit : bool
        Compute the weighted fit of the fitted tree (one more O(n^2) pass);
        without it those three entries are None.

    Returns
    -------
    tree : cladewright.tree.Tree
        As :func:`fit_lengths` returns it.
    info : dict
        ``criterion``; ``tree_length`` (the sum of the fitted lengths over
        the branches of the unrooted tree); ``negative_branches`` (how many
        of those are < 0); ``weighted_sum_of_squares``,
        ``percent_standard_deviation`` and ``pairs`` of the fitted tree
        (:class:`cladewright.build.weighted.WeightedFit`, whatever the
        criterion, so that fits can be compared); ``iterations`` of
        conjugate gradients for wls (None otherwise).

    References
    ----------
    Pauplin (2000); Desper & Gascuel (2002); Rzhetsky & Nei (1993);
    Fitch & Margoliash (1967).
    """
    c = _criterion(criterion, CRITERIA, source)
    g = hang_from_leaf(tree, dm, source=source)
    work, iterations = _work_lengths(g, c, source)
    on_branches = work[g.branches]
    stats: dict[str, Any] = (fit_of_lengths(g, work)._asdict() if fit else
                             {"weighted_sum_of_squares": None, "percent_standard_deviation": None, "pairs": None})
    info = {"criterion": c, "tree_length": float(on_branches.sum()),
            "negative_branches": int(np.count_nonzero(on_branches < 0)), **stats, "iterations": iterations}
    return g.with_lengths(work), info


def fit_lengths(tree: Tree, dm: DistanceMatrix, criterion: Criterion = "bme", *,
                source: str | None = None) -> Tree:
    """A new tree of the same topology with branch lengths fitted to a matrix.

    Parameters
    ----------
    tree : cladewright.tree.Tree
        The topology; leaves matched to ``dm`` by name. Taken as unrooted: an
        unrooted tree with a basal trifurcation is the normal form, and a
        rooted binary tree is read as the unrooted tree it stands for (its
        two branches at the root share one fitted length, in proportion to
        their given lengths). bme and ols need a binary tree; wls takes any.
    dm : cladewright.matrix.DistanceMatrix
        Exactly the tree's taxa, in any order.
    criterion : {"bme", "ols", "wls"}
        Balanced minimum evolution, ordinary least squares, or weighted
        least squares with weights 1 / d^2 (pairs at distance zero left out).
    source : str, optional
        File name to put in error messages.

    Returns
    -------
    cladewright.tree.Tree
        Same nodes, names, support, labels and rootedness; the fitted
        lengths, kept as computed (they may be negative).

    Raises
    ------
    InputError
        When taxa differ, the tree has a polytomy (bme, ols), fewer than two
        leaves, or a distance is not finite.
    CladewrightError
        When wls does not converge (see :mod:`cladewright.build.weighted`).

    References
    ----------
    Pauplin (2000) J. Mol. Evol. 51:41–47; Desper & Gascuel (2002) J. Comput.
    Biol. 9:687–705; Rzhetsky & Nei (1993) Mol. Biol. Evol. 10:1073–1095;
    Vach (1989); Fitch & Margoliash (1967) Science 155:279–284.

    Example
    -------
    >>> from cladewright.matrix import DistanceMatrix
    >>> t = Tree([3, 3, 3, -1], [0.0, 0.0, 0.0, np.nan], ["a", "b", "c"])
    >>> dm = DistanceMatrix("abc", [[0, 3, 4], [3, 0, 5], [4, 5, 0]])
    >>> [float(x) for x in fit_lengths(t, dm, "bme").length[:3]]
    [1.0, 2.0, 3.0]
    """
    return fit_lengths_with_info(tree, dm, criterion, source=source, fit=False)[0]


def tree_length(tree: Tree, dm: DistanceMatrix, criterion: LengthCriterion = "bme", *,
                source: str | None = None) -> float:
    """The minimum-evolution length of a given topology: the sum of its
    fitted branch lengths.

    Parameters
    ----------
    tree : cladewright.tree.Tree
        A binary topology (read as unrooted); leaves matched to ``dm`` by name.
    dm : cladewright.matrix.DistanceMatrix
    criterion : {"bme", "ols"}
        bme: Pauplin's length sum_{i<j} 2^(1 − p_ij) d_ij; ols: the sum of
        the ordinary least-squares lengths (Rzhetsky & Nei 1993).
    source : str, optional

    Returns
    -------
    float

    References
    ----------
    Pauplin (2000) J. Mol. Evol. 51:41–47; Rzhetsky & Nei (1993) Mol. Biol.
    Evol. 10:1073–1095.

    Example
    -------
    >>> from cladewright.matrix import DistanceMatrix
    >>> t = Tree([3, 3, 3, -1], [np.nan] * 4, ["a", "b", "c"])
    >>> tree_length(t, DistanceMatrix("abc", [[0, 3, 4], [3, 0, 5], [4, 5, 0]]))
    6.0
    """
    if isinstance(criterion, str) and criterion.lower() == "wls":
        raise InputError("tree_length takes criterion 'bme' or 'ols' (minimum-evolution lengths); for weighted "
                         "least squares, fit_lengths_with_info(tree, dm, 'wls') gives the tree length and the fit",
                         source=source)
    c = _criterion(criterion, LENGTH_CRITERIA, source)
    g = hang_from_leaf(tree, dm, source=source)
    _require_binary(g, c, source)
    work = balanced_lengths(g) if c == "bme" else ols_lengths(g)
    return float(work[g.branches].sum())
