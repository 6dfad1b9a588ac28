"""Polytomies: branches of length zero, and groups of identical sequences.

A branch of length zero is no branch: it separates nothing that the data
tell apart, so a written tree shows a polytomy there, and no support. Groups
of identical sequences are entered once in the distance and tree stages and
come back here as polytomies of zero-length leaves.

Every function returns a new :class:`~cladewright.tree.Tree`; the work is
done on the tree's arrays (no loop over nodes in Python).

References
----------
Newick format: the trade's de facto standard (1986 informal specification);
a node with more than two children is a polytomy (common practice).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .tree import Tree

__all__ = ["ZERO_TOLERANCE", "attach_identical", "collapse_zero_branches", "resolve_polytomies",
           "zero_branches"]

#: A branch counts as zero when its length is at most this fraction of the
#: tree's longest branch: builders compute a length of exactly zero as a
#: rounding error this far from it (double precision; single precision
#: matrices ask for ``1e-6``).
ZERO_TOLERANCE = 1e-12


def zero_branches(tree: Tree, tolerance: float = ZERO_TOLERANCE) -> NDArray[np.bool_]:
    """Which internal branches have length zero (within ``tolerance``).

    Parameters
    ----------
    tree : Tree
    tolerance : float
        Relative to the longest finite branch length of the tree.

    Returns
    -------
    bool ndarray (m,)
        True at each internal node, other than the root, whose branch to
        its parent has |length| <= tolerance * longest; a branch without a
        length (nan) is never zero.
    """
    length = np.asarray(tree.length, dtype=np.float64)
    finite = np.isfinite(length)
    scale = float(np.max(np.abs(length[finite]))) if finite.any() else 0.0
    zero = finite & (np.abs(length) <= tolerance * scale)
    zero[: tree.n_leaves] = False
    zero[tree.root] = False
    return zero


def collapse_zero_branches(tree: Tree, tolerance: float = ZERO_TOLERANCE) -> Tree:
    """The tree with every internal branch of length zero contracted.

    The children of a contracted node hang from its parent; their lengths,
    support and labels stay as they were, and the contracted branch's
    support goes with it. Leaves and the root are never contracted.

    Parameters
    ----------
    tree : Tree
    tolerance : float
        See :func:`zero_branches`.

    Returns
    -------
    Tree
        ``tree`` itself when no branch is zero.

    Examples
    --------
    >>> t = Tree([4, 4, 5, 5, 5, -1], [0.1, 0.2, 0.0, 0.3, 0.0, np.nan], list("abcd"))
    >>> collapse_zero_branches(t).to_newick()
    '(a:0.1,b:0.2,c:0.0,d:0.3);\\n'
    """
    zero = zero_branches(tree, tolerance)
    if not zero.any():
        return tree
    return _contract(tree, zero)


def _contract(tree: Tree, drop: NDArray[np.bool_]) -> Tree:
    """Contract the branches above the nodes flagged in ``drop``."""
    parent = np.asarray(tree.parent, dtype=np.int64)
    up = parent.copy()
    # Pointer jumping: each round skips a dropped parent, and a run of k
    # dropped ancestors is passed in about log2(k) rounds.
    while True:
        step = (up >= 0) & drop[np.maximum(up, 0)]
        if not step.any():
            break
        up[step] = up[up[step]]
    keep = ~drop
    new_index = np.cumsum(keep) - 1
    kept = np.flatnonzero(keep)
    new_parent = np.where(up[kept] >= 0, new_index[np.maximum(up[kept], 0)], -1)
    labels, text = tree.labels, tree.support_text
    return Tree(new_parent, np.asarray(tree.length)[kept], tree.leaf_names,
                support=np.asarray(tree.support)[kept], labels=[labels[i] for i in kept.tolist()],
                support_text=None if text is None else [text[i] for i in kept.tolist()], rooted=tree.rooted)


def attach_identical(tree: Tree, names: Sequence[str], group: ArrayLike) -> Tree:
    """Put back the sequences that were entered once for their group.

    Parameters
    ----------
    tree : Tree
        A tree whose leaves are the distinct sequences: leaf ``g`` stands for
        group ``g``.
    names : sequence of str (n,)
        Every sequence's name, in the alignment's order.
    group : int array (n,)
        The leaf of ``tree`` that stands for each sequence (as returned by
        :func:`cladewright.alignment.distinct_sequences`).

    Returns
    -------
    Tree
        Leaves ``0..n-1`` are the sequences in the order of ``names``. A
        group of one keeps its leaf; a larger group becomes a node on the
        branch where its leaf was, its sequences hanging from it at length
        zero (a polytomy). The group's node has no support value.

    Examples
    --------
    >>> t = Tree([2, 2, -1], [0.1, 0.2, np.nan], ["a", "b"], rooted=True)
    >>> attach_identical(t, ["a", "b", "a2", "a3"], [0, 1, 0, 0]).to_newick()
    '((a:0.0,a2:0.0,a3:0.0):0.1,b:0.2);\\n'
    """
    group = np.asarray(group, dtype=np.int64).reshape(-1)
    n, d = len(names), tree.n_leaves
    if group.shape != (n,) or (n and (group.min() < 0 or group.max() >= d)):
        raise ValueError(f"group must give, for each of the {n} sequences, a leaf of the {d}-leaf tree")
    if n == d:
        order = np.argsort(group, kind="stable")
        if np.array_equal(group[order], np.arange(d)) and np.array_equal(order, np.arange(d)):
            return tree
    sizes = np.bincount(group, minlength=d)
    m = tree.n_nodes
    parent = np.asarray(tree.parent, dtype=np.int64)
    length = np.asarray(tree.length, dtype=np.float64)
    multi = np.flatnonzero(sizes > 1)          # leaves that become group nodes
    # New numbering: the n sequences, then the tree's internal nodes, then
    # one node per group of two or more.
    internal_new = n + np.arange(m - d)
    group_node = np.full(d, -1, np.int64)
    group_node[multi] = n + (m - d) + np.arange(multi.size)
    total = n + (m - d) + multi.size
    new_of_internal = np.concatenate([np.full(d, -1, np.int64), internal_new])

    def mapped(p: NDArray[np.int64]) -> NDArray[np.int64]:
        return np.where(p >= 0, new_of_internal[np.maximum(p, 0)], -1)

    new_parent = np.empty(total, np.int64)
    new_length = np.empty(total, np.float64)
    new_support = np.full(total, np.nan)
    new_labels: list[str | None] = [None] * total
    # the tree's internal nodes keep their branches
    new_parent[n:n + m - d] = mapped(parent[d:])
    new_length[n:n + m - d] = length[d:]
    new_support[n:n + m - d] = np.asarray(tree.support)[d:]
    new_labels[n:n + m - d] = tree.labels[d:]
    # a group node takes its leaf's branch
    gn = group_node[multi]
    new_parent[gn] = mapped(parent[multi])
    new_length[gn] = length[multi]
    # each sequence: its group's node at length zero, or its leaf's branch
    single = sizes[group] == 1
    new_parent[:n] = np.where(single, mapped(parent[group]), group_node[group])
    new_length[:n] = np.where(single, length[group], 0.0)
    if d == 1 and m == 1:                      # one group: the star of its sequences
        new_parent = np.concatenate([np.full(n, n, np.int64), [-1]])
        new_length = np.concatenate([np.zeros(n), [np.nan]])
        return Tree(new_parent, new_length, tuple(names), rooted=tree.rooted)
    return Tree(new_parent, new_length, tuple(names), support=new_support, labels=new_labels,
                rooted=tree.rooted)


def resolve_polytomies(tree: Tree) -> Tree:
    """A binary tree: each polytomy resolved by branches of length zero.

    The children of a node with more than two children (three at the root
    of an unrooted tree, which keeps its basal trifurcation) are joined in
    order, the first two under a new node, that node and the third under
    another, and so on; the new branches have length zero and no support.
    For tree software that accepts only binary trees.

    Parameters
    ----------
    tree : Tree

    Returns
    -------
    Tree
        ``tree`` itself when it is binary already.

    Examples
    --------
    >>> t = Tree([4, 4, 4, 4, -1], [0.1, 0.2, 0.3, 0.4, np.nan], list("abcd"), rooted=True)
    >>> resolve_polytomies(t).to_newick()
    '(((a:0.1,b:0.2):0.0,c:0.3):0.0,d:0.4);\\n'
    """
    m = tree.n_nodes
    parent = np.asarray(tree.parent, dtype=np.int64)
    degree = np.bincount(parent[parent >= 0], minlength=m)
    allowed = np.full(m, 2)
    if not tree.rooted:
        allowed[tree.root] = 3
    extra = np.maximum(degree - allowed, 0)     # new nodes under each polytomy
    if not extra.any():
        return tree
    # Children of each node in the tree's sibling order.
    kids_ptr, kids = _children(tree)
    base = m
    new_parent = np.concatenate([parent, np.empty(int(extra.sum()), np.int64)])
    new_length = np.concatenate([np.asarray(tree.length, dtype=np.float64), np.zeros(int(extra.sum()))])
    new_support = np.concatenate([np.asarray(tree.support, dtype=np.float64), np.full(int(extra.sum()), np.nan)])
    poly = np.flatnonzero(extra)
    first_new = base + np.concatenate([[0], np.cumsum(extra[poly])[:-1]]).astype(np.int64)
    # For a polytomy v with children c_0..c_{k-1} and e = k - allowed new
    # nodes u_0..u_{e-1}: u_0 holds c_0 and c_1; u_t holds u_{t-1} and c_{t+1};
    # v holds u_{e-1} and the children after c_e.
    for_v = np.repeat(poly, extra[poly])
    t = np.arange(for_v.size) - np.repeat(first_new - base, extra[poly])
    new_nodes = base + np.arange(for_v.size)
    new_parent[new_nodes] = np.where(t == extra[for_v] - 1, for_v, new_nodes + 1)
    start = kids_ptr[for_v]
    # c_{t+1} under u_t (and c_0 under u_0)
    new_parent[kids[start + t + 1]] = new_nodes
    head = t == 0
    new_parent[kids[start[head]]] = new_nodes[head]
    labels = list(tree.labels) + [None] * int(extra.sum())
    text = None if tree.support_text is None else list(tree.support_text) + [None] * int(extra.sum())
    return Tree(new_parent, new_length, tree.leaf_names, support=new_support, labels=labels, support_text=text,
                rooted=tree.rooted)


def _children(tree: Tree) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """CSR children of every node, siblings in the tree's written order."""
    return tree.children_table()
