"""Rooting a tree: at the midpoint of its longest leaf-to-leaf path, or on the
branch that separates an outgroup.

Both work on the unrooted tree: a stored root of degree 2 is first dissolved
(its two branches become one, lengths added) and a root with a single child
is dropped, so rooting an already rooted tree again moves its root. The new
root is a node of degree 2 placed on one branch, which is cut in two; the
branches on the path from that branch to the old root change direction.

Support belongs to branches (to the split a branch makes), not to nodes: when
a branch changes direction its support and length move with it to the node
now below it, so every split keeps its support (and the text it was read
from, so that it is written back exactly as read). The two halves of the cut
branch make one split and both carry its support. Non-numeric internal labels
stay with their nodes; a label on a dissolved root is dropped.

References
----------
Robinson, D. F. & Foulds, L. R. (1981) Comparison of phylogenetic trees.
Math. Biosci. 53:131-147 (splits of an unrooted tree).
"""

from __future__ import annotations

from typing import NoReturn, Sequence

import numpy as np
from numpy.typing import NDArray

from .errors import InputError
from .paths import longest_paths
from .tree import Tree

__all__ = ["midpoint_root", "outgroup_root", "root_tree"]

#: The unrooted tree's arrays, as :func:`_unrooted_arrays` gives them: par, length, support, alive, post, text.
_Unrooted = tuple[NDArray[np.int64], NDArray[np.float64], NDArray[np.float64], NDArray[np.bool_], NDArray[np.int64],
                  NDArray[np.object_]]


def _unrooted_arrays(tree: Tree) -> _Unrooted:
    """The tree with its root dissolved, as arrays over the original node ids.

    Returns
    -------
    par : int64 array (m,)
        Neighbour towards the new top node, -1 for the top and for dead nodes.
    length, support : float64 arrays (m,)
        Of the branch from each node to ``par``.
    alive : bool array (m,)
        False for dissolved root nodes.
    post : int64 array
        Live nodes, children before parents (a postorder of ``par``).
    text : object array (m,)
        The text each support value was read from (None where none), moved
        with its support.
    """
    n = tree.n_leaves
    par = tree.parent.copy()
    length = np.array(tree.length, dtype=np.float64)
    support = np.array(tree.support, dtype=np.float64)
    text = np.empty(tree.n_nodes, dtype=object)
    if tree.support_text is not None:
        text[:] = tree.support_text
    alive = np.ones(tree.n_nodes, dtype=bool)
    root = tree.root
    kids = tree.children(root)
    while root >= n and kids.size == 1:
        # A root with one child has no meaning on an unrooted tree.
        alive[root] = False
        root = int(kids[0])
        par[root] = -1
        length[root] = support[root] = np.nan
        text[root] = None
        kids = tree.children(root)
    if root >= n and kids.size == 2:
        a, b = int(kids[0]), int(kids[1])
        alive[root] = False
        # b finishes after a in postorder, so making b the top keeps the
        # stored postorder valid (children before parents).
        la, lb = length[a], length[b]
        par[b] = -1
        par[a] = b
        length[a] = np.nan if (la != la and lb != lb) else np.nansum([la, lb])
        # Tree.splits reports a root split under the first child: prefer it.
        if support[a] != support[a]:
            support[a], text[a] = support[b], text[b]
        length[b] = support[b] = np.nan
        text[b] = None
    post = tree.postorder()
    post = post[alive[post]]
    return par, length, support, alive, post, text


def _cut(tree: Tree, arrays: _Unrooted, u: int, x: float) -> Tree:
    """A rooted Tree with its root on the branch from ``u`` to ``par[u]``, at
    distance ``x`` from ``u`` (``x`` nan when the branch has no length)."""
    par, length, support, alive, _, text = arrays
    n, m = tree.n_leaves, tree.n_nodes
    w = int(par[u])
    total = length[u]
    new_par = np.append(par, -1)
    new_len = np.append(length, np.nan)
    new_sup = np.append(support, np.nan)
    new_text = np.append(text, np.array([None], dtype=object))
    # The path from w up to the top changes direction: each node hangs from
    # the one it used to be the parent of, taking that branch's length and
    # support with it.
    walk = [w]
    p = int(par[w])
    while p >= 0:
        walk.append(p)
        p = int(par[p])
    path = np.array(walk, dtype=np.int64)
    new_par[path[1:]] = path[:-1]
    new_len[path[1:]] = length[path[:-1]]
    new_sup[path[1:]] = support[path[:-1]]
    new_text[path[1:]] = text[path[:-1]]
    r = m
    new_par[u] = new_par[w] = r
    if total == total:
        x = min(max(float(x), 0.0), float(total))
        new_len[u], new_len[w] = x, float(total) - x
    else:
        new_len[u] = new_len[w] = np.nan
    new_sup[u] = new_sup[w] = support[u]
    new_text[u] = new_text[w] = text[u]
    internal = np.flatnonzero(alive[n:]) + n
    keep = np.concatenate([np.arange(n), internal, [r]])
    index = np.full(m + 1, -1, dtype=np.int64)
    index[keep] = np.arange(keep.size)
    parent = np.where(new_par[keep] >= 0, index[new_par[keep]], -1)
    old_labels = list(tree.labels) + [None]
    labels = [old_labels[v] for v in keep.tolist()]
    return Tree(parent, new_len[keep], tree.leaf_names, support=new_sup[keep], labels=labels, rooted=True,
                support_text=new_text[keep].tolist())


