"""Majority-rule (and stricter) consensus of trees over the same taxa.

References
----------
Margush & McMorris (1981) Bull. Math. Biol. 43:239–244.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from ..errors import InputError
from .splits import nonempty_trees, tally_splits

if TYPE_CHECKING:
    from collections.abc import Iterable

    from ..tree import Tree

__all__ = ["majority_consensus"]


def majority_consensus(trees: Iterable[Tree], threshold: float = 0.5, *, source: str | None = None) -> Tree:
    """Majority-rule consensus tree.

    Parameters
    ----------
    trees : iterable of Tree
        Trees over the same taxa; the first fixes the leaf order.
    threshold : float
        Between 0.5 and 1. At 0.5 (the default) a split enters when it is in
        more than half of the trees: the majority rule. Above 0.5 a split
        enters when it is in at least this share of the trees, so 1 keeps
        the splits in every tree: the strict consensus. Any such rule keeps
        the chosen splits compatible, since two splits each in more than
        half of the trees share a tree.
    source : str, optional
        Name of the tree file, for error messages.

    Returns
    -------
    Tree
        Unrooted, polytomies where unresolved, root of degree >= 3. Support
        = percentage of trees holding the split; a split's length = mean of
        its lengths over the trees holding it; leaf lengths = mean over all
        trees (nan lengths are skipped).

    References
    ----------
    Margush & McMorris (1981) Bull. Math. Biol. 43:239–244 (majority rule;
    strict consensus as its limit, splits in all trees).
    """
    from ..tree import Tree

    trees = nonempty_trees(trees, "trees")
    if not 0.5 <= threshold <= 1.0:
        raise InputError(f"consensus threshold {threshold} is outside 0.5..1; give a value in that range")
    names = trees[0].leaf_names
    n = len(names)
    keys, count, lsum, lcnt, leaf_sum, leaf_cnt = tally_splits(names, trees, source, "tree")

    # count / len is correctly rounded, so a share met exactly (7 of 10 trees
    # at 0.7, every tree at 1) compares equal to the threshold.
    freq = count / len(trees)
    kept = np.flatnonzero(freq > 0.5 if threshold == 0.5 else freq >= threshold)
    bits = keys[kept]
    size = np.bitwise_count(bits).sum(axis=1)
    # Largest first: each split's parent is then the smallest split already
    # placed that holds its leaves (compatible canonical sets nest).
    order = np.argsort(-size, kind="stable")
    k = kept.size
    m = n + k + 1
    root = m - 1
    parent = np.full(m, -1, dtype=np.int64)
    length = np.full(m, np.nan)
    support = np.full(m, np.nan)
    home = np.full(n, root, dtype=np.int64)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean_len = lsum / lcnt
    for t, j in enumerate(order):
        node = root - 1 - t  # smaller splits get lower numbers: parents follow children
        leaves = np.flatnonzero(np.unpackbits(bits[j].astype("<u8").view(np.uint8), bitorder="little")[:n])
        parent[node] = home[leaves[0]]
        home[leaves] = node
        support[node] = 100.0 * freq[kept[j]]
        length[node] = mean_len[kept[j]]
    parent[:n] = home
    with np.errstate(invalid="ignore", divide="ignore"):
        length[:n] = leaf_sum / leaf_cnt
    return Tree(parent, length, names, support=support, rooted=False)
