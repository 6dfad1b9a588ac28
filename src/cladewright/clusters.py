"""Groups of taxa within a divergence threshold: the largest clades whose
members all lie within a path-length distance ``d`` of each other.

The use: sorting barcodes into groups at a divergence threshold. Each clade's
diameter (its largest leaf-to-leaf path length) comes from one postorder
pass (:func:`cladewright.paths.longest_paths`): with ``height(v)`` the
longest path from ``v`` down to a leaf,

    diameter(v) = max( max over children c of diameter(c),
                       max over children a != b of (height(a) + len(a) + height(b) + len(b)) ).

Diameters never decrease towards the root, so the groups are the clades whose
diameter is at most ``d`` and whose parent's is not; every leaf is in exactly
one group. On a UPGMA tree a clade's diameter is its merge distance (twice
its height), so the groups are those of cutting the tree at height ``d / 2``:
the same partition as ``scipy.cluster.hierarchy.fcluster(Z, t=d,
criterion="distance")`` on the average-linkage ``Z``, which keeps a cluster
when its merge distance is <= t (inclusive, as here).

Rooting: a clade depends on the root. A tree marked rooted is used as stored;
an unrooted one (a neighbour-joining tree, say) is first rooted at the
midpoint of its longest path (:func:`cladewright.rooting.midpoint_root`),
since its stored root is an arbitrary node. Pass ``root="stored"`` to use the
stored root anyway.

References
----------
Sokal, R. R. & Michener, C. D. (1958) A statistical method for evaluating
systematic relationships. Univ. Kansas Sci. Bull. 38:1409-1438 (UPGMA).
Sokal, R. R. & Rohlf, F. J. (1962) Taxon 11:33-40 (cutting a dendrogram at a
level; cophenetic values).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import NDArray

from .choices import CLUSTER_ROOTS
from .errors import InputError
from .paths import longest_paths

if TYPE_CHECKING:
    from .tree import Tree

__all__ = ["clusters_within", "clade_diameters", "REL_TOL"]

#: Relative slack on the threshold: a diameter is a sum of branch lengths,
#: which rounding may put a few units in the last place above the distance the
#: tree was built from; ``diameter <= d * (1 + REL_TOL)`` counts as within d.
REL_TOL = 1e-9


def clade_diameters(tree: Tree) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Largest leaf-to-leaf path length inside every clade, and every node's
    height (longest path down to a leaf).

    Parameters
    ----------
    tree : Tree
        Used as stored; missing lengths count as 0.

    Returns
    -------
    diameter, height : float64 arrays (m,)
        Leaves have 0 for both.

    References
    ----------
    Sokal & Rohlf (1962) Taxon 11:33-40 (cophenetic values of a dendrogram).

    Example
    -------
    >>> from cladewright.tree import Tree
    >>> t = Tree([3, 3, 4, 4, -1], [1.0, 2.0, 1.0, 0.5, np.nan], list("abc"), rooted=True)
    >>> clade_diameters(t)[0].tolist()
    [0.0, 0.0, 0.0, 3.0, 3.5]
    """
    paths = longest_paths(tree.parent, tree.length, tree.postorder(), tree.n_leaves)
    # A leaf's clade has no path (-inf) and counts 0; a clade of
    # negative-length paths only can have a negative true diameter, never
    # relevant for d >= 0, so diameters are floored at 0.
    return np.maximum(paths.diameter, 0.0), paths.height


def _branch_name(tree: Tree, v: int) -> str:
    """'the branch above taxon x' or 'the branch above the clade of a, b and 3 more'."""
    names = tree.leaf_names
    if v < tree.n_leaves:
        return f"the branch above taxon {names[v]!r}"
    below, stack = [], [v]
    while stack:  # an error message's few branches: a walk down is enough
        u = stack.pop()
        if u < tree.n_leaves:
            below.append(names[u])
        else:
            stack.extend(tree.children(u).tolist())
    below.sort()
    shown = ", ".join(repr(x) for x in below[:2]) + (f" and {len(below) - 2} more" if len(below) > 2 else "")
    return f"the branch above the clade of {shown}"


