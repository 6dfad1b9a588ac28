"""A given tree and a distance matrix, made ready for fitting branch lengths.

The criteria of :mod:`cladewright.build.criteria` and
:mod:`cladewright.build.weighted` see a tree as unrooted: a rooted tree's two
branches at the root are one branch, and so are the two branches at any node
with one child. The tree is hung from a leaf (Desper & Gascuel 2002) so that
every branch of the unrooted tree is the branch above exactly one node; the
fitted lengths are then put back on the tree's own branches (a branch made of
several is shared out in proportion to the lengths it had, or equally when
those are missing, negative or all zero).

References
----------
Desper, R. & Gascuel, O. (2002) J. Comput. Biol. 9:687–705.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError
from .._kernels.criteria import clade_sizes, leaf_rooted
from .._kernels.matrix import first_non_finite
from ..matrix import DistanceMatrix
from ..tree import Tree

__all__ = ["LeafRootedTree", "hang_from_leaf"]


@dataclass(frozen=True)
class LeafRootedTree:
    """A tree hung from one of its leaves, with the matrix rows of its leaves.

    Node numbers are the tree's own. Every kept node but ``top`` stands for
    one branch of the unrooted tree: the branch to its parent in ``wparent``.
    """

    #: The tree as given.
    tree: Tree
    #: The distance matrix values (read only; not copied).
    values: NDArray[np.floating]
    #: The matrix row of each leaf of ``tree``.
    rows: NDArray[np.int64]
    #: Parent of each node in the hung tree (−1 at ``top``, −2 for a node passed over).
    wparent: NDArray[np.int64]
    #: The kept nodes in preorder, ``top`` first.
    pre: NDArray[np.int64]
    #: For each node of ``tree``, the kept node whose branch holds the branch above it (−1: none).
    edge_of: NDArray[np.int64]
    #: Children of each kept node in the hung tree.
    n_children: NDArray[np.int64]
    #: Leaves below each kept node (``top``: 0).
    size: NDArray[np.int64]

    @property
    def n_leaves(self) -> int:
        """Number of leaves n."""
        return self.tree.n_leaves

    @property
    def top(self) -> int:
        """The leaf the tree hangs from."""
        return int(self.pre[0])

    @property
    def branches(self) -> NDArray[np.int64]:
        """The kept nodes below ``top``: one per branch of the unrooted tree."""
        return self.pre[1:]

    def first_polytomy(self) -> int:
        """A node with more than two children in the hung tree (more than
        three branches), or −1 when the tree is binary."""
        wide = np.flatnonzero(self.n_children > 2)
        return int(wide[0]) if wide.size else -1

    def children_pairs(self) -> tuple[NDArray[np.int64], NDArray[np.int64], NDArray[np.int64]]:
        """The two children of each node and each node's sibling (binary trees).

        Returns
        -------
        kid1, kid2 : int64 ndarray (m,)
            The children of each internal node, −1 elsewhere; ``top`` has
            ``kid1`` only.
        sib : int64 ndarray (m,)
            The other child of each node's parent, −1 for ``top``'s child.
        """
        m = self.wparent.shape[0]
        kid1 = np.full(m, -1, np.int64)
        kid2 = np.full(m, -1, np.int64)
        sib = np.full(m, -1, np.int64)
        below = self.branches
        par = self.wparent[below]
        step = par != self.top
        kid1[self.top] = below[~step][0]
        below, par = below[step], par[step]
        order = np.argsort(par, kind="stable")
        pairs = below[order].reshape(-1, 2)
        parents = par[order][::2]
        kid1[parents], kid2[parents] = pairs[:, 0], pairs[:, 1]
        sib[pairs[:, 0]], sib[pairs[:, 1]] = pairs[:, 1], pairs[:, 0]
        return kid1, kid2, sib

    def work_lengths(self, source: str | None = None) -> NDArray[np.float64]:
        """The tree's own lengths on the branches of the hung tree (a branch
        made of several gets their sum).

        Raises
        ------
        InputError
            When a branch on a leaf-to-leaf path has no length.
        """
        length = np.asarray(self.tree.length, dtype=np.float64)
        has = self.edge_of >= 0
        owner = self.edge_of[has]
        given = length[has]
        if np.isnan(given).any():
            missing = int(np.count_nonzero(np.isnan(given)))
            raise InputError(f"{missing} of the tree's branches have no length; give every branch a length, "
                             "or fit lengths first (fit_lengths)", source=source)
        # an empty bincount is of integers
        return np.bincount(owner, weights=given, minlength=self.wparent.shape[0]).astype(np.float64)

    def with_lengths(self, work: NDArray[np.float64]) -> Tree:
        """A new Tree of the same shape, names, support and labels, with the
        lengths ``work`` (one per kept node's branch) on its own branches.

        A branch of the hung tree made of several of the tree's branches
        (the two at a rooted tree's root, a chain through one-child nodes)
        is shared out in proportion to their given lengths when all are
        finite, non-negative and not all zero, and equally otherwise (common
        practice: the criteria fix only the sum). The branch above a
        one-child root lies on no path between leaves and keeps its length.
        """
        tree = self.tree
        m = tree.n_nodes
        length = np.array(tree.length, dtype=np.float64)
        has = np.flatnonzero(self.edge_of >= 0)
        owner = self.edge_of[has]
        old = length[has]
        count = np.bincount(owner, minlength=m)
        usable = np.isfinite(old) & (old >= 0)
        bad = np.bincount(owner, weights=(~usable).astype(np.float64), minlength=m)
        total = np.bincount(owner, weights=np.where(usable, old, 0.0), minlength=m)
        by_length = (bad[owner] == 0) & (total[owner] > 0)
        share = np.where(by_length, old / np.where(by_length, total[owner], 1.0), 1.0 / count[owner])
        share[count[owner] == 1] = 1.0
        length[has] = share * work[owner]
        return Tree(tree.parent, length, tree.leaf_names, support=tree.support, labels=tree.labels,
                    rooted=tree.rooted, support_text=tree.support_text)


def hang_from_leaf(tree: Tree, dm: DistanceMatrix, *, source: str | None = None) -> LeafRootedTree:
    """Check a tree against a matrix and hang it from its first leaf.

    Parameters
    ----------
    tree : cladewright.tree.Tree
        Any topology, rooted or not; its leaves are matched to the matrix's
        taxa by name.
    dm : cladewright.matrix.DistanceMatrix
        The matrix, with exactly the tree's taxa (any order); not copied.
    source : str, optional
        File name to put in error messages.

    Returns
    -------
    LeafRootedTree

    Raises
    ------
    InputError
        When ``tree`` or ``dm`` is of the wrong type, their taxa differ, the
        tree has fewer than two leaves, or a distance is not finite.

    References
    ----------
    Desper & Gascuel (2002) J. Comput. Biol. 9:687–705 (a tree rooted at a leaf).
    """
    if not isinstance(tree, Tree):
        raise InputError(f"tree is {type(tree).__name__}, not a Tree; read it with read_trees or parse_newick",
                         source=source)
    if not isinstance(dm, DistanceMatrix):
        raise InputError(f"dm is {type(dm).__name__}, not a DistanceMatrix; wrap the array as "
                         "DistanceMatrix(names, values)", source=source)
    leaves = tree.leaf_names
    names = dm.names
    pos = {x: i for i, x in enumerate(names)}
    missing = [x for x in leaves if x not in pos]
    if missing:
        raise InputError(f"taxon {missing[0]!r} of the tree is not in the matrix; give the matrix of the tree's "
                         "taxa", source=source)
    if len(names) != len(leaves):
        extra = sorted(set(names) - set(leaves))[0]
        raise InputError(f"taxon {extra!r} of the matrix is not in the tree; give a tree of every taxon of the "
                         "matrix, or drop the taxa it lacks from the matrix", source=source)
    n = len(leaves)
    if n < 2:
        raise InputError(f"a tree of {n} taxon has no branch to fit; give a tree of at least 2 taxa", source=source)
    values = dm.values
    i, j = first_non_finite(values)
    if i >= 0:
        raise InputError(f"distance {names[i]!r}-{names[j]!r} is {float(values[i, j])!r}; every distance must be "
                         "finite (use a model that does not saturate, or drop the pair's taxa)", source=source)
    rows = np.fromiter((pos[x] for x in leaves), np.int64, n)
    parent = np.ascontiguousarray(tree.parent, dtype=np.int64)
    wparent, pre, edge_of = leaf_rooted(parent, n, 0)
    m = parent.shape[0]
    below = pre[1:]
    n_children = np.bincount(wparent[below], minlength=m)
    size = clade_sizes(wparent, pre, n)
    return LeafRootedTree(tree=tree, values=values, rows=rows, wparent=wparent, pre=pre, edge_of=edge_of,
                          n_children=n_children, size=size)
