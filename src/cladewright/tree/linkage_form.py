"""A rooted, ultrametric, binary Tree as a linkage matrix: the body of
:meth:`cladewright.tree.Tree.to_linkage`.

A linkage matrix ``Z`` is the form of scipy's hierarchical clustering
(``scipy.cluster.hierarchy``), read by its ``dendrogram``, ``fcluster`` and
``cophenet``: row ``k`` merges clusters ``Z[k, 0]`` and ``Z[k, 1]`` (leaves
are ``0..n-1``, the cluster made by row ``k`` is ``n + k``) at distance
``Z[k, 2]`` into a cluster of ``Z[k, 3]`` leaves, rows in order of
non-decreasing distance. A UPGMA or WPGMA tree places each internal node at
half the distance at which its two clusters merged (Sokal & Michener 1958), so
the merge distance is twice the node's height above its leaves.

References
----------
Sokal, R. R. & Michener, C. D. (1958) A statistical method for evaluating
systematic relationships. Univ. Kansas Sci. Bull. 38:1409-1438.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError
from ..io.newick_writer import TreeLike

__all__ = ["linkage_matrix"]


def linkage_matrix(tree: TreeLike, tolerance: float = 1e-6) -> NDArray[np.float64]:
    """The linkage matrix ``Z`` of a rooted, ultrametric, binary tree.

    Parameters
    ----------
    tree : Tree
        Rooted, every internal node with two children, every branch with a
        non-negative length, every leaf at the same distance from the root
        (UPGMA and WPGMA give such trees).
    tolerance : float
        How far, relative to the tree's height, two leaves' distances from
        the root may differ and still count as equal (rounding).

    Returns
    -------
    float64 ndarray, shape (n - 1, 4)
        Rows ``[cluster_a, cluster_b, distance, size]`` with ``cluster_a <
        cluster_b``, ``distance`` twice the height of the merging node, rows
        in order of non-decreasing distance (ties: a node after the nodes
        below it). Leaves are numbered in the order of ``tree.leaf_names``.

    Raises
    ------
    InputError
        For an unrooted tree, a node without exactly two children, a missing
        or negative branch length, or leaves at different distances from
        the root, saying which and what to do.

    References
    ----------
    Sokal & Michener (1958) Univ. Kansas Sci. Bull. 38:1409-1438.

    Examples
    --------
    >>> from cladewright import Tree
    >>> t = Tree([3, 3, 4, 4, -1], [1.0, 1.0, 2.0, 1.0, float("nan")], ["a", "b", "c"], rooted=True)
    >>> linkage_matrix(t)
    array([[0., 1., 2., 2.],
           [2., 3., 4., 3.]])
    """
    n, m = tree.n_leaves, tree.n_nodes
    if not tree.rooted:
        raise InputError("to_linkage needs a rooted tree (UPGMA or WPGMA output); this tree is unrooted: "
                         "build it with method='upgma' or 'wpgma'")
    if n == 1:
        return np.empty((0, 4), np.float64)
    parent = np.asarray(tree.parent)
    n_kids = np.bincount(parent[parent >= 0], minlength=m)[n:]
    if m != 2 * n - 1 or np.any(n_kids != 2):
        bad = int(np.count_nonzero(n_kids != 2))
        raise InputError(f"to_linkage needs a binary tree; {bad} internal node(s) do not have exactly two "
                         "children: resolve polytomies first (cladewright.resolve_polytomies)")
    length = np.array(tree.length, dtype=np.float64)
    length[tree.root] = 0.0
    if np.any(np.isnan(length)):
        raise InputError(f"to_linkage needs branch lengths; {int(np.count_nonzero(np.isnan(length)))} "
                         "branch(es) have none: build the tree from distances (UPGMA or WPGMA)")
    if np.any(length < 0):
        raise InputError("to_linkage needs non-negative branch lengths (merge distances never decrease); "
                         "this tree has a negative one: it is not a UPGMA or WPGMA tree")
    post = np.asarray(tree.postorder()).tolist()
    par, ln = parent.tolist(), length.tolist()
    height = [0.0] * m   # above the leaves, from the highest child
    lowest = [0.0] * m   # the same, from the lowest child
    size = [1] * n + [0] * (m - n)
    for v in post:
        p = par[v]
        if p < 0:
            continue
        top = height[v] + ln[v]
        low = lowest[v] + ln[v]
        if size[p] == 0:
            height[p], lowest[p] = top, low
        else:
            height[p], lowest[p] = max(height[p], top), min(lowest[p], low)
        size[p] += size[v]
    h = np.array(height)
    spread = float(np.max(h - np.array(lowest)))
    if spread > tolerance * max(float(h[tree.root]), np.finfo(float).tiny):
        raise InputError(f"to_linkage needs an ultrametric tree (every leaf as far from the root); leaves "
                         f"differ by up to {spread:.6g} in a tree of height {float(h[tree.root]):.6g}: build "
                         "it with method='upgma' or 'wpgma', or raise tolerance")
    internal = np.array([v for v in post if v >= n], dtype=np.int64)  # children before parents
    order = internal[np.argsort(h[internal], kind="stable")]
    cluster = np.arange(m, dtype=np.int64)
    cluster[order] = n + np.arange(n - 1)
    # each internal node's two children, from the parent array
    kids = np.argsort(parent, kind="stable")[1:].reshape(-1, 2)  # parents n..m-1 after the root's -1
    first = kids[order - n, 0]
    second = kids[order - n, 1]
    a, b = cluster[first], cluster[second]
    z = np.empty((n - 1, 4), np.float64)
    z[:, 0] = np.minimum(a, b)
    z[:, 1] = np.maximum(a, b)
    z[:, 2] = 2.0 * h[order]
    z[:, 3] = np.array(size, dtype=np.float64)[order]
    return z
