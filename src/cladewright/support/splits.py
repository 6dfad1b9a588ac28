"""Split-based support and tree comparison.

Every tree is reduced to its unrooted bipartitions, given as rows of uint64
bitsets by :meth:`cladewright.tree.Tree.splits` over one shared leaf order
(the first tree's), each row canonicalised so that the first leaf of that
order is outside the set. Two trees share a split exactly when they share a
row, so counting splits over many trees is grouping equal rows: a 64-bit hash
per row, grouped with one sort, then checked word for word (a hash collision
falls back to an exact row sort), which keeps 1,000 replicates of 1,000 taxa
to a few vectorised passes.

References
----------
Felsenstein (1985) Evolution 39:783–791; Lemoine et al. (2018) Nature
556:452–456; Margush & McMorris (1981) Bull. Math. Biol. 43:239–244;
Robinson & Foulds (1981) Math. Biosci. 53:131–147; Kuhner & Felsenstein
(1994) Mol. Biol. Evol. 11:459–468.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError

__all__ = ["fbp_support", "tbe_support", "apply_support", "majority_consensus",
           "robinson_foulds", "branch_score", "group_rows"]

# Rows gathered before one grouping pass: bounds the memory of counting
# splits over many replicate trees.
_BATCH_ROWS = 1 << 18

_M1 = np.uint64(0xBF58476D1CE4E5B9)
_M2 = np.uint64(0x94D049BB133111EB)
_GOLDEN = np.uint64(0x9E3779B97F4A7C15)


def _mix(x):
    # A 64-bit finaliser (the splitmix64 constants): every input bit reaches
    # every output bit, so rows that differ in one leaf get unrelated hashes.
    x = x ^ (x >> np.uint64(30))
    x = x * _M1
    x = x ^ (x >> np.uint64(27))
    x = x * _M2
    return x ^ (x >> np.uint64(31))


def _row_hash(rows):
    h = np.full(rows.shape[0], _GOLDEN, dtype=np.uint64)
    for j in range(rows.shape[1]):  # one pass per 64-leaf word, vectorised over rows
        salt = np.uint64((0x9E3779B97F4A7C15 * (j + 1)) % (1 << 64))
        h = _mix(h ^ _mix(rows[:, j] + salt))
    return h


def group_rows(rows):
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


def _check_taxa(names, other, what, source):
    if other == names:
        return
    ref, got = set(names), set(other)
    if len(got) != len(other):
        raise InputError(f"{what} has repeated taxon names; give each leaf a unique name", source=source)
    if ref == got:
        return
    missing = [x for x in names if x not in got]
    extra = [x for x in other if x not in ref]

    def few(xs):
        shown = ", ".join(repr(x) for x in xs[:5])
        return shown + (f" and {len(xs) - 5} more" if len(xs) > 5 else "") if xs else "none"

    raise InputError(
        f"{what} has different taxa from the reference tree: missing {few(missing)}; "
        f"extra {few(extra)}; give trees over the same taxa",
        source=source,
    )


def _split_lengths(tree, nodes):
    """Length of the edge giving each split; the two edges at a degree-2 root
    form one unrooted edge, so there the split's length is their sum."""
    length = np.asarray(tree.length, dtype=np.float64)[nodes].copy()
    kids = tree.children(tree.root)
    if len(kids) == 2:
        a, b = (float(tree.length[c]) for c in kids)
        both = np.nan if np.isnan(a) and np.isnan(b) else np.nansum([a, b])
        length[np.isin(nodes, kids)] = both  # Tree.splits lists one of the two
    return length


def _leaf_positions(names, other):
    ref = np.asarray(names)
    order = np.argsort(ref, kind="stable")
    return order[np.searchsorted(ref[order], np.asarray(other))].astype(np.int64)


