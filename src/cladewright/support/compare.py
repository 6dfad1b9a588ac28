"""Distances between two trees over the same taxa: Robinson–Foulds and branch score.

References
----------
Robinson & Foulds (1981) Math. Biosci. 53:131–147; Kuhner & Felsenstein
(1994) Mol. Biol. Evol. 11:459–468.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import NDArray

from .splits import check_taxa, group_rows, split_lengths

if TYPE_CHECKING:
    from ..tree import Tree

__all__ = ["robinson_foulds", "branch_score"]


def _paired_splits(tree_a: Tree, tree_b: Tree, trivial: bool, source: str | None
                   ) -> tuple[NDArray[np.int64], NDArray[np.int64], NDArray[np.int64], NDArray[np.int64]]:
    check_taxa(tree_a.leaf_names, tree_b.leaf_names, "second tree", source)
    a_bits, a_nodes = tree_a.splits(trivial=trivial)
    b_bits, b_nodes = tree_b.splits(order=tree_a.leaf_names, trivial=trivial)
    _, inv = group_rows(np.vstack([a_bits, b_bits]))
    return inv[: a_bits.shape[0]], inv[a_bits.shape[0]:], a_nodes, b_nodes


def robinson_foulds(tree_a: Tree, tree_b: Tree, *, source: str | None = None) -> dict[str, int | float]:
    """Robinson–Foulds distance on unrooted nontrivial splits.

    Parameters
    ----------
    tree_a, tree_b : Tree
        Trees over the same taxa.
    source : str, optional
        Name of the file of ``tree_b``, for error messages.

    Returns
    -------
    dict
        ``rf`` (splits in one tree only), ``max`` (2(n - 3), the largest
        distance between two trees of n leaves; 0 when n < 4),
        ``normalised`` (rf / max, 0 when max is 0), ``shared``, ``only_a``,
        ``only_b`` (distinct splits).

    References
    ----------
    Robinson & Foulds (1981) Math. Biosci. 53:131–147.

    Examples
    --------
    >>> from cladewright.tree import Tree
    >>> t = Tree([5, 5, 6, 6, 7, 7, 7, -1], [1.0] * 7 + [np.nan], list("abcde"))
    >>> u = Tree([5, 6, 5, 6, 7, 7, 7, -1], [1.0] * 7 + [np.nan], list("abcde"))
    >>> robinson_foulds(t, u)["rf"]
    4
    """
    ga, gb, _, _ = _paired_splits(tree_a, tree_b, False, source)
    ua, ub = np.unique(ga), np.unique(gb)
    shared = int(np.intersect1d(ua, ub).size)
    only_a, only_b = int(ua.size) - shared, int(ub.size) - shared
    n = len(tree_a.leaf_names)
    top = 2 * (n - 3) if n > 3 else 0
    rf = only_a + only_b
    return {"rf": rf, "max": top, "normalised": rf / top if top else 0.0,
            "shared": shared, "only_a": only_a, "only_b": only_b}


def branch_score(tree_a: Tree, tree_b: Tree, *, source: str | None = None) -> float:
    """Branch score distance between two trees.

    ``sqrt(sum over splits of (len_a - len_b)^2)`` over every split of
    either tree, leaf edges included; a split missing from a tree has length
    0 there, and so has an edge without a length.

    Parameters
    ----------
    tree_a, tree_b : Tree
        Trees over the same taxa.
    source : str, optional
        Name of the file of ``tree_b``, for error messages.

    Returns
    -------
    float

    References
    ----------
    Kuhner & Felsenstein (1994) Mol. Biol. Evol. 11:459–468 (the branch
    score is the sum of squares; this returns its square root).
    """
    ga, gb, a_nodes, b_nodes = _paired_splits(tree_a, tree_b, True, source)
    g_all = int(max(ga.max(initial=-1), gb.max(initial=-1))) + 1
    la = np.nan_to_num(split_lengths(tree_a, a_nodes))
    lb = np.nan_to_num(split_lengths(tree_b, b_nodes))
    diff = np.bincount(ga, weights=la, minlength=g_all) - np.bincount(gb, weights=lb, minlength=g_all)
    return float(np.sqrt(np.sum(diff * diff)))
