"""Branch lengths of a given topology under balanced minimum evolution, ordinary
and weighted least squares: the O(n^2) passes (numba).

The tree is first hung from one of its leaves (``top``), as Desper & Gascuel
(2002) do: every branch is then the branch above exactly one node v, one side
of it is the clade X_v below v and the other side its complement U_v, which
starts at v's parent p and splits there into the sibling's clade X_s and U_p.
Nodes of degree two (the root of a rooted tree, any node with one child) are
passed over, so their two branches make one branch of the unrooted tree.

The leaves are then read one matrix row at a time: for the row of leaf i,
a postorder pass gives the (balanced or plain) sums of d_ij over every clade,
and a walk along i's path to ``top`` adds i's share to the branches on that
path. Each row costs O(n) and nothing of size n x n is made, so a fit is
O(n^2) time and O(n) memory beyond the matrix.

References
----------
Desper, R. & Gascuel, O. (2002) Fast and accurate phylogeny reconstruction
algorithms based on the minimum-evolution principle. J. Comput. Biol.
9:687–705.
Pauplin, Y. (2000) Direct calculation of a tree length using a distance
matrix. J. Mol. Evol. 51:41–47.
Fitch, W. M. & Margoliash, E. (1967) Construction of phylogenetic trees.
Science 155:279–284.
"""

import numba as nb
import numpy as np


@nb.njit(cache=True, nogil=True)
def leaf_rooted(parent, n_leaves, top):
    """The tree hung from leaf ``top``, with degree-two nodes passed over.

    Parameters
    ----------
    parent : int64 ndarray (m,)
        Parent of each node, −1 at the root; leaves are nodes 0..n_leaves−1.
    n_leaves : int
    top : int
        The leaf to hang the tree from.

    Returns
    -------
    wparent : int64 ndarray (m,)
        Parent of each node in the hung tree: −1 at ``top``, −2 for a node
        passed over (one child, or the childless end of a one-child root).
    pre : int64 ndarray (k,)
        The kept nodes in preorder, ``top`` first.
    edge_of : int64 ndarray (m,)
        For each node u with a parent, the kept node whose branch (to its
        parent in the hung tree) holds the tree's branch above u; −1 for the
        branch above a one-child root, which lies on no leaf-to-leaf path.
    """
    m = parent.shape[0]
    root = -1
    q = parent.copy()
    prev = -1
    v = top
    while v != -1:
        nxt = parent[v]
        q[v] = prev
        if nxt == -1:
            root = v
        prev = v
        v = nxt
    # each node's branch to its new parent is the old branch above the lower end
    edge = np.full(m, -1, np.int64)
    cnt = np.zeros(m, np.int64)
    for w in range(m):
        p = q[w]
        if p >= 0:
            edge[w] = w if parent[w] == p else p
            cnt[p] += 1
    dropped = -1
    if cnt[root] == 0 and root >= n_leaves:
        # a one-child root is a dead end once the tree hangs from a leaf
        dropped = root
        cnt[q[root]] -= 1
    ptr = np.zeros(m + 1, np.int64)
    for w in range(m):
        ptr[w + 1] = ptr[w] + cnt[w]
    fill = ptr[:m].copy()
    kids = np.empty(max(ptr[m], 1), np.int64)
    for w in range(m):
        p = q[w]
        if p >= 0 and w != dropped:
            kids[fill[p]] = w
            fill[p] += 1
    order = np.empty(m, np.int64)
    stack = np.empty(m, np.int64)
    stack[0] = top
    sp = 1
    k = 0
    while sp > 0:
        sp -= 1
        v = stack[sp]
        order[k] = v
        k += 1
        for t in range(ptr[v + 1] - 1, ptr[v] - 1, -1):
            stack[sp] = kids[t]
            sp += 1
    wparent = np.full(m, -2, np.int64)
    wparent[top] = -1
    anc = np.empty(m, np.int64)  # the nearest kept node at or above each node
    anc[top] = top
    kept = 1
    for t in range(1, k):
        w = order[t]
        if cnt[w] == 1:
            anc[w] = anc[q[w]]
        else:
            anc[w] = w
            wparent[w] = anc[q[w]]
            kept += 1
    group = np.empty(m, np.int64)
    for t in range(k - 1, 0, -1):
        w = order[t]
        group[w] = group[kids[ptr[w]]] if cnt[w] == 1 else w
    edge_of = np.full(m, -1, np.int64)
    pre = np.empty(kept, np.int64)
    pre[0] = top
    kept = 1
    for t in range(1, k):
        w = order[t]
        edge_of[edge[w]] = group[w]
        if cnt[w] != 1:
            pre[kept] = w
            kept += 1
    return wparent, pre, edge_of


