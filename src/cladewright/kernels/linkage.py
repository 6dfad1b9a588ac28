"""Nearest-neighbour-chain agglomeration with the Lance–Williams update (numba).

One kernel serves every reducible linkage whose update is a Lance–Williams
formula: the coefficients come in as numbers, so a new method is a new row in
the table of :mod:`cladewright.build.linkage`, not new code here.

References
----------
Lance, G. N. & Williams, W. T. (1967) A general theory of classificatory
sorting strategies. 1. Hierarchical systems. Computer Journal 9:373–380.
Murtagh, F. (1983) A survey of recent advances in hierarchical clustering
algorithms. Computer Journal 26:354–359.
Müllner, D. (2011) Modern hierarchical, agglomerative clustering algorithms.
arXiv:1109.2378.
"""

import numba as nb
import numpy as np


@nb.njit(cache=True, inline="always")
def _lance_williams(dxk, dyk, dxy, nx, ny, ai, aj, b, g, size_weighted):
    """d(k, x∪y) = a_x d(k,x) + a_y d(k,y) + b d(x,y) + g |d(k,x) − d(k,y)|.

    Grouped so that the usual special cases come out exactly: with
    a_x = a_y = a the formula is (a − g) min + (a + g) max, which is min
    itself for single linkage and max for complete linkage (no rounding);
    size weighting is evaluated as a weighted mean (n_x d + n_y d) / (n_x + n_y).
    """
    if size_weighted:
        v = (nx * dxk + ny * dyk) / (nx + ny)
    elif ai == aj:
        lo = min(dxk, dyk)
        hi = max(dxk, dyk)
        return (ai - g) * lo + (ai + g) * hi + b * dxy
    else:
        v = ai * dxk + aj * dyk
    return v + b * dxy + g * abs(dxk - dyk)


@nb.njit(cache=True)
def nn_chain_linkage(D, ai, aj, b, g, size_weighted):
    """Agglomerate with the nearest-neighbour chain; D is overwritten.

    Parameters
    ----------
    D : float64 ndarray (n, n)
        Symmetric dissimilarities, zero diagonal. Used as work space.
    ai, aj, b, g : float
        Lance–Williams coefficients (a_i, a_j, beta, gamma); ``i`` is the
        merged cluster on the lower matrix row, ``j`` the one on the higher.
    size_weighted : bool
        Use a_i = n_i / (n_i + n_j), a_j = n_j / (n_i + n_j) instead of
        ``ai``, ``aj`` (UPGMA).

    Returns
    -------
    parent : int64 ndarray (2n − 1,)
        Leaves are 0..n−1, internal node n + k is the k-th merge in order of
        merge height (stable), so parents always have larger indices than
        their children; the root (2n − 2) has parent −1.
    height : float64 ndarray (2n − 1,)
        Node heights: half the merge distance, leaves at 0. Heights are made
        non-decreasing towards the root (guards against rounding; exact
        arithmetic never needs it for reducible linkages).

    Notes
    -----
    Tie rule (deterministic, and the one of Müllner 2011's description of the
    chain): the chain starts at the lowest active row; the nearest neighbour of
    the chain's tip is the previous chain element if it is among the nearest,
    otherwise the lowest row index at the minimum distance; the merged cluster
    takes the higher of the two rows and the lower row is retired.

    References
    ----------
    Murtagh (1983) Computer Journal 26:354–359; Müllner (2011) arXiv:1109.2378;
    Lance & Williams (1967) Computer Journal 9:373–380.
    """
    n = D.shape[0]
    mirror_upper(D)
    size = np.ones(n, np.int64)      # 0 marks a retired row
    node = np.arange(n)              # node id held by each row
    chain = np.empty(n, np.int64)
    clen = 0
    first = 0                        # lowest active row (only ever moves up)
    ma = np.empty(max(n - 1, 0), np.int64)
    mb = np.empty(max(n - 1, 0), np.int64)
    md = np.empty(max(n - 1, 0), np.float64)
    for k in range(n - 1):
        if clen == 0:
            while size[first] == 0:
                first += 1
            chain[0] = first
            clen = 1
        while True:
            x = chain[clen - 1]
            if clen > 1:
                y = chain[clen - 2]
                best = D[x, y]
            else:
                y = -1
                best = np.inf
            row = D[x]
            for i in range(n):
                if size[i] == 0 or i == x:
                    continue
                if y < 0 or row[i] < best:
                    best = row[i]
                    y = i
            if clen > 1 and y == chain[clen - 2]:
                break
            chain[clen] = y
            clen += 1
        clen -= 2
        if x > y:
            x, y = y, x
        ma[k] = node[x]
        mb[k] = node[y]
        md[k] = best
        nx = float(size[x])
        ny = float(size[y])
        rx = D[x]
        ry = D[y]
        for i in range(n):
            if size[i] == 0 or i == x or i == y:
                continue
            v = _lance_williams(rx[i], ry[i], best, nx, ny, ai, aj, b, g, size_weighted)
            ry[i] = v
            D[i, y] = v
        size[y] = size[x] + size[y]
        size[x] = 0
        node[y] = n + k

    # Heights never decrease towards the root; children precede parents in
    # chain order, so one forward pass suffices.
    for k in range(n - 1):
        for c in (ma[k], mb[k]):
            if c >= n and md[c - n] > md[k]:
                md[k] = md[c - n]
    order = np.argsort(md, kind="mergesort")
    newid = np.empty(2 * n - 1, np.int64)
    for i in range(n):
        newid[i] = i
    for r in range(n - 1):
        newid[n + order[r]] = n + r
    parent = np.full(2 * n - 1, -1, np.int64)
    height = np.zeros(2 * n - 1, np.float64)
    for k in range(n - 1):
        p = newid[n + k]
        parent[newid[ma[k]]] = p
        parent[newid[mb[k]]] = p
        height[p] = 0.5 * md[k]
    return parent, height


@nb.njit(cache=True)
def mirror_upper(D):
    """Copy the upper triangle onto the lower one, in place, in cache blocks.

    A validated matrix may be asymmetric within rounding; the kernels read
    rows, so both halves must hold the very same numbers for the result not
    to depend on which half is read.
    """
    n = D.shape[0]
    bs = 64
    for i0 in range(0, n, bs):
        for j0 in range(i0, n, bs):
            for i in range(i0, min(i0 + bs, n)):
                for j in range(max(j0, i + 1), min(j0 + bs, n)):
                    D[j, i] = D[i, j]