def _need_two(tree: Tree, what: str) -> None:
    if tree.n_leaves < 2:
        raise InputError(f"{what} needs a tree of at least 2 leaves, this one has {tree.n_leaves}")


def midpoint_root(tree: Tree) -> Tree:
    """Root a tree halfway along its longest leaf-to-leaf path.

    Parameters
    ----------
    tree : Tree
        Rooted or unrooted; a stored root is dissolved first. Missing branch
        lengths count as 0 (at least one length must be given).

    Returns
    -------
    Tree
        ``rooted=True``, a root of degree 2 on the branch holding the
        midpoint; the deepest leaf on each side lies at half the diameter.

    Notes
    -----
    O(n): one postorder pass (:func:`cladewright.paths.longest_paths`)
    keeps, for every node, the two longest paths down to a leaf through
    different children; the diameter is the largest sum of such a pair
    (exact for any signs of the lengths). Ties go to the first pair found in
    postorder. With negative lengths the root goes on the first branch,
    walking from the farther end, where the running length reaches half the
    diameter.

    References
    ----------
    Midpoint rooting: common practice. Splits: Robinson & Foulds (1981)
    Math. Biosci. 53:131-147.

    Example
    -------
    >>> t = Tree([3, 3, 3, -1], [1.0, 1.0, 4.0, np.nan], ["a", "b", "c"])
    >>> midpoint_root(t).to_newick()
    '((a:1.0,b:1.0):1.5,c:2.5);\\n'
    """
    _need_two(tree, "midpoint rooting")
    if not np.any(np.isfinite(tree.length)):
        raise InputError("the tree has no branch lengths, so it has no midpoint; root it on an outgroup instead")
    arrays = _unrooted_arrays(tree)
    par, length, _, _, post, _ = arrays
    paths = longest_paths(par, length, post, tree.n_leaves)
    top = int(post[-1])  # the top of the unrooted tree comes last in postorder
    diameter = float(paths.diameter[top])
    end1, end2, apex = paths.ends[top].tolist()
    ln = np.nan_to_num(length, nan=0.0).tolist()
    p_list = par.tolist()
    half = diameter / 2.0
    # Walk up from the end with the longer path to the apex (unless that end
    # is the apex itself, a leaf at the top): the running sum reaches half
    # the diameter by the apex, since that path is at least half of it.
    u, run = (end1 if end1 != apex else end2), 0.0
    while True:
        step = ln[u]
        if run + step >= half or p_list[u] == apex:
            break
        run += step
        u = p_list[u]
    return _cut(tree, arrays, u, half - run)


def _resolve_names(tree: Tree, taxa: Sequence[str]) -> NDArray[np.int64]:
    """Leaf indices of ``taxa``; an exact name first, else the name with '_'
    and ' ' exchanged (Newick reads an unquoted '_' as a blank)."""
    names = tree.leaf_names
    lookup = {x: i for i, x in enumerate(names)}
    found, unknown = [], []
    for t in taxa:
        t = t.strip()
        if not t:
            continue
        for cand in (t, t.replace("_", " "), t.replace(" ", "_")):
            if cand in lookup:
                found.append(lookup[cand])
                break
        else:
            unknown.append(t)
    if unknown:
        shown = ", ".join(repr(x) for x in unknown[:5]) + (f" and {len(unknown) - 5} more" if len(unknown) > 5 else "")
        raise InputError(f"outgroup taxon {shown} is not in the tree; check the spelling against the tree's leaf names")
    found = sorted(set(found))
    if not found:
        raise InputError("the outgroup is empty; give one or more taxon names separated by commas")
    if len(found) == tree.n_leaves:
        raise InputError("the outgroup holds every taxon of the tree; leave at least one taxon out of it")
    return np.array(found, dtype=np.int64)