def _need_lengths(tree: Tree, source: str | None = None) -> None:
    """Raise InputError unless every branch has a length: a path length
    cannot be measured over a branch without one (counting it as 0 would put
    taxa into one group silently)."""
    branches = np.flatnonzero(tree.parent >= 0)
    missing = branches[~np.isfinite(tree.length[branches])]
    if missing.size == 0:
        return
    if missing.size == branches.size:
        raise InputError("the tree has no branch lengths, so taxa cannot be grouped by path length; give a tree "
                         "with branch lengths", source=source)
    shown = "; ".join(_branch_name(tree, int(v)) for v in missing[:3])
    more = f"; and {missing.size - 3} more" if missing.size > 3 else ""
    verb = "has" if missing.size == 1 else "have"
    raise InputError(f"{missing.size} of the tree's {branches.size} branches {verb} no length ({shown}{more}), "
                     "so taxa cannot be grouped by path length; give every branch a length", source=source)


def clusters_within(tree: Tree, d: float, *, root: str = "auto", source: str | None = None
                    ) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Split the leaves into the largest clades of diameter at most ``d``.

    Parameters
    ----------
    tree : Tree
        Every branch must have a length.
    d : float
        Threshold on path length (substitutions per site for a distance
        tree), >= 0. Inclusive: a clade whose diameter equals ``d`` (within a
        relative :data:`REL_TOL`) is one group.
    root : {"auto", "stored", "midpoint"}
        ``auto``: a rooted tree as stored, an unrooted one midpoint-rooted
        first; ``stored``: the stored root; ``midpoint``: always midpoint-root.
    source : str, optional
        Name of the tree's file, for error messages.

    Returns
    -------
    labels : int64 array (n,)
        Group number of each leaf, in ``tree.leaf_names`` order; groups are
        numbered from 1, largest first, groups of equal size in the order
        of their alphabetically first taxon name.
    sizes : int64 array (G,)
        ``sizes[g - 1]`` is the number of taxa in group ``g`` (non-increasing).

    Raises
    ------
    InputError
        A threshold that is not a finite number >= 0; a tree with a branch
        without a length (the message names up to three such branches).

    References
    ----------
    Sokal & Michener (1958) (UPGMA); Sokal & Rohlf (1962) Taxon 11:33-40.

    Example
    -------
    >>> from cladewright.tree import Tree
    >>> t = Tree([3, 3, 4, 4, -1], [1.0, 1.0, 2.0, 1.0, np.nan], list("abc"), rooted=True)
    >>> labels, sizes = clusters_within(t, 2.0)
    >>> labels.tolist(), sizes.tolist()
    ([1, 1, 2], [2, 1])
    """
    try:
        d = float(d)
    except (TypeError, ValueError):
        raise InputError(f"the distance threshold {d!r} is not a number; give a value such as 0.02") from None
    if not math.isfinite(d) or d < 0:
        raise InputError(f"the distance threshold {d} must be a finite number >= 0; give a value such as 0.02")
    if root not in CLUSTER_ROOTS:
        raise ValueError(f"root must be 'auto', 'stored' or 'midpoint', not {root!r}")
    _need_lengths(tree, source)
    if root == "midpoint" or (root == "auto" and not tree.rooted and tree.n_leaves > 1):
        from .rooting import midpoint_root
        tree = midpoint_root(tree)
    n = tree.n_leaves
    diam, _ = clade_diameters(tree)
    within = diam <= d * (1.0 + REL_TOL)
    par = tree.parent
    parent_within = np.zeros_like(within)
    has_par = par >= 0
    parent_within[has_par] = within[par[has_par]]
    top = within & ~parent_within
    # Each node belongs to the group of its nearest top ancestor (itself if a
    # top); parents come first in preorder.
    group_of = np.full(tree.n_nodes, -1, dtype=np.int64)
    tops = np.flatnonzero(top)
    group_of[tops] = np.arange(tops.size)
    g = group_of.tolist()
    p_list = par.tolist()
    for v in tree.preorder().tolist():
        if g[v] < 0 and p_list[v] >= 0:
            g[v] = g[p_list[v]]
    raw = np.array(g[:n], dtype=np.int64)
    sizes = np.bincount(raw, minlength=tops.size)
    names = tree.leaf_names
    first_name: list[str | None] = [None] * tops.size
    for i in np.argsort(np.array(names, dtype=object), kind="stable").tolist():
        if first_name[raw[i]] is None:
            first_name[raw[i]] = names[i]
    order = sorted(range(tops.size), key=lambda k: (-int(sizes[k]), first_name[k]))
    rank = np.empty(tops.size, dtype=np.int64)
    rank[order] = np.arange(1, tops.size + 1)
    return rank[raw], sizes[order].astype(np.int64)
