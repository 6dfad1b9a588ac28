"""Topology search by nearest-neighbour interchanges (NNI) under balanced
minimum evolution (balanced NNI) or ordinary least squares (FastNNI), and by
subtree pruning and regrafting (SPR) under balanced minimum evolution.

Each interchange swaps two of the four subtrees around an internal branch.
The search takes, again and again, the interchange that lowers the
criterion's tree length most, until none lowers it: a local optimum. The
falls are read from a table of average distances between subtrees, updated
after each interchange in O(n diam) and built afresh, in O(n^2), only when a
round ends (:mod:`cladewright._kernels.nni`); the tree is never fitted as a
whole during the search. BME tree length (Pauplin 2000):

    L = sum over pairs i < j of 2^(1 − p_ij) d_ij,   p_ij the branches between i and j;

the OLS length is the sum of the least-squares branch lengths (Rzhetsky &
Nei 1993). On a tree metric the BME tree is the true tree (Desper & Gascuel
2004), and NNI from any start reaches it (Desper & Gascuel 2002). SPR moves
a clade to any other branch, its fall in BME length summed from the NNI falls
along the path between the two branches (Hordijk & Gascuel 2005), every clade
tried once per O(n^2) round (:mod:`cladewright._kernels.spr`).

References
----------
Desper, R. & Gascuel, O. (2002) Fast and accurate phylogeny reconstruction
algorithms based on the minimum-evolution principle. J. Comput. Biol.
9:687–705.
Desper, R. & Gascuel, O. (2004) Theoretical foundation of the balanced
minimum evolution method of phylogenetic inference and its relationship to
weighted least-squares tree fitting. Mol. Biol. Evol. 21:587–598.
Hordijk, W. & Gascuel, O. (2005) Improving the efficiency of SPR moves in
phylogenetic tree search methods based on maximum likelihood. Bioinformatics
21:4338–4347.
Pauplin, Y. (2000) J. Mol. Evol. 51:41–47.
Rzhetsky, A. & Nei, M. (1993) Mol. Biol. Evol. 10:1073–1095.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray

from ..choices import REFINEMENTS
from ..errors import InputError
from .._kernels.nni import hang_children, nni_search
from .._kernels.spr import spr_search
from ..matrix import DistanceMatrix
from ..memory import table_itemsize
from ..tree import Tree
from .criteria import LENGTH_CRITERIA, LengthCriterion, fit_lengths_with_info, minimum_evolution_lengths
from .leaf_rooted import LeafRootedTree, hang_from_leaf

__all__ = ["refine_tree", "refine_tree_with_info", "refinement_name", "search_table", "tree_from_hung"]


def refinement_name(refine: object, *, source: str | None = None) -> str:
    """The refinement ``refine`` stands for: "none" (also for None), "nni" or "spr".

    Raises
    ------
    InputError
        For any other value.
    """
    r = "none" if refine is None else (refine.lower() if isinstance(refine, str) else None)
    if r not in REFINEMENTS:
        raise InputError(f"unknown refinement refine={refine!r}; choose None or one of {', '.join(REFINEMENTS)}",
                         source=source)
    return r


def tree_from_hung(parent: NDArray[np.int64], top: int, names: tuple[str, ...]) -> Tree:
    """The unrooted Tree of a binary tree hung from leaf ``top``: the leaf's
    neighbour becomes the root, with three branches (common practice for
    unrooted trees); lengths are left unset (nan).

    Parameters
    ----------
    parent : int64 ndarray (2n − 2,)
        Parent of each node, −1 at ``top``; leaves 0..n−1.
    top : int
    names : tuple of str
        The leaf names.

    Returns
    -------
    cladewright.tree.Tree
    """
    out = np.array(parent, dtype=np.int64)
    first = int(np.flatnonzero(out == top)[0])
    out[first] = -1
    out[top] = first
    return Tree(out, np.full(out.shape[0], np.nan), names)


def _hung_arrays(g: LeafRootedTree, search: str, source: str | None
                 ) -> tuple[NDArray[np.int64], NDArray[np.int64], NDArray[np.int64]]:
    """The tree hung from its first leaf as a binary tree, nodes renumbered in
    preorder (leaves 0..n−1, internal nodes n..2n−3, so that a clade's rows
    of the search's table lie close together), each leaf's matrix row, and
    each new leaf's number in the tree."""
    v = g.first_polytomy()
    if v >= 0:
        raise InputError(f"the tree is not binary: a node has {int(g.n_children[v]) + 1} branches; "
                         f"{search.upper()} needs a binary tree: resolve polytomies first (resolve_polytomies)",
                         source=source)
    n = g.n_leaves
    kept = g.pre
    new = np.full(g.tree.n_nodes, -1, np.int64)
    leaf = kept < n
    leaf_order = kept[leaf]
    new[leaf_order] = np.arange(n)
    new[kept[~leaf]] = n + np.arange(int(np.count_nonzero(~leaf)))
    parent = np.full(max(2 * n - 2, 1), -1, np.int64)
    parent[new[kept[1:]]] = new[g.wparent[kept[1:]]]
    return parent, g.rows[leaf_order], leaf_order


def search_table(n: int) -> tuple[NDArray[np.floating[Any]], float]:
    """The zeroed table of subtree averages of a search on n taxa and its
    tolerance: a fall in tree length counts only above this fraction of the
    averages it is made of (the rounding of float64 or float32 numbers, with
    a wide margin)."""
    m = max(2 * n - 2, 1)
    if table_itemsize(n) == 8:
        return np.zeros((m, m), np.float64), 1e-10
    return np.zeros((m, m), np.float32), 1e-5


def _original_leaves(parent: NDArray[np.int64], leaf_order: NDArray[np.int64]) -> NDArray[np.int64]:
    """``parent`` with the leaves numbered as in the start tree again."""
    back = np.concatenate([leaf_order, np.arange(leaf_order.size, parent.size)])
    out = np.full(parent.size, -1, np.int64)
    has = parent >= 0
    out[back[has]] = back[parent[has]]
    return out


def refine_tree_with_info(tree: Tree, dm: DistanceMatrix, refine: str | None = "nni",
                          criterion: LengthCriterion = "bme", *, source: str | None = None
                          ) -> tuple[Tree, dict[str, Any]]:
    """Refine a tree's topology and report the criterion's tree length before and after.

    Parameters
    ----------
    tree, dm, refine, criterion, source
        As for :func:`refine_tree`.

    Returns
    -------
    tree : cladewright.tree.Tree
        As :func:`refine_tree` returns it.
    info : dict
        ``refine``, ``criterion``; ``length_before`` and ``length_after``
        (the criterion's tree length of the start and of the result);
        ``moves`` (interchanges or regrafts made) and ``rounds`` (passes in which
        every branch's or clade's move was looked at afresh); ``negative_branches``
        (fitted lengths < 0).

    References
    ----------
    Desper & Gascuel (2002) J. Comput. Biol. 9:687–705; Hordijk & Gascuel
    (2005) Bioinformatics 21:4338–4347.
    """
    r = refinement_name(refine, source=source)
    c = criterion.lower() if isinstance(criterion, str) else None
    if c not in LENGTH_CRITERIA:
        raise InputError(f"unknown criterion criterion={criterion!r}; choose one of {', '.join(LENGTH_CRITERIA)}",
                         source=source)
    if r == "spr" and c != "bme":
        raise InputError(f'refine="spr" searches under balanced minimum evolution only, not criterion="{c}"; '
                         'use criterion="bme", or refine="nni" with criterion="ols"', source=source)
    if r == "none" or tree.n_leaves < 4:
        result, before = fit_lengths_with_info(tree, dm, c, source=source, fit=False)
        return result, {"refine": r, "criterion": c, "length_before": before["tree_length"],
                        "length_after": before["tree_length"], "moves": 0, "rounds": 0,
                        "negative_branches": before["negative_branches"]}
    g = hang_from_leaf(tree, dm, source=source)
    work = minimum_evolution_lengths(g, c, source)
    before = {"tree_length": float(work[g.branches].sum()),
              "negative_branches": int(np.count_nonzero(work[g.branches] < 0))}
    parent, rows, leaf_order = _hung_arrays(g, r, source)
    n = tree.n_leaves
    kid1, kid2 = hang_children(parent, 0, n)
    table, tol = search_table(n)
    if r == "spr":
        moves, rounds = spr_search(table, tol, parent, kid1, kid2, 0, rows, dm.values, n)
    else:
        moves, rounds = nni_search(table, tol, parent, kid1, kid2, 0, rows, dm.values, n, c == "bme")
    del table
    if moves:
        topology = tree_from_hung(_original_leaves(parent, leaf_order), int(leaf_order[0]), tree.leaf_names)
        result, after = fit_lengths_with_info(topology, dm, c, source=source, fit=False)
    else:
        result, after = g.with_lengths(work), before
    info = {"refine": r, "criterion": c, "length_before": before["tree_length"],
            "length_after": after["tree_length"], "moves": int(moves), "rounds": int(rounds),
            "negative_branches": after["negative_branches"]}
    return result, info


def refine_tree(tree: Tree, dm: DistanceMatrix, refine: str | None = "nni", criterion: LengthCriterion = "bme", *,
                source: str | None = None) -> Tree:
    """A tree whose topology is a local optimum of a minimum-evolution criterion,
    found by nearest-neighbour interchanges or subtree pruning and regrafting from ``tree``.

    Parameters
    ----------
    tree : cladewright.tree.Tree
        The start: a binary topology (read as unrooted), leaves matched to
        ``dm`` by name; its lengths are not used.
    dm : cladewright.matrix.DistanceMatrix
        Exactly the tree's taxa, in any order.
    refine : {"nni", "spr", "none"} or None
        The search: nearest-neighbour interchanges; subtree pruning and
        regrafting under BME (each clade not holding the first leaf moved to
        its best branch, the fall of every regraft summed from NNI falls along
        the path, :mod:`cladewright._kernels.spr`; its moves include every
        interchange); or none (the start with fitted lengths).
    criterion : {"bme", "ols"}
        Balanced minimum evolution (balanced NNI): Pauplin's length
        L = sum_{i<j} 2^(1 − p_ij) d_ij; or ordinary least squares (FastNNI):
        the sum of the OLS branch lengths. A move is taken only when it
        lowers the length beyond rounding. ``refine="spr"`` takes "bme" only.
    source : str, optional
        File name to put in error messages.

    Returns
    -------
    cladewright.tree.Tree
        Unrooted, with a basal trifurcation when the topology changed (the
        start's own shape otherwise); lengths fitted under ``criterion``,
        kept as computed (they may be negative).

    Raises
    ------
    InputError
        When the taxa differ, the tree has a polytomy, a distance is not
        finite, ``refine``/``criterion`` is unknown, or ``refine="spr"``
        comes with ``criterion="ols"``.

    References
    ----------
    Desper & Gascuel (2002) J. Comput. Biol. 9:687–705 (balanced NNI,
    FastNNI); Pauplin (2000) J. Mol. Evol. 51:41–47; Rzhetsky & Nei (1993)
    Mol. Biol. Evol. 10:1073–1095; Desper & Gascuel (2004) Mol. Biol. Evol.
    21:587–598; Hordijk & Gascuel (2005) Bioinformatics 21:4338–4347 (SPR).

    Example
    -------
    >>> from cladewright.matrix import DistanceMatrix
    >>> d = [[0, 3, 7, 8], [3, 0, 8, 9], [7, 8, 0, 5], [8, 9, 5, 0]]
    >>> wrong = Tree([5, 4, 4, 5, 5, -1], [1.0] * 5 + [np.nan], "abcd")  # ((b,c),a,d)
    >>> refined = refine_tree(wrong, DistanceMatrix("abcd", d))  # ((a,b),(c,d)), lengths 1, 2, 4, 2, 3
    >>> [float(x) for x in refined.patristic()[0]]
    [0.0, 3.0, 7.0, 8.0]
    """
    return refine_tree_with_info(tree, dm, refine, criterion, source=source)[0]
