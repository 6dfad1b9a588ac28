"""Greedy balanced-minimum-evolution insertion: a starting tree (numba).

Taxa enter one at a time, in matrix order, each on the branch where the
balanced (BME) length of the tree so far is least (Desper & Gascuel 2002).
Leaf k put on the branch above a child a of node v, rather than on the branch
above v itself, differs from it by one interchange around the branch (new
node, v), so, with B = X_b the sibling's clade and balanced averages Δ,

    L(k above a) = L(k above v) + 1/4 (Δ(k, X_a) + Δ(X_b, U_v) − Δ(X_a, X_b) − Δ(k, U_v)):

one preorder walk from the branch at the leaf the tree hangs from prices
every branch. Δ(k, X_w) comes from a postorder pass, Δ(k, U_w) from a
preorder pass, and the subtree averages from the table of
:mod:`cladewright._kernels.averages`, updated after each insertion in
O(n diam): O(n^2 diam) in all.

References
----------
Desper, R. & Gascuel, O. (2002) Fast and accurate phylogeny reconstruction
algorithms based on the minimum-evolution principle. J. Comput. Biol.
9:687–705.
"""

import numba as nb
import numpy as np

from .averages import build_table, get, sibling, update_path, work_arrays


@nb.njit(cache=True, nogil=True)
def bme_insertion(d, M):
    """A binary tree on the rows of ``d`` by greedy BME insertion.

    Parameters
    ----------
    d : float ndarray (n, n), n >= 3
    M : float ndarray (2n − 2, 2n − 2)
        Work space for the table of subtree averages (float64 or float32).

    Returns
    -------
    parent : int64 ndarray (2n − 2,)
        Leaves 0..n−1 in matrix order, internal nodes n..2n−3; hung from
        leaf 0 (parent −1 there; its one neighbour is node n at the start,
        and whatever node takes that branch later).
    """
    n = d.shape[0]
    m = 2 * n - 2
    parent = np.full(m, -1, np.int64)
    kid1 = np.full(m, -1, np.int64)
    kid2 = np.full(m, -1, np.int64)
    rows = np.arange(n)
    top = 0
    parent[1] = n
    parent[2] = n
    parent[n] = top
    kid1[top] = n
    kid1[n] = 1
    kid2[n] = 2
    pre, pos, count, size, stamp, clock = work_arrays(m, top)
    k = build_table(M, stamp, clock, parent, kid1, kid2, rows, d, n, pre, pos, count, size, True)
    down = np.zeros(m, np.float64)
    up = np.zeros(m, np.float64)
    cost = np.zeros(m, np.float64)
    for leaf in range(3, n):
        row = d[leaf]
        for t in range(k - 1, 0, -1):
            w = pre[t]
            if w < n:
                down[w] = row[w]
            else:
                down[w] = 0.5 * (down[kid1[w]] + down[kid2[w]])
        down[top] = row[top]
        first = kid1[top]
        best_w = first
        best = 0.0
        cost[first] = 0.0
        up[first] = row[top]
        for t in range(2, k):
            w = pre[t]
            p = parent[w]
            s = sibling(w, parent, kid1, kid2)
            up[w] = 0.5 * (down[s] + up[p])
            cost[w] = cost[p] + 0.25 * (down[w] + M[p, s] - get(M, stamp, w, s) - up[p])
            if cost[w] < best:
                best = cost[w]
                best_w = w
        # the new node x takes best_w's place, with best_w and the leaf below it
        x = n + leaf - 2
        p = parent[best_w]
        if kid1[p] == best_w:
            kid1[p] = x
        else:
            kid2[p] = x
        parent[x] = p
        kid1[x] = best_w
        kid2[x] = leaf
        parent[best_w] = x
        parent[leaf] = x
        # the leaf against every clade it is not in: those clades did not change
        # the leaf against the clades it is not in, which did not change; the
        # clades above it hold it now, and their entries are remade below
        for t in range(k):
            z = pre[t]
            M[leaf, z] = down[z]
        clock[0] += 1
        stamp[leaf] = clock[0]
        k = update_path(M, stamp, clock, x, parent, kid1, kid2, n, pre, pos, count, size, True)
    return parent
