"""Leaf-to-leaf path lengths of a tree in parent-array form (numba).

Every pair of leaves is written once, at their last common ancestor: when a
child's subtree is finished in postorder, its leaves are paired with the
leaves already gathered below its parent. A subtree's leaves are contiguous
in postorder, so each gathered set is one interval of the leaf sequence and
the fill is O(n^2) with no set operations (the cophenetic-matrix fill of
Sokal & Rohlf 1962, on path lengths instead of merge heights).

References
----------
Sokal, R. R. & Rohlf, F. J. (1962) The comparison of dendrograms by objective
methods. Taxon 11:33–40.
"""

import numba as nb
import numpy as np


@nb.njit(cache=True)
def node_depths(parent, length, postorder):
    """Each node's path length from the root (reverse postorder visits parents before children)."""
    depth = np.zeros(parent.shape[0], np.float64)
    for t in range(parent.shape[0] - 1, -1, -1):
        v = postorder[t]
        if parent[v] >= 0:
            depth[v] = depth[parent[v]] + length[v]
    return depth


@nb.njit(cache=True)
def patristic_distances(parent, length, postorder, n_leaves):
    """Path-length matrix between the leaves.

    Parameters
    ----------
    parent : int64 ndarray (m,)
        Parent of each node, −1 for the root. Leaves are nodes 0..n_leaves−1.
    length : float64 ndarray (m,)
        Branch length to the parent (the caller maps missing lengths to 0).
    postorder : int64 ndarray (m,)
        All nodes, children before parents (children of a node in order).
    n_leaves : int
        Number of leaves n.

    Returns
    -------
    float64 ndarray (n, n)
        Sum of branch lengths on the path between each pair; zero diagonal.

    Example
    -------
    >>> import numpy as np
    >>> p = np.array([3, 3, 3, -1]); l = np.array([1.0, 2.0, 3.0, 0.0])
    >>> float(patristic_distances(p, l, np.array([0, 1, 2, 3]), 3)[0, 2])
    4.0
    """
    n = n_leaves
    depth, seq, lo, hi = leaf_intervals(parent, length, postorder, n)
    out = np.zeros((n, n), np.float64)
    for v in postorder:
        p = parent[v]
        if p < 0 or lo[v] == lo[p]:  # the root, or a first child: nothing gathered below p before it
            continue
        # The leaves of p's earlier children, [lo[p], lo[v]), pair with v's leaves at ancestor p.
        twice = 2.0 * depth[p]
        for a in range(lo[p], lo[v]):
            la = seq[a]
            da = depth[la] - twice
            row = out[la]
            for b in range(lo[v], hi[v]):
                lb = seq[b]
                d = da + depth[lb]
                row[lb] = d
                out[lb, la] = d
    return out


@nb.njit(cache=True)
def upper_pearson(X, Y):
    """Pearson correlation of the pairs i < j of two (n, n) matrices.

    Two passes (means, then centred sums) for accuracy. Returns nan when
    either side has no spread or there are fewer than two pairs.
    """
    n = X.shape[0]
    cnt = 0.0
    sx = 0.0
    sy = 0.0
    for i in range(n):
        for j in range(i + 1, n):
            sx += X[i, j]
            sy += Y[i, j]
            cnt += 1.0
    if cnt < 2.0:
        return np.nan
    mx = sx / cnt
    my = sy / cnt
    sxx = 0.0
    syy = 0.0
    sxy = 0.0
    for i in range(n):
        for j in range(i + 1, n):
            a = X[i, j] - mx
            b = Y[i, j] - my
            sxx += a * a
            syy += b * b
            sxy += a * b
    if sxx <= 0.0 or syy <= 0.0:
        return np.nan
    return sxy / np.sqrt(sxx * syy)


@nb.njit(cache=True)
def upper_relative_squares(D, P):
    """Sum over pairs i < j with D[i, j] != 0 of ((D − P) / D)^2, and their count."""
    n = D.shape[0]
    total = 0.0
    cnt = 0
    for i in range(n):
        for j in range(i + 1, n):
            d = D[i, j]
            if d != 0.0:
                e = (d - P[i, j]) / d
                total += e * e
                cnt += 1
    return total, cnt


@nb.njit(cache=True)
def leaf_intervals(parent, length, postorder, n_leaves):
    """What :func:`patristic_rows` needs, made once per tree: each node's depth
    (as in :func:`patristic_distances`), the leaves in postorder (``seq``),
    each node's interval [lo, hi) of that sequence and each leaf's place in it."""
    m = parent.shape[0]
    depth = node_depths(parent, length, postorder)
    seq = np.empty(n_leaves, np.int64)
    lo = np.full(m, -1, np.int64)
    hi = np.full(m, -1, np.int64)
    count = 0
    for v in postorder:
        if v < n_leaves:
            seq[count] = v
            lo[v] = count
            count += 1
            hi[v] = count
        p = parent[v]
        if p >= 0:
            lo[p] = lo[v] if lo[p] < 0 else lo[p]
            hi[p] = hi[v]
    return depth, seq, lo, hi


@nb.njit(cache=True)
def patristic_rows(parent, depth, seq, lo, hi, r0, r1):
    """Rows r0..r1 of the leaf path-length matrix, (r1 − r0, n), each entry
    the very number :func:`patristic_distances` puts there: for leaves a and
    b meeting at p, (depth a − 2 depth p) + depth b with a the leaf earlier in
    postorder. Going up from leaf i, each ancestor p meets the leaves of its
    interval outside the interval of the child it was reached from: O(n) per
    row, with no n x n array."""
    n = seq.shape[0]
    out = np.zeros((r1 - r0, n), np.float64)
    for i in range(r0, r1):
        row = out[i - r0]
        c = i
        p = parent[i]
        while p >= 0:
            twice = 2.0 * depth[p]
            for s in range(lo[p], lo[c]):  # leaves before the child's interval: earlier in postorder
                b = seq[s]
                row[b] = (depth[b] - twice) + depth[i]
            for s in range(hi[c], hi[p]):  # and after it
                b = seq[s]
                row[b] = (depth[i] - twice) + depth[b]
            c = p
            p = parent[p]
    return out


@nb.njit(cache=True)
def fit_sums(D, P, r0, sums, mx, my):
    """Add the pairs (i, j), i = r0 + row < j, of the row blocks D and P
    (same shape, rows r0.. of the full matrices) to ``sums``, in the order of
    :func:`upper_pearson` and :func:`upper_relative_squares` (row by row), so
    that blocks taken in order give the very same sums: [count, sum D, sum P,
    sum (D − mx)^2, sum (P − my)^2, sum (D − mx)(P − my), sum ((D − P) / D)^2
    over D != 0, count of D != 0]."""
    b, n = D.shape
    cnt, sx, sy, sxx, syy, sxy, rel, nrel = (sums[0], sums[1], sums[2], sums[3], sums[4], sums[5], sums[6],
                                             sums[7])
    for a in range(b):
        i = r0 + a
        for j in range(i + 1, n):
            d = D[a, j]
            p = P[a, j]
            cnt += 1.0
            sx += d
            sy += p
            x = d - mx
            y = p - my
            sxx += x * x
            syy += y * y
            sxy += x * y
            if d != 0.0:
                e = (d - p) / d
                rel += e * e
                nrel += 1.0
    sums[0], sums[1], sums[2], sums[3], sums[4], sums[5], sums[6], sums[7] = cnt, sx, sy, sxx, syy, sxy, rel, nrel
