"""Tree: a phylogenetic tree held as flat arrays.

A tree of ``m`` nodes is an array of parent indices (``-1`` for the root), an
array of branch lengths and, optionally, support values and internal labels.
Leaves are nodes ``0..n-1`` in the order of ``leaf_names``; internal nodes are
``n..m-1``. Children are kept as CSR arrays computed once; preorder and
postorder are computed iteratively (no recursion, so a 50,000-leaf caterpillar
is fine) and cached. The array walks are :mod:`cladewright.tree._layout`'s;
Newick and NEXUS text is written by :mod:`cladewright.io`.

Siblings are ordered by the smallest leaf index in their subtrees. A parser
that numbers leaves in the order they appear therefore gets the written child
order back, and a tree built from a distance matrix is written in a stable,
reproducible order.

References
----------
Robinson, D. F. & Foulds, L. R. (1981) Comparison of phylogenetic trees.
Math. Biosci. 53:131-147 (splits / bipartitions of a tree).
Newick format: the trade's de facto standard (1986 informal specification).
"""

from __future__ import annotations

import os
from collections.abc import Iterable
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..io.newick_writer import format_newick
from ..io.nexus import format_nexus
from ..io.output import atomic_output
from ._layout import children_csr, leaf_intervals, split_bitsets, walk_preorder
from .ete_form import tree_to_ete3
from .linkage_form import linkage_matrix
from .svg import NOTEBOOK_MAX_LEAVES, tree_svg

__all__ = ["Tree"]