def outgroup_root(tree: Tree, taxa: str | Sequence[str]) -> Tree:
    """Root a tree on the branch that separates an outgroup from the rest.

    Parameters
    ----------
    tree : Tree
        Rooted or unrooted; a stored root is dissolved first.
    taxa : str or sequence of str
        Outgroup taxon names (one name, or several). The outgroup must be one
        side of a split of the unrooted tree; a single taxon always is.

    Returns
    -------
    Tree
        ``rooted=True``, with a root of degree 2 halfway along the branch
        separating the outgroup.

    Raises
    ------
    InputError
        A name not in the tree, an empty outgroup or one holding every taxon,
        or an outgroup that is not a clade of the unrooted tree (the message
        names the taxa that break it: those in the smallest side of a split
        that holds the whole outgroup).

    References
    ----------
    Splits of an unrooted tree: Robinson & Foulds (1981) Math. Biosci.
    53:131-147. Outgroup rooting: common practice.

    Example
    -------
    >>> t = Tree([4, 4, 5, 5, 5, -1], [1.0, 1.0, 1.0, 1.0, 2.0, np.nan], list("abcd"))
    >>> outgroup_root(t, ["c"]).to_newick()
    '(((a:1.0,b:1.0):2.0,d:1.0):0.5,c:0.5);\\n'
    """
    _need_two(tree, "outgroup rooting")
    if isinstance(taxa, str):
        taxa = [taxa]
    out = _resolve_names(tree, taxa)
    n, k = tree.n_leaves, out.size
    arrays = _unrooted_arrays(tree)
    par, length, _, _, post, _ = arrays
    size = np.zeros(tree.n_nodes, dtype=np.int64)
    size[:n] = 1
    hits = np.zeros(tree.n_nodes, dtype=np.int64)
    hits[out] = 1
    p_list = par.tolist()
    size_l, hits_l = size.tolist(), hits.tolist()
    for v in post.tolist():
        p = p_list[v]
        if p >= 0:
            size_l[p] += size_l[v]
            hits_l[p] += hits_l[v]
    size, hits = np.array(size_l), np.array(hits_l)
    post_has_parent = post[par[post] >= 0]
    s, h = size[post_has_parent], hits[post_has_parent]
    clade = ((h == k) & (s == k)) | ((h == 0) & (s == n - k))
    if np.any(clade):
        u = int(post_has_parent[np.argmax(clade)])
        return _cut(tree, arrays, u, length[u] / 2.0)
    _not_a_clade(tree, arrays, out, size, hits, post_has_parent)


def _not_a_clade(tree: Tree, arrays: _Unrooted, out: NDArray[np.int64], size: NDArray[np.int64],
                 hits: NDArray[np.int64], edges: NDArray[np.int64]) -> NoReturn:
    """Raise the error naming the taxa that keep ``out`` from being a clade."""
    par, _, _, _, post, _ = arrays
    n, k = tree.n_leaves, out.size
    s, h = size[edges], hits[edges]
    below = np.where(h == k, s - k, n + 1)      # the side under the branch holds the outgroup
    above = np.where(h == 0, n - s - k, n + 1)  # the side over it does
    i_b, i_a = int(np.argmin(below)), int(np.argmin(above))
    u = int(edges[i_b] if below[i_b] <= above[i_a] else edges[i_a])
    # Leaves under u: mark u, then every node whose parent is marked.
    mark = np.zeros(tree.n_nodes, dtype=bool)
    mark[u] = True
    p_list = par.tolist()
    mark_l = mark.tolist()
    for v in post[::-1].tolist():
        p = p_list[v]
        if p >= 0 and mark_l[p]:
            mark_l[v] = True
    side = np.array(mark_l[:n])
    if below[i_b] > above[i_a]:
        side = ~side
    side[out] = False
    names = tree.leaf_names
    extra = [names[i] for i in np.flatnonzero(side)]
    group = ", ".join(names[i] for i in out[:5]) + (f" and {k - 5} more" if k > 5 else "")
    shown = ", ".join(extra[:8]) + (f" and {len(extra) - 8} more" if len(extra) > 8 else "")
    raise InputError(f"the outgroup ({group}) is not a clade of the unrooted tree; taxa that break it: {shown} "
                     f"(the smallest clade holding the outgroup also holds them); add them to the outgroup "
                     f"or choose another outgroup")


def root_tree(tree: Tree, *, midpoint: bool = False, outgroup: Sequence[str] | None = None) -> Tree:
    """Root a tree at its midpoint or on an outgroup: exactly one of the two.

    Parameters
    ----------
    tree : Tree
    midpoint : bool
        Root at the midpoint of the longest leaf-to-leaf path (:func:`midpoint_root`).
    outgroup : sequence of str, optional
        Root on the branch that separates these taxa (:func:`outgroup_root`).

    Returns
    -------
    Tree
        See :func:`midpoint_root` and :func:`outgroup_root`.

    References
    ----------
    Robinson & Foulds (1981) Math. Biosci. 53:131-147 (splits).

    Examples
    --------
    >>> t = Tree([4, 4, 5, 5, 5, -1], [1.0, 1.0, 1.0, 1.0, 2.0, float("nan")], list("abcd"))
    >>> root_tree(t, outgroup=["c", "d"]).to_newick()
    '((a:1.0,b:1.0):1.0,(c:1.0,d:1.0):1.0);\\n'
    """
    if bool(midpoint) == (outgroup is not None):
        raise InputError("give exactly one of midpoint=True or outgroup=[taxa]")
    if outgroup is None:  # so midpoint is true
        return midpoint_root(tree)
    if isinstance(outgroup, str):
        raise InputError(f"outgroup={outgroup!r} is one string; give the taxa as a list, e.g. outgroup=['a', 'b']")
    return outgroup_root(tree, list(outgroup))