def _tally(names, trees, source, what):
    """Every distinct split of ``trees`` over the leaf order ``names``, with
    the number of trees holding it and the sum and count of its finite
    lengths; plus the same sums for the leaf edges."""
    n = len(names)
    keys = np.zeros((0, (n + 63) // 64), dtype=np.uint64)
    count, lsum, lcnt = np.zeros(0), np.zeros(0), np.zeros(0)
    leaf_sum, leaf_cnt = np.zeros(n), np.zeros(n)
    batch, lens, rows = [], [], 0
    for r, t in enumerate(trees):
        _check_taxa(names, t.leaf_names, f"{what} {r + 1}", source)
        pos = _leaf_positions(names, t.leaf_names)
        ll = _split_lengths(t, np.arange(n))
        ok = np.isfinite(ll)
        leaf_sum[pos[ok]] += ll[ok]
        leaf_cnt[pos[ok]] += 1
        # Tree.splits lists each bipartition of a tree once, so one row is
        # one tree holding the split.
        bits, nodes = t.splits(order=names)
        batch.append(bits)
        lens.append(_split_lengths(t, nodes))
        rows += bits.shape[0]
        if rows < _BATCH_ROWS and r < len(trees) - 1:
            continue
        old = keys.shape[0]
        stacked = np.vstack([keys] + batch)
        first, inv = group_rows(stacked)
        g_old, g_new, ln = inv[:old], inv[old:], np.concatenate(lens)
        ok = np.isfinite(ln)

        def add(prev, groups, weights=None):
            return (np.bincount(g_old, weights=prev, minlength=first.size)
                    + np.bincount(groups, weights=weights, minlength=first.size))

        count = add(count, g_new)
        lsum = add(lsum, g_new[ok], ln[ok])
        lcnt = add(lcnt, g_new[ok])
        keys = stacked[first]
        batch, lens, rows = [], [], 0
    return keys, count, lsum, lcnt, leaf_sum, leaf_cnt


def _as_list(trees, what):
    trees = list(trees)
    if not trees:
        raise InputError(f"no {what} given; give at least one tree")
    return trees


def fbp_support(tree, replicates, *, source=None):
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
    replicates = _as_list(replicates, "replicate trees")
    ref_bits, _ = tree.splits()
    keys, count, *_ = _tally(tree.leaf_names, replicates, source, "replicate tree")
    _, inv = group_rows(np.vstack([keys, ref_bits]))
    held = np.bincount(inv[: keys.shape[0]], weights=count, minlength=inv.size + 1)
    return 100.0 * held[inv[keys.shape[0]:]] / len(replicates)


def tbe_support(tree, replicates, *, source=None):
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
    replicate nodes, i.e. O(n^2), compiled (:mod:`cladewright.kernels.transfer`).

    References
    ----------
    Lemoine et al. (2018) Nature 556:452–456.
    """
    from ..kernels.transfer import transfer_distances

    replicates = _as_list(replicates, "replicate trees")
    names = tree.leaf_names
    n = len(names)
    ref_bits, _ = tree.splits()
    ref_bits = np.ascontiguousarray(ref_bits, dtype=np.uint64)
    size = np.bitwise_count(ref_bits).sum(axis=1).astype(np.int64)
    scale = (np.minimum(size, n - size) - 1).astype(np.float64)
    total = np.zeros(ref_bits.shape[0])
    for r, rep in enumerate(replicates):
        _check_taxa(names, rep.leaf_names, f"replicate tree {r + 1}", source)
        pos = _leaf_positions(names, rep.leaf_names)
        d = transfer_distances(ref_bits, size, n, np.ascontiguousarray(rep.parent, dtype=np.int64),
                               np.ascontiguousarray(rep.postorder(), dtype=np.int64), pos)
        total += 1.0 - d / scale
    return 100.0 * total / len(replicates)


def apply_support(tree, values):
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
    lengths = _split_lengths(tree, nodes)
    all_lengths = np.asarray(tree.length, dtype=np.float64)
    finite = np.isfinite(all_lengths)
    scale = float(np.abs(all_lengths[finite]).max()) if finite.any() else 0.0
    support[nodes[np.isfinite(lengths) & (np.abs(lengths) <= ZERO_TOLERANCE * scale)]] = np.nan
    return tree.with_support(support)


def majority_consensus(trees, threshold=0.5, *, source=None):
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

    trees = _as_list(trees, "trees")
    if not 0.5 <= threshold <= 1.0:
        raise InputError(f"consensus threshold {threshold} is outside 0.5..1; give a value in that range")
    names = trees[0].leaf_names
    n = len(names)
    keys, count, lsum, lcnt, leaf_sum, leaf_cnt = _tally(names, trees, source, "tree")

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


def _paired_splits(tree_a, tree_b, trivial, source):
    _check_taxa(tree_a.leaf_names, tree_b.leaf_names, "second tree", source)
    a_bits, a_nodes = tree_a.splits(trivial=trivial)
    b_bits, b_nodes = tree_b.splits(order=tree_a.leaf_names, trivial=trivial)
    _, inv = group_rows(np.vstack([a_bits, b_bits]))
    return inv[: a_bits.shape[0]], inv[a_bits.shape[0]:], a_nodes, b_nodes


def robinson_foulds(tree_a, tree_b, *, source=None):
    """Robinson–Foulds distance on unrooted nontrivial splits.

    Parameters
    ----------
    tree_a, tree_b : Tree
        Trees over the same taxa.
    source : str, optional
        Name of the file of ``tree_b``, for error messages.

    Returns
    -------
    dict
        ``rf`` (splits in one tree only), ``max`` (2(n - 3), the largest
        distance between two trees of n leaves; 0 when n < 4),
        ``normalised`` (rf / max, 0 when max is 0), ``shared``, ``only_a``,
        ``only_b`` (distinct splits).

    References
    ----------
    Robinson & Foulds (1981) Math. Biosci. 53:131–147.

    Examples
    --------
    >>> from cladewright.tree import Tree
    >>> t = Tree([5, 5, 6, 6, 7, 7, 7, -1], [1.0] * 7 + [np.nan], list("abcde"))
    >>> u = Tree([5, 6, 5, 6, 7, 7, 7, -1], [1.0] * 7 + [np.nan], list("abcde"))
    >>> robinson_foulds(t, u)["rf"]
    4
    """
    ga, gb, _, _ = _paired_splits(tree_a, tree_b, False, source)
    ua, ub = np.unique(ga), np.unique(gb)
    shared = int(np.intersect1d(ua, ub).size)
    only_a, only_b = int(ua.size) - shared, int(ub.size) - shared
    n = len(tree_a.leaf_names)
    top = 2 * (n - 3) if n > 3 else 0
    rf = only_a + only_b
    return {"rf": rf, "max": top, "normalised": rf / top if top else 0.0,
            "shared": shared, "only_a": only_a, "only_b": only_b}


def branch_score(tree_a, tree_b, *, source=None):
    """Branch score distance between two trees.

    ``sqrt(sum over splits of (len_a - len_b)^2)`` over every split of
    either tree, leaf edges included; a split missing from a tree has length
    0 there, and so has an edge without a length.

    Parameters
    ----------
    tree_a, tree_b : Tree
        Trees over the same taxa.
    source : str, optional
        Name of the file of ``tree_b``, for error messages.

    Returns
    -------
    float

    References
    ----------
    Kuhner & Felsenstein (1994) Mol. Biol. Evol. 11:459–468 (the branch
    score is the sum of squares; this returns its square root).
    """
    ga, gb, a_nodes, b_nodes = _paired_splits(tree_a, tree_b, True, source)
    g_all = int(max(ga.max(initial=-1), gb.max(initial=-1))) + 1
    la = np.nan_to_num(_split_lengths(tree_a, a_nodes))
    lb = np.nan_to_num(_split_lengths(tree_b, b_nodes))
    diff = np.bincount(ga, weights=la, minlength=g_all) - np.bincount(gb, weights=lb, minlength=g_all)
    return float(np.sqrt(np.sum(diff * diff)))
