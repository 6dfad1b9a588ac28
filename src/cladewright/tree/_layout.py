"""How a tree's parent array is laid out for walking it: children as CSR
arrays, depth-first orders, the leaves below each node as an interval, and
splits as bitsets. Every walk is iterative (no recursion, so a 50,000-leaf
caterpillar is fine). Arrays in, arrays out: :class:`cladewright.tree.Tree`
holds the results.

References
----------
Robinson, D. F. & Foulds, L. R. (1981) Comparison of phylogenetic trees.
Math. Biosci. 53:131-147 (splits / bipartitions of a tree).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

__all__ = ["children_csr", "walk_preorder", "leaf_intervals", "split_bitsets", "SPLIT_CHUNK_CELLS"]

# Rows of the boolean membership matrix made at once in split_bitsets():
# bounds the temporary memory to about this many bytes.
SPLIT_CHUNK_CELLS = 1 << 24


def children_csr(parent: NDArray[np.int64], n: int) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Children as CSR arrays, siblings ordered by the smallest leaf index below each.

    Parameters
    ----------
    parent : int64 ndarray, shape (m,)
        Parent of each node, ``-1`` for the root; leaves are ``0..n-1``.
    n : int
        Number of leaves.

    Returns
    -------
    ptr : int64 ndarray, shape (m + 1,)
    kids : int64 ndarray, shape (m - 1,)
        The children of v are ``kids[ptr[v]:ptr[v + 1]]`` (both read-only).
    """
    m = parent.shape[0]
    par = parent.tolist()
    claimed = [-1] * m
    # Leaves in increasing index: each climbs until it meets a node already
    # claimed by a smaller leaf, so every node is visited once.
    for leaf in range(n):
        v = leaf
        while v != -1 and claimed[v] < 0:
            claimed[v] = leaf
            v = par[v]
    minleaf = np.array(claimed, dtype=np.int64)
    nonroot = np.flatnonzero(parent >= 0)
    kids = nonroot[np.lexsort((minleaf[nonroot], parent[nonroot]))]
    ptr = np.zeros(m + 1, np.int64)
    np.cumsum(np.bincount(parent[nonroot], minlength=m), out=ptr[1:])
    for a in (kids, ptr):
        a.flags.writeable = False
    return ptr, kids


def walk_preorder(ptr: NDArray[np.int64], kids: NDArray[np.int64], root: int,
                  mirror: bool = False) -> NDArray[np.int64]:
    """Iterative depth-first preorder from ``root``.

    Parameters
    ----------
    ptr, kids : int64 ndarray
        Children in CSR form (:func:`children_csr`).
    root : int
    mirror : bool
        Visit children right to left.

    Returns
    -------
    int64 ndarray
        The nodes reached from ``root``, read-only (fewer than m when the
        parent array holds a cycle or a node not connected to the root).
    """
    p = ptr.tolist()
    k = kids.tolist()
    out: list[int] = []
    push = out.append
    stack = [root]
    pop = stack.pop
    extend = stack.extend
    if mirror:
        while stack:
            v = pop()
            push(v)
            extend(k[p[v]:p[v + 1]])
    else:
        while stack:
            v = pop()
            push(v)
            a, b = p[v], p[v + 1]
            if b > a:
                extend(k[b - 1:a - 1 if a else None:-1])
    res = np.array(out, dtype=np.int64)
    res.flags.writeable = False
    return res


def leaf_intervals(pre: NDArray[np.int64], post: NDArray[np.int64],
                   n: int) -> tuple[NDArray[np.int64], NDArray[np.int64], NDArray[np.int64]]:
    """The leaves below every node as an interval of one leaf sequence.

    A subtree's leaves are contiguous in any depth-first order, so the
    leaves below node v are ``leafseq[lo[v]:hi[v]]``, where ``leafseq`` is
    the leaves in preorder.

    Parameters
    ----------
    pre, post : int64 ndarray, shape (m,)
        The nodes in preorder and in postorder (one child order for both).
    n : int
        Number of leaves (nodes ``0..n-1``).

    Returns
    -------
    lo, hi, leafseq : int64 ndarray
    """
    m = pre.shape[0]
    is_leaf_pre = pre < n
    lo = np.empty(m, np.int64)
    # leaves strictly before v in preorder = leaves left of v's subtree
    lo[pre] = np.cumsum(is_leaf_pre) - is_leaf_pre
    hi = np.empty(m, np.int64)
    # leaves up to v in postorder = leaves left of v's subtree and in it
    hi[post] = np.cumsum(post < n)
    return lo, hi, pre[is_leaf_pre]


def split_bitsets(lo: NDArray[np.int64], hi: NDArray[np.int64], pre: NDArray[np.int64], pos: NDArray[np.int64],
                  trivial: bool = False) -> tuple[NDArray[np.uint64], NDArray[np.int64]]:
    """The splits of a tree as bitsets, from its leaf intervals.

    Parameters
    ----------
    lo, hi : int64 ndarray, shape (m,)
        Leaf intervals (:func:`leaf_intervals`).
    pre : int64 ndarray, shape (m,)
        The nodes in preorder (the root first).
    pos : int64 ndarray, shape (n,)
        ``pos[j]``: the place in the interval leaf sequence of the leaf
        given bit ``j``.
    trivial : bool
        Keep splits with a side of one leaf.

    Returns
    -------
    bits : uint64 ndarray, shape (k, ceil(n/64))
    nodes : int64 ndarray, shape (k,)
        As :meth:`cladewright.tree.Tree.splits` describes them.

    References
    ----------
    Robinson & Foulds (1981) Math. Biosci. 53:131-147.
    """
    n = pos.shape[0]
    cand = pre[1:]  # every non-root node, in preorder
    c_lo, c_hi = lo[cand], hi[cand]
    # A set [0, a) is the complement of [a, n): key both by the latter so
    # that complementary edges (degree-2 root) coincide.
    k_lo = np.where(c_lo == 0, c_hi, c_lo)
    k_hi = np.where(c_lo == 0, n, c_hi)
    size = k_hi - k_lo
    lim = 1 if trivial else 2
    keep = (size >= lim) & (size <= n - lim)
    key = k_lo[keep] * (n + 1) + k_hi[keep]
    _, first = np.unique(key, return_index=True)
    sel = np.flatnonzero(keep)[np.sort(first)]
    nodes = cand[sel].astype(np.int64)
    s_lo, s_hi = c_lo[sel], c_hi[sel]
    words = (n + 63) // 64
    bits = np.zeros((nodes.size, words), np.uint64)
    step = max(1, SPLIT_CHUNK_CELLS // max(n, 1))
    pad = words * 64 - n
    for a in range(0, nodes.size, step):
        b = min(nodes.size, a + step)
        member = (pos[None, :] >= s_lo[a:b, None]) & (pos[None, :] < s_hi[a:b, None])
        # canonical side: the leaf of bit 0 is outside the set
        member ^= member[:, :1]
        if pad:
            member = np.concatenate([member, np.zeros((b - a, pad), bool)], axis=1)
        packed = np.packbits(member, axis=1, bitorder="little")
        bits[a:b] = packed.view("<u8").astype(np.uint64, copy=False)
    return bits, nodes
