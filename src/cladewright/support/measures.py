"""Bootstrap support of a tree's edges from replicate trees: FBP and TBE.

References
----------
Felsenstein (1985) Evolution 39:783–791; Lemoine et al. (2018) Nature
556:452–456.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .splits import check_taxa, group_rows, leaf_positions, nonempty_trees, split_lengths, tally_splits

if TYPE_CHECKING:
    from collections.abc import Iterable

    from ..tree import Tree

__all__ = ["fbp_support", "tbe_support", "apply_support"]


def fbp_support(tree: Tree, replicates: Iterable[Tree], *, source: str | None = None) -> NDArray[np.float64]:
    """Felsenstein bootstrap proportion of every internal edge of ``tree``.

    Parameters
    ----------
    tree : Tree
        Reference tree.
    replicates : iterable of Tree
        Replicate trees over the same taxa (leaf order may differ).
    source : str, optional
        Name of the replicate file, for error messages.

    Returns
    -------
    float64 array (k,)
        Percentage of replicates holding each split of ``tree.splits()``
        (same order as its ``nodes``).

    References
    ----------
    Felsenstein (1985) Evolution 39:783–791.

    Examples
    --------
    >>> from cladewright.tree import Tree
    >>> t = Tree([5, 5, 6, 6, 7, 7, 7, -1], [1.0] * 7 + [np.nan], list("abcde"))
    >>> u = Tree([5, 6, 5, 6, 7, 7, 7, -1], [1.0] * 7 + [np.nan], list("abcde"))
    >>> fbp_support(t, [t, u]).tolist()
    [50.0, 50.0]
    """
    replicates = nonempty_trees(replicates, "replicate trees")
    ref_bits, _ = tree.splits()
    keys, count, *_ = tally_splits(tree.leaf_names, replicates, source, "replicate tree")
    _, inv = group_rows(np.vstack([keys, ref_bits]))
    held = np.bincount(inv[: keys.shape[0]], weights=count, minlength=inv.size + 1)
    return 100.0 * held[inv[keys.shape[0]:]] / len(replicates)


def tbe_support(tree: Tree, replicates: Iterable[Tree], *, source: str | None = None) -> NDArray[np.float64]:
    """Transfer bootstrap expectation of every internal edge of ``tree``.

    For a split whose smaller side has ``p`` leaves, each replicate scores
    ``1 - d / (p - 1)`` with ``d`` its transfer distance (the fewest leaves
    to move to turn the split into one of the replicate's, leaf edges
    included); the support is 100 times the mean score.

    Parameters
    ----------
    tree : Tree
        Reference tree.
    replicates : iterable of Tree
        Replicate trees over the same taxa.
    source : str, optional
        Name of the replicate file, for error messages.

    Returns
    -------
    float64 array (k,)
        Percentages in the order of ``tree.splits()``.

    Notes
    -----
    Exact; O(k m) per replicate for ``k`` reference splits and ``m``
    replicate nodes, i.e. O(n^2), compiled (:mod:`cladewright._kernels.transfer`).

    References
    ----------
    Lemoine et al. (2018) Nature 556:452–456.
    """
    from .._kernels.transfer import transfer_distances

    replicates = nonempty_trees(replicates, "replicate trees")
    names = tree.leaf_names
    n = len(names)
    ref_bits, _ = tree.splits()
    ref_bits = np.ascontiguousarray(ref_bits, dtype=np.uint64)
    size = np.bitwise_count(ref_bits).sum(axis=1).astype(np.int64)
    scale = (np.minimum(size, n - size) - 1).astype(np.float64)
    total = np.zeros(ref_bits.shape[0])
    for r, rep in enumerate(replicates):
        check_taxa(names, rep.leaf_names, f"replicate tree {r + 1}", source)
        pos = leaf_positions(names, rep.leaf_names)
        d = transfer_distances(ref_bits, size, n, np.ascontiguousarray(rep.parent, dtype=np.int64),
                               np.ascontiguousarray(rep.postorder(), dtype=np.int64), pos)
        total += 1.0 - d / scale
    return 100.0 * total / len(replicates)


def apply_support(tree: Tree, values: ArrayLike) -> Tree:
    """The tree with ``values`` put on the nodes of its internal edges.

    Parameters
    ----------
    tree : Tree
    values : array_like (k,) or (m,)
        One value per split of ``tree.splits()`` (as returned by
        :func:`fbp_support` or :func:`tbe_support`), or a full per-node array.

    Returns
    -------
    Tree
        ``tree.with_support(...)``; nodes without a split get nan, and so
        do branches of length zero: a branch of length zero is no branch
        (see :mod:`cladewright.polytomies`), so no support is shown on it.
    """
    from ..polytomies import ZERO_TOLERANCE

    values = np.asarray(values, dtype=np.float64)
    if values.shape == (tree.n_nodes,):
        return tree.with_support(values.copy())
    _, nodes = tree.splits()
    if values.shape != nodes.shape:
        raise ValueError(f"{values.size} support values for {nodes.size} internal edges")
    support = np.full(tree.n_nodes, np.nan)
    support[nodes] = values
    lengths = split_lengths(tree, nodes)
    all_lengths = np.asarray(tree.length, dtype=np.float64)
    finite = np.isfinite(all_lengths)
    scale = float(np.abs(all_lengths[finite]).max()) if finite.any() else 0.0
    support[nodes[np.isfinite(lengths) & (np.abs(lengths) <= ZERO_TOLERANCE * scale)]] = np.nan
    return tree.with_support(support)