@nb.njit(cache=True, nogil=True)
def clade_sizes(wparent, pre, n_leaves):
    """Leaves below each kept node of a hung tree (``top`` itself counts 0)."""
    size = np.zeros(wparent.shape[0], np.int64)
    for t in range(pre.shape[0] - 1, 0, -1):
        w = pre[t]
        if w < n_leaves:
            size[w] = 1
        size[wparent[w]] += size[w]
    size[pre[0]] = 0
    return size


@nb.njit(cache=True, nogil=True)
def subtree_pair_sums(wparent, pre, kid1, kid2, sib, rows, d, f, weights=False):
    """Sums of distances between the two sides of every branch, and between
    the two halves of every clade, balanced (f = 1/2) or plain (f = 1).

    With w_X(i) = f^(edges from the first node of subtree X to leaf i), the
    sum between disjoint subtrees X and Y is sum_{i in X, j in Y} w_X(i) w_Y(j) d_ij:
    for f = 1/2 it is the balanced average distance Δ_{X|Y} of Desper &
    Gascuel (2002), for f = 1 the plain sum (the plain average times |X||Y|).

    Parameters
    ----------
    wparent, pre : int64 ndarray
        A binary tree hung from a leaf (:func:`leaf_rooted`).
    kid1, kid2 : int64 ndarray (m,)
        The two children of each internal node (``kid1`` alone for ``top``).
    sib : int64 ndarray (m,)
        The sibling of each node below ``top``'s child.
    rows : int64 ndarray (n,)
        The matrix row of each leaf.
    d : float ndarray (N, N)
        The distance matrix (read only).
    f : float
        1/2 or 1.
    weights : bool
        Sum the weights 1 / d_ij^2 (0 where d_ij = 0) of weighted least
        squares instead of the distances.

    Returns
    -------
    across : float64 ndarray (m,)
        For each node v below ``top``: the sum between X_v and U_v.
    halves : float64 ndarray (m,)
        For each internal node v: the sum between its children's clades.
    """
    m = wparent.shape[0]
    k = pre.shape[0]
    n = rows.shape[0]
    top = pre[0]
    across = np.zeros(m, np.float64)
    halves = np.zeros(m, np.float64)
    down = np.zeros(m, np.float64)   # sum between leaf i and each clade
    up = np.zeros(m, np.float64)     # sum between leaf i and each U_v on its path
    path = np.empty(k, np.int64)
    top_row = rows[top]
    for i in range(n):
        if i == top:
            continue
        row = d[rows[i]]
        for t in range(k - 1, 0, -1):
            w = pre[t]
            if w < n:
                x = np.float64(row[rows[w]])
                down[w] = x if not weights else (1.0 / (x * x) if x != 0.0 else 0.0)
            else:
                down[w] = f * (down[kid1[w]] + down[kid2[w]])
        length = 0
        v = i
        while v != top:
            path[length] = v
            length += 1
            v = wparent[v]
        # U of top's child is top alone; below it U_v splits into X_s and U_p
        x = np.float64(row[top_row])
        up[path[length - 1]] = x if not weights else (1.0 / (x * x) if x != 0.0 else 0.0)
        for t in range(length - 2, -1, -1):
            v = path[t]
            up[v] = f * (down[sib[v]] + up[wparent[v]])
        weight = 1.0
        for t in range(length):
            v = path[t]
            across[v] += weight * up[v]
            p = wparent[v]
            if p != top and kid1[p] == v:
                halves[p] += weight * down[sib[v]]
            weight *= f
    return across, halves


