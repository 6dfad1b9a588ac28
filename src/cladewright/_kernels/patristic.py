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
    m = parent.shape[0]
    n = n_leaves
    depth = np.zeros(m, np.float64)
    # Reverse postorder visits parents before children.
    for t in range(m - 1, -1, -1):
        v = postorder[t]
        p = parent[v]
        if p >= 0:
            depth[v] = depth[p] + length[v]
    seq = np.empty(n, np.int64)       # leaves in postorder
    lo = np.full(m, -1, np.int64)     # leaf interval [lo, hi) gathered so far
    hi = np.full(m, -1, np.int64)
    out = np.zeros((n, n), np.float64)
    count = 0
    for t in range(m):
        v = postorder[t]
        if v < n:
            seq[count] = v
            lo[v] = count
            count += 1
            hi[v] = count
        p = parent[v]
        if p < 0:
            continue
        if lo[p] < 0:
            lo[p] = lo[v]
            hi[p] = hi[v]
            continue
        # Leaves gathered below p so far pair with v's leaves at ancestor p.
        twice = 2.0 * depth[p]
        for a in range(lo[p], hi[p]):
            la = seq[a]
            da = depth[la] - twice
            row = out[la]
            for b in range(lo[v], hi[v]):
                lb = seq[b]
                d = da + depth[lb]
                row[lb] = d
                out[lb, la] = d
        hi[p] = hi[v]
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