class Tree:
    """A rooted or unrooted phylogenetic tree stored as arrays.

    Parameters
    ----------
    parent : array_like of int, shape (m,)
        Parent index of each node, ``-1`` for the single root. Leaves are nodes
        ``0..n-1``, internal nodes ``n..m-1``.
    length : array_like of float, shape (m,)
        Length of the branch to the parent; ``nan`` means no length given.
    leaf_names : sequence of str, length n
        Unique leaf names, in leaf index order.
    support : array_like of float, shape (m,), optional
        Support of the branch above each internal node, as a percentage
        (values read from a file stay as written, which may be proportions:
        see :meth:`support_percent`); ``nan`` means none.
    labels : list of (str or None), length m, optional
        Non-numeric internal node labels kept from a file.
    support_text : list of (str or None), length m, optional
        The text each support value was read from (``"0.9987"``, ``"95.0"``,
        ``"1e308"``), so that a tool that moves support without computing it
        writes it back exactly as read. A writer uses an entry only while it
        still reads as the node's support value; :meth:`with_support` drops
        them all.
    rooted : bool
        Whether the root is meaningful. An unrooted tree is normally stored
        with a root of degree 3.

    References
    ----------
    Newick format: the trade's de facto standard (1986 informal specification).

    Examples
    --------
    >>> t = Tree([3, 3, 3, -1], [0.1, 0.2, 0.3, np.nan], ["a", "b", "c"])
    >>> t.to_newick()
    '(a:0.1,b:0.2,c:0.3);\\n'
    """

    __slots__ = ("_parent", "_length", "_support", "_labels", "_support_text", "_leaf_names", "rooted",
                 "_root", "_ptr", "_kids", "_pre", "_post", "_intervals", "_leaf_index")

    #: Whether the root is meaningful.
    rooted: bool
    _post: NDArray[np.int64] | None
    _intervals: tuple[NDArray[np.int64], NDArray[np.int64], NDArray[np.int64]] | None
    _leaf_index: dict[str, int] | None

    def __init__(self, parent: ArrayLike, length: ArrayLike, leaf_names: Iterable[str], *,
                 support: ArrayLike | None = None, labels: Iterable[str | None] | None = None, rooted: bool = False,
                 support_text: Iterable[str | None] | None = None) -> None:
        parent = np.array(parent, dtype=np.int64).reshape(-1)
        m = parent.shape[0]
        length = np.array(length, dtype=np.float64).reshape(-1)
        names = tuple(leaf_names)
        n = len(names)
        if not all(isinstance(x, str) for x in names):
            raise ValueError("leaf names must be str")
        if n < 1 or m < n:
            raise ValueError(f"need at least one leaf and at least as many nodes as leaves (m={m}, n={n})")
        if length.shape != (m,):
            raise ValueError(f"length has shape {length.shape}, expected ({m},)")
        if support is None:
            support = np.full(m, np.nan)
        else:
            support = np.array(support, dtype=np.float64).reshape(-1)
            if support.shape != (m,):
                raise ValueError(f"support has shape {support.shape}, expected ({m},)")
        if labels is None:
            labels = [None] * m
        else:
            labels = list(labels)
            if len(labels) != m:
                raise ValueError(f"labels has {len(labels)} entries, expected {m}")
        if support_text is not None:
            support_text = tuple(support_text)
            if len(support_text) != m:
                raise ValueError(f"support_text has {len(support_text)} entries, expected {m}")
            if not all(x is None or isinstance(x, str) for x in support_text):
                raise ValueError("support_text entries must be str or None")
            if all(x is None for x in support_text):
                support_text = None
        if len(set(names)) != n:
            first = {x: i for i, x in reversed(list(enumerate(names)))}  # where each name is first used
            dup = next(x for i, x in enumerate(names) if first[x] != i)  # the first name met a second time
            raise ValueError(f"leaf name {dup!r} is used more than once")
        roots = np.flatnonzero(parent == -1)
        if roots.size != 1:
            raise ValueError(f"need exactly one root (parent -1), found {roots.size}")
        if parent.min() < -1 or parent.max() >= m:
            raise ValueError("parent indices must lie in -1..m-1")
        if np.any(parent == np.arange(m)):
            raise ValueError("a node cannot be its own parent")
        nkids = np.bincount(parent[parent >= 0], minlength=m)
        if np.any(nkids[:n] > 0):
            raise ValueError("leaves (nodes 0..n-1) must not have children")
        if np.any(nkids[n:] == 0):
            raise ValueError("internal nodes (n..m-1) must have children")
        for a in (parent, length, support):
            a.flags.writeable = False
        self._parent, self._length, self._support = parent, length, support
        self._labels, self._leaf_names, self.rooted = labels, names, bool(rooted)
        self._support_text = support_text
        self._root = int(roots[0])
        self._ptr, self._kids = children_csr(parent, n)
        self._pre = walk_preorder(self._ptr, self._kids, self._root, mirror=False)
        if self._pre.shape[0] != m:
            raise ValueError("parent array contains a cycle or nodes not connected to the root")
        self._post = None
        self._intervals = None
        self._leaf_index = None

    # ---- basic attributes -------------------------------------------------
    @property
    def n_leaves(self) -> int:
        """Number of leaves ``n``."""
        return len(self._leaf_names)

    @property
    def n_nodes(self) -> int:
        """Number of nodes ``m`` (leaves and internal)."""
        return self._parent.shape[0]

    @property
    def root(self) -> int:
        """Index of the root node."""
        return self._root

    @property
    def leaf_names(self) -> tuple[str, ...]:
        """Leaf names as a tuple, in leaf index order."""
        return self._leaf_names

    @property
    def parent(self) -> NDArray[np.int64]:
        """Parent index of every node (read-only int64 array, root -1)."""
        return self._parent

    @property
    def length(self) -> NDArray[np.float64]:
        """Branch length above every node (read-only float64 array, nan = none)."""
        return self._length

    @property
    def support(self) -> NDArray[np.float64]:
        """Support of the branch above every node (read-only float64, nan = none)."""
        return self._support

    @property
    def labels(self) -> list[str | None]:
        """Internal node labels kept from a file (list of str or None, length m)."""
        return self._labels

    @property
    def support_text(self) -> tuple[str | None, ...] | None:
        """Text each support value was read from (tuple of str or None,
        length m), or None when no support value was read from a file."""
        return self._support_text

    def __repr__(self) -> str:
        kind = "rooted" if self.rooted else "unrooted"
        return f"Tree({self.n_leaves} leaves, {self.n_nodes} nodes, {kind})"

    def leaf_index(self, name: str) -> int:
        """Index of the leaf called ``name`` (KeyError if there is none)."""
        if self._leaf_index is None:
            self._leaf_index = {x: i for i, x in enumerate(self._leaf_names)}
        return self._leaf_index[name]

    # ---- structure --------------------------------------------------------
    def children(self, node: int) -> NDArray[np.int64]:
        """Children of ``node`` as an int64 array, in sibling order."""
        return self._kids[self._ptr[node]:self._ptr[node + 1]]

    def children_table(self) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
        """Every node's children at once: ``kids[ptr[v]:ptr[v + 1]]`` are
        those of ``v``, in sibling order (read-only int64 arrays)."""
        return self._ptr, self._kids

    def n_children(self) -> NDArray[np.int64]:
        """Number of children of every node (int64 array, shape (m,))."""
        return np.diff(self._ptr)

    def preorder(self) -> NDArray[np.int64]:
        """Nodes in depth-first preorder (parents before children), cached."""
        return self._pre

    def postorder(self) -> NDArray[np.int64]:
        """Nodes in depth-first postorder (children, left to right, before
        their parent), cached."""
        if self._post is None:
            # Reversing a preorder that visits children right to left gives
            # the left-to-right postorder.
            post = walk_preorder(self._ptr, self._kids, self._root, mirror=True)[::-1].copy()
            post.flags.writeable = False
            self._post = post
        return self._post

    def _leaf_intervals(self) -> tuple[NDArray[np.int64], NDArray[np.int64], NDArray[np.int64]]:
        """(lo, hi, leafseq): the leaves below node v are leafseq[lo[v]:hi[v]],
        where leafseq is the leaves in preorder (a subtree's leaves are
        contiguous in any depth-first order)."""
        if self._intervals is None:
            self._intervals = leaf_intervals(self._pre, self.postorder(), self.n_leaves)
        return self._intervals

    def leaf_counts(self) -> NDArray[np.int64]:
        """Number of leaves below every node (int64 array, shape (m,))."""
        lo, hi, _ = self._leaf_intervals()
        return hi - lo

    def splits(self, order: Iterable[str] | None = None,
               trivial: bool = False) -> tuple[NDArray[np.uint64], NDArray[np.int64]]:
        """The tree's splits (bipartitions of the leaves) as bitsets.

        Parameters
        ----------
        order : sequence of str, optional
            Leaf names giving the bit positions (default ``leaf_names``); must
            hold exactly this tree's leaf names.
        trivial : bool
            Keep splits with a side of one leaf (the edges to leaves).

        Returns
        -------
        bits : uint64 ndarray, shape (k, ceil(n/64))
            Bit ``b`` of a row (word ``b // 64``, bit ``b % 64``) is set when the
            leaf at position ``b`` of ``order`` lies on the set side. Each
            split is canonicalised so that the first leaf of ``order`` is not
            in the set.
        nodes : int64 ndarray, shape (k,)
            The node whose edge to its parent gives that split. Edges giving
            the same bipartition (the two edges of a degree-2 root, a chain of
            one-child nodes) appear once, under the topmost such node in
            preorder.

        References
        ----------
        Robinson & Foulds (1981) Math. Biosci. 53:131-147.
        """
        n = self.n_leaves
        lo, hi, leafseq = self._leaf_intervals()
        if order is None:
            pos = np.empty(n, np.int64)
            pos[leafseq] = np.arange(n)
        else:
            order = list(order)
            if len(order) != n or set(order) != set(self._leaf_names):
                raise ValueError("order must hold exactly the tree's leaf names")
            where = np.empty(n, np.int64)
            where[leafseq] = np.arange(n)
            pos = where[np.fromiter((self.leaf_index(x) for x in order), np.int64, n)]
        # pos[j]: place in leafseq of the j-th leaf of `order`.
        return split_bitsets(lo, hi, self._pre, pos, trivial)

    # ---- derived values ---------------------------------------------------
    def patristic(self) -> NDArray[np.float64]:
        """Leaf-to-leaf path lengths (missing lengths count as 0).

        Returns
        -------
        float64 ndarray, shape (n, n)
        """
        from .._kernels.patristic import patristic_distances
        length = np.nan_to_num(np.asarray(self._length, dtype=np.float64), nan=0.0)
        parent = np.ascontiguousarray(self._parent)
        post = np.ascontiguousarray(self.postorder())
        return patristic_distances(parent, length, post, self.n_leaves)

    def support_percent(self) -> tuple[NDArray[np.float64], bool]:
        """Support as percentages, and whether it was read as proportions.

        Support read from a file (:attr:`support_text` set) whose every
        value lies within [0, 1] is on a 0-1 scale (common practice: some
        programs write proportions, bootstrap support is usually written in
        percent) and is multiplied by 100; any other support is taken as
        percentages already. Computed support (no text) is always percent.

        Returns
        -------
        percent : float64 ndarray, shape (m,)
            nan where there is no support.
        proportions : bool
            True when the values were read on a 0-1 scale.
        """
        s = np.array(self._support, dtype=np.float64)
        branch = np.arange(s.size) != self._root  # a label on the root is on no branch
        finite = s[branch & np.isfinite(s)]
        if self._support_text is not None and finite.size and np.all((finite >= 0) & (finite <= 1)):
            return s * 100.0, True
        return s, False

    def with_support(self, support: ArrayLike) -> Tree:
        """A new Tree with the same shape, lengths and labels and ``support``.

        Parameters
        ----------
        support : array_like of float, shape (m,)
            Percentages, nan for none.
        """
        support = np.array(support, dtype=np.float64).reshape(-1)
        if support.shape != (self.n_nodes,):
            raise ValueError(f"support has shape {support.shape}, expected ({self.n_nodes},)")
        support.flags.writeable = False
        new = object.__new__(Tree)
        for slot in Tree.__slots__:
            setattr(new, slot, getattr(self, slot))
        new._support = support
        # The values are replaced: the text they were read from no longer applies.
        new._support_text = None
        return new

    # ---- output -----------------------------------------------------------
    def to_newick(self, digits: int | None = None, support_digits: int = 0, quoting: str = "plain") -> str:
        """The tree as one line of Newick text ending in ``";\\n"``.

        Parameters
        ----------
        digits : int, optional
            Significant digits of branch lengths; default the shortest text
            that reads back to the same float.
        support_digits : int
            Decimals of support values (0: integer percentages).
        quoting : {"plain", "strict"}
            ``"plain"``: names whose only special character is ``_`` bare;
            ``"strict"``: those quoted too (:func:`~cladewright.io.newick_writer.format_newick`).

        References
        ----------
        Newick format: the trade's de facto standard (1986 informal specification).
        """
        return format_newick(self, digits=digits, support_digits=support_digits, quoting=quoting)

    def write(self, path: str | os.PathLike[str], format: str = "newick", **options: Any) -> None:
        """Write the tree to ``path`` (``-`` for standard output) atomically.

        Parameters
        ----------
        path : str or os.PathLike
        format : {"newick", "nexus"}
        **options
            ``digits``, ``support_digits`` (and ``quoting`` for Newick, ``tree_names`` for NEXUS).
        """
        if format == "newick":
            text = format_newick(self, **options)
        elif format == "nexus":
            text = format_nexus([self], **options)
        else:
            raise ValueError(f"unknown tree format {format!r}; use 'newick' or 'nexus'")
        with atomic_output(path) as fh:
            fh.write(text)

    def to_ete3(self) -> Any:
        """The tree as an ``ete3.Tree`` (:func:`cladewright.tree.ete_form.tree_to_ete3`)."""
        return tree_to_ete3(self)

    def to_linkage(self, tolerance: float = 1e-6) -> NDArray[np.float64]:
        """scipy's linkage matrix of this rooted, ultrametric, binary tree (UPGMA or WPGMA output), for
        ``scipy.cluster.hierarchy`` (:func:`cladewright.tree.linkage_form.linkage_matrix`)."""
        return linkage_matrix(self, tolerance)

    def _repr_svg_(self) -> str | None:
        """The tree as a small SVG picture for notebooks (:func:`cladewright.tree.svg.tree_svg`)."""
        return tree_svg(self, max_leaves=NOTEBOOK_MAX_LEAVES)