@nb.njit(cache=True, nogil=True)
def weighted_pass(wparent, pre, rows, d, x, a, c):
    """One pass of weighted least squares over every pair of leaves.

    With h_ij the path length between leaves i and j under branch lengths
    ``x``, and w_ij = 1 / d_ij^2 (0 where d_ij = 0, a pair left out), the pass
    forms r_ij = w_ij (a d_ij + c − h_ij) and returns, for every branch, the sum
    of r_ij over the pairs its two sides separate: A^T r, A the path-incidence
    matrix. So (a, c, x) = (1, 0, l) gives A^T W (d − A l), the negative
    gradient of the weighted sum of squares; (0, 0, p) gives −A^T W A p;
    (0, 1, 0) the diagonal of A^T W A.

    Parameters
    ----------
    wparent, pre : int64 ndarray
        A tree hung from a leaf (:func:`leaf_rooted`); any node degree.
    rows : int64 ndarray (n,)
        The matrix row of each leaf.
    d : float ndarray (N, N)
    x : float64 ndarray (m,)
        Length of the branch above each kept node.
    a, c : float

    Returns
    -------
    y : float64 ndarray (m,)
        A^T r, on the branch above each kept node.
    squares : float
        sum over pairs i < j with d_ij != 0 of ((a d_ij + c − h_ij) / d_ij)^2.
    pairs : int
        The number of those pairs.

    References
    ----------
    Fitch & Margoliash (1967) Science 155:279–284 (the weights 1 / d^2).
    """
    m = wparent.shape[0]
    k = pre.shape[0]
    n = rows.shape[0]
    # Work on positions in preorder: every sweep then reads its arrays in order.
    pos = np.empty(m, np.int64)
    for t in range(k):
        pos[pre[t]] = t
    up = np.full(k, -1, np.int64)
    row_of = np.full(k, -1, np.int64)
    xs = np.zeros(k, np.float64)
    for t in range(k):
        w = pre[t]
        if t > 0:
            up[t] = pos[wparent[w]]
            xs[t] = x[w]
        if w < n:
            row_of[t] = rows[w]
    leaf_at = np.flatnonzero(row_of >= 0)
    leaf_row = row_of[leaf_at]
    ys = np.zeros(k, np.float64)
    h = np.zeros(k, np.float64)
    below = np.zeros(k, np.float64)
    # +1 off the path from leaf i to top, −1 on it: going down that path
    # comes closer to i, going down anywhere else goes away from it
    sign = np.ones(k, np.float64)
    squares = 0.0
    pairs = 0
    for q in range(n):
        ti = leaf_at[q]
        row = d[leaf_row[q]]
        s = ti
        depth = 0.0
        while s != 0:
            sign[s] = -1.0
            depth += xs[s]
            s = up[s]
        h[0] = depth
        for t in range(1, k):
            h[t] = h[up[t]] + sign[t] * xs[t]
        below[:] = 0.0
        total = 0.0
        for u in range(n):
            if u == q:
                continue
            dij = row[leaf_row[u]]
            if dij != 0.0:
                t = leaf_at[u]
                inv = 1.0 / dij
                e = (a * dij + c - h[t]) * inv
                squares += e * e
                pairs += 1
                below[t] = e * inv
                total += e * inv
        for t in range(k - 1, 1, -1):
            below[up[t]] += below[t]
        s = ti
        while s != 0:
            ys[s] += total - below[s]
            sign[s] = 1.0
            s = up[s]
    y = np.zeros(m, np.float64)
    for t in range(1, k):
        y[pre[t]] = ys[t]
    return y, 0.5 * squares, pairs // 2
