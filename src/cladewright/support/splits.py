"""Internal: the split bitsets that support, consensus and tree comparison count on.

Splits as bitsets: grouping equal splits and tallying them over many trees.

Every tree is reduced to its unrooted bipartitions, given as rows of uint64
bitsets by :meth:`cladewright.tree.Tree.splits` over one shared leaf order
(the first tree's), each row canonicalised so that the first leaf of that
order is outside the set. Two trees share a split exactly when they share a
row, so counting splits over many trees is grouping equal rows: a 64-bit hash
per row, grouped with one sort, then checked word for word (a hash collision
falls back to an exact row sort), which keeps 1,000 replicates of 1,000 taxa
to a few vectorised passes.

The support measures (:mod:`cladewright.support.measures`), the consensus
(:mod:`cladewright.support.consensus`) and the tree distances
(:mod:`cladewright.support.compare`) are built on these helpers.

References
----------
Robinson & Foulds (1981) Math. Biosci. 53:131–147 (trees as sets of splits).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, NamedTuple, Sequence

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..errors import InputError

if TYPE_CHECKING:
    from collections.abc import Iterable

    from ..tree import Tree

__all__ = ["group_rows", "check_taxa", "leaf_positions", "split_lengths", "SplitTally", "tally_splits",
           "nonempty_trees"]

# Rows gathered before one grouping pass: bounds the memory of counting
# splits over many replicate trees.
_BATCH_ROWS = 1 << 18

_M1 = np.uint64(0xBF58476D1CE4E5B9)
_M2 = np.uint64(0x94D049BB133111EB)
_GOLDEN = np.uint64(0x9E3779B97F4A7C15)


def _mix(x: NDArray[np.uint64]) -> NDArray[np.uint64]:
    # A 64-bit finaliser (the splitmix64 constants): every input bit reaches
    # every output bit, so rows that differ in one leaf get unrelated hashes.
    x = x ^ (x >> np.uint64(30))
    x = x * _M1
    x = x ^ (x >> np.uint64(27))
    x = x * _M2
    return x ^ (x >> np.uint64(31))


def _row_hash(rows: NDArray[np.uint64]) -> NDArray[np.uint64]:
    h = np.full(rows.shape[0], _GOLDEN, dtype=np.uint64)
    for j in range(rows.shape[1]):  # one pass per 64-leaf word, vectorised over rows
        salt = np.uint64((0x9E3779B97F4A7C15 * (j + 1)) % (1 << 64))
        h = _mix(h ^ _mix(rows[:, j] + salt))
    return h


def group_rows(rows: ArrayLike) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """Group equal rows of a 2-D uint64 array exactly.

    Parameters
    ----------
    rows : uint64 array (N, w)

    Returns
    -------
    first : int64 array (G,)
        Index of one row of each group.
    inverse : int64 array (N,)
        Group of every row (``rows[i]`` equals ``rows[first[inverse[i]]]``);
        the numbering of groups is arbitrary.

    Examples
    --------
    >>> first, inv = group_rows(np.array([[1], [2], [1]], dtype=np.uint64))
    >>> bool(inv[0] == inv[2] != inv[1]), len(first)
    (True, 2)
    """
    rows = np.ascontiguousarray(rows, dtype=np.uint64)
    if rows.shape[0] == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    _, first, inverse = np.unique(_row_hash(rows), return_index=True, return_inverse=True)
    inverse = inverse.reshape(-1)
    if not np.array_equal(rows[first[inverse]], rows):
        # Two different splits share a hash: settle it with an exact sort.
        _, first, inverse = np.unique(rows, axis=0, return_index=True, return_inverse=True)
        inverse = inverse.reshape(-1)
    return first.astype(np.int64), inverse.astype(np.int64)


def check_taxa(names: Sequence[str], other: Sequence[str], what: str, source: str | None) -> None:
    """Refuse a tree whose leaves are not the reference's taxa.

    Parameters
    ----------
    names : list of str
        The reference tree's leaf names.
    other : list of str
        The other tree's leaf names (any order).
    what : str
        How messages name the other tree ("replicate tree 3").
    source : str or None
        The file of the other tree, for messages.

    Raises
    ------
    InputError
        When ``other`` repeats a name or holds other taxa; the message lists
        up to five missing and five extra names.
    """
    if other == names:
        return
    ref, got = set(names), set(other)
    if len(got) != len(other):
        raise InputError(f"{what} has repeated taxon names; give each leaf a unique name", source=source)
    if ref == got:
        return
    missing = [x for x in names if x not in got]
    extra = [x for x in other if x not in ref]

    def few(xs: list[str]) -> str:
        shown = ", ".join(repr(x) for x in xs[:5])
        return shown + (f" and {len(xs) - 5} more" if len(xs) > 5 else "") if xs else "none"

    raise InputError(
        f"{what} has different taxa from the reference tree: missing {few(missing)}; "
        f"extra {few(extra)}; give trees over the same taxa",
        source=source,
    )


def split_lengths(tree: Tree, nodes: NDArray[np.int64]) -> NDArray[np.float64]:
    """Length of the edge giving each split.

    Parameters
    ----------
    tree : Tree
    nodes : int array (k,)
        Nodes whose edges give the splits (as returned by ``tree.splits()``).

    Returns
    -------
    float64 array (k,)
        The edge lengths; the two edges at a degree-2 root form one unrooted
        edge, so there the split's length is their sum (nan when both are nan).
    """
    length = np.asarray(tree.length, dtype=np.float64)[nodes].copy()
    kids = tree.children(tree.root)
    if len(kids) == 2:
        a, b = (float(tree.length[c]) for c in kids)
        both = np.nan if np.isnan(a) and np.isnan(b) else np.nansum([a, b])
        length[np.isin(nodes, kids)] = both  # Tree.splits lists one of the two
    return length


def leaf_positions(names: Sequence[str], other: Sequence[str]) -> NDArray[np.int64]:
    """Position in ``names`` of each name of ``other`` (the same taxa, any order).

    Parameters
    ----------
    names, other : list of str

    Returns
    -------
    int64 array (len(other),)
    """
    ref = np.asarray(names)
    order = np.argsort(ref, kind="stable")
    return order[np.searchsorted(ref[order], np.asarray(other))].astype(np.int64)


class SplitTally(NamedTuple):
    """Every distinct split of a set of trees, with its counts (see :func:`tally_splits`)."""

    keys: NDArray[np.uint64]           # (G, w): one bitset row per distinct split
    tree_count: NDArray[np.float64]    # trees holding each split (a field named count would hide tuple.count)
    length_sum: NDArray[np.float64]    # sum of the split's finite lengths
    length_count: NDArray[np.float64]  # how many of those lengths were finite
    leaf_sum: NDArray[np.float64]      # (n,) sum of each leaf edge's finite lengths
    leaf_count: NDArray[np.float64]    # (n,) how many of those were finite


def tally_splits(names: Sequence[str], trees: Sequence[Tree], source: str | None, what: str) -> SplitTally:
    """Every distinct split of ``trees`` over the leaf order ``names``.

    Parameters
    ----------
    names : list of str
        The shared leaf order.
    trees : sequence of Tree
        Trees over the same taxa (checked with :func:`check_taxa`).
    source : str or None
        The trees' file, for messages.
    what : str
        How messages name one tree ("replicate tree", "tree").

    Returns
    -------
    SplitTally
        The distinct splits with the number of trees holding each and the
        sum and count of its finite lengths; plus the same sums for the leaf
        edges.
    """
    n = len(names)
    keys = np.zeros((0, (n + 63) // 64), dtype=np.uint64)
    count, lsum, lcnt = np.zeros(0), np.zeros(0), np.zeros(0)
    leaf_sum, leaf_cnt = np.zeros(n), np.zeros(n)
    batch, lens, rows = [], [], 0
    for r, t in enumerate(trees):
        check_taxa(names, t.leaf_names, f"{what} {r + 1}", source)
        pos = leaf_positions(names, t.leaf_names)
        ll = split_lengths(t, np.arange(n))
        ok = np.isfinite(ll)
        leaf_sum[pos[ok]] += ll[ok]
        leaf_cnt[pos[ok]] += 1
        # Tree.splits lists each bipartition of a tree once, so one row is
        # one tree holding the split.
        bits, nodes = t.splits(order=names)
        batch.append(bits)
        lens.append(split_lengths(t, nodes))
        rows += bits.shape[0]
        if rows < _BATCH_ROWS and r < len(trees) - 1:
            continue
        old = keys.shape[0]
        stacked = np.vstack([keys] + batch)
        first, inv = group_rows(stacked)
        g_old, g_new, ln = inv[:old], inv[old:], np.concatenate(lens)
        ok = np.isfinite(ln)

        def add(prev: NDArray[np.float64], groups: NDArray[np.int64],
                weights: NDArray[np.float64] | None = None) -> NDArray[Any]:
            return (np.bincount(g_old, weights=prev, minlength=first.size)
                    + np.bincount(groups, weights=weights, minlength=first.size))

        count = add(count, g_new)
        lsum = add(lsum, g_new[ok], ln[ok])
        lcnt = add(lcnt, g_new[ok])
        keys = stacked[first]
        batch, lens, rows = [], [], 0
    return SplitTally(keys, count, lsum, lcnt, leaf_sum, leaf_cnt)


def nonempty_trees(trees: Iterable[Tree], what: str) -> list[Tree]:
    """``trees`` as a list, refused when empty.

    Parameters
    ----------
    trees : iterable of Tree
    what : str
        How the message names them ("replicate trees").

    Returns
    -------
    list of Tree
    """
    trees = list(trees)
    if not trees:
        raise InputError(f"no {what} given; give at least one tree")
    return trees
