"""Subtree pruning and regrafting (SPR) under balanced minimum evolution,
iterated to a local optimum (numba), after Hordijk & Gascuel (2005).

The tree is hung from a leaf ``top`` with the table ``M`` of balanced average
distances between disjoint subtrees (:mod:`cladewright._kernels.averages`).
A move prunes a clade X = X_v (v not a child of ``top``; its parent p is
removed, joining v's sibling s to p's parent q) and regrafts it on another
branch. Moving X along a path of branches one branch at a time is a chain of
nearest-neighbour interchanges; at each step X sits on a branch whose far end
y has two further subtrees Z (the way on) and S (the other), with P the rest
of the tree without X, and the step lowers the BME length by (Desper &
Gascuel 2002)

    δ = 1/4 (Δ(X, P) + Δ(Z, S) − Δ(X, Z) − Δ(P, S)).

The fall of a regraft is the sum of the δ along the path from prune to
regraft point (Hordijk & Gascuel 2005), each read in O(1) from the table of
the tree before the move:

- Δ(X, Z), Δ(Z, S) are entries of ``M`` (X, Z, S are subtrees of the tree);
- P grows by S at each step, so Δ(X, P') = 1/2 (Δ(X, P) + Δ(X, S));
- P is a subtree R of the tree with X taken out, so with h = 2^-(branches from
  R's first node to v) and O the subtree beside X at p (U_p when the path goes
  down into X_s, X_s when it goes up past q)

      Δ(P, A) = Δ(R, A) + h (Δ(O, A) − Δ(X, A)),

  and h halves at each step.

The search first makes interchanges to the NNI optimum
(:mod:`cladewright._kernels.nni`): every interchange is a regraft one branch
away, and they are found at O(diam) each rather than O(n). Then each clade is
pruned in turn (node order) and its best regraft over the whole tree found in
O(n); a regraft that lowers the length beyond rounding is made at once and
the table updated along the two changed paths (O(n diam)). A round (every
clade pruned once) costs O(n^2) plus the updates, and a round with no move
ends the search. Every move strictly lowers the length, so the search ends;
clades holding ``top`` are not pruned. The entries every regraft reads
(between a node's two clades, and between a clade and the rest beyond its
parent) are kept side by side (:func:`local_entries`) and the table's rows
follow the preorder of the start, so a regraft search reads memory mostly in
order.

References
----------
Hordijk, W. & Gascuel, O. (2005) Improving the efficiency of SPR moves in
phylogenetic tree search methods based on maximum likelihood.
Bioinformatics 21:4338–4347.
Desper, R. & Gascuel, O. (2002) Fast and accurate phylogeny reconstruction
algorithms based on the minimum-evolution principle. J. Comput. Biol.
9:687–705.
Pauplin, Y. (2000) Direct calculation of a tree length using a distance
matrix. J. Mol. Evol. 51:41–47.
"""

import numba as nb
import numpy as np

from .averages import build_table, clade_row, get, preorder, side_rows, sibling, work_arrays
from .nni import nni_search


@nb.njit(cache=True, nogil=True)
def _descend(M, stamp, near, tol, v, o, o_side, w0, xp0, h0, g0, sc0, kid1, kid2, n_leaves, sw, sxp, sh, sg, ssc,
             best, best_t):
    """Regrafts of X_v on the branches below w0 (X now on the branch above w0).

    ``xp0`` is Δ(X, P), ``h0`` the weight h, ``g0`` the fall so far, ``sc0``
    the sum of absolute averages used so far; ``o`` the node whose row gives
    Δ(O, ·): side entries (``o_side``, O = U_o) or entries between unrelated
    subtrees (O = X_o). Returns the best (fall, regraft node) seen, starting from
    ``best``, ``best_t``.
    """
    sp = 0
    sw[0] = w0
    sxp[0] = xp0
    sh[0] = h0
    sg[0] = g0
    ssc[0] = sc0
    sp = 1
    while sp > 0:
        sp -= 1
        w = sw[sp]
        xp = sxp[sp]
        h = sh[sp]
        g = sg[sp]
        sc = ssc[sp]
        for side in range(2):
            z = kid1[w] if side == 0 else kid2[w]
            zs = kid2[w] if side == 0 else kid1[w]
            ozs = M[o, zs] if o_side else get(M, stamp, o, zs)
            vzs = get(M, stamp, v, zs)
            zzs = near[w, 1]
            vz = get(M, stamp, v, z)
            ps = near[zs, 0] + h * (ozs - vzs)
            delta = 0.25 * (xp + zzs - vz - ps)
            gz = g + delta
            scz = sc + abs(xp) + abs(zzs) + abs(vz) + abs(ps)
            if gz > tol * scz and gz > best:
                best = gz
                best_t = z
            if z >= n_leaves:
                sw[sp] = z
                sxp[sp] = 0.5 * (xp + vzs)
                sh[sp] = 0.5 * h
                sg[sp] = gz
                ssc[sp] = scz
                sp += 1
    return best, best_t


@nb.njit(cache=True, nogil=True)
def best_regraft(M, stamp, near, tol, v, parent, kid1, kid2, top, n_leaves, sw, sxp, sh, sg, ssc):
    """The regraft of X_v of largest fall beyond rounding.

    Returns
    -------
    gain : float
        The fall in BME length (0 when no regraft lowers it).
    t : int
        The regraft point: X_v goes on the branch above node t (−1 for none).
    """
    p = parent[v]
    s = sibling(v, parent, kid1, kid2)
    q = parent[p]
    best = 0.0
    best_t = -1
    # down into X_s: P = U_w without X, O = U_p (row p); at w = s, h = 1/2
    if s >= n_leaves:
        best, best_t = _descend(M, stamp, near, tol, v, p, True, s, near[v, 0], 0.5, 0.0, 0.0, kid1, kid2, n_leaves,
                                sw, sxp, sh, sg, ssc, best, best_t)
    if q == top:
        return best, best_t
    # up past q: P = X_c without X (c the child of a on the path), O = X_s (row s)
    c = p
    a = q
    xp = get(M, stamp, v, s)
    h = 0.5
    g = 0.0
    sc = 0.0
    while True:
        r = sibling(c, parent, kid1, kid2)
        zs = near[r, 0]
        # turn down into X_r: Z = X_r, S = U_a
        vr = get(M, stamp, v, r)
        ps = near[c, 0] + h * (M[a, s] - M[a, v])
        gd = g + 0.25 * (xp + zs - vr - ps)
        scd = sc + abs(xp) + abs(zs) + abs(vr) + abs(ps)
        if gd > tol * scd and gd > best:
            best = gd
            best_t = r
        if r >= n_leaves:
            best, best_t = _descend(M, stamp, near, tol, v, s, False, r, 0.5 * (xp + M[a, v]), 0.5 * h, gd, scd, kid1, kid2,
                                    n_leaves, sw, sxp, sh, sg, ssc, best, best_t)
        # go on up: Z = U_a, S = X_r
        ps = near[a, 1] + h * (get(M, stamp, s, r) - vr)
        gu = g + 0.25 * (xp + zs - M[a, v] - ps)
        scu = sc + abs(xp) + abs(zs) + abs(M[a, v]) + abs(ps)
        if gu > tol * scu and gu > best:
            best = gu
            best_t = a
        if parent[a] == top:
            break
        xp = 0.5 * (xp + vr)
        h = 0.5 * h
        g = gu
        sc = scu
        c = a
        a = parent[a]
    return best, best_t


@nb.njit(cache=True, nogil=True)
def local_entries(M, stamp, parent, kid1, kid2, pre, k, n_leaves, near):
    """The entries every regraft reads, side by side: ``near[x, 0]`` =
    Δ(U_p, X_x) for x below ``top``'s child (p its parent), ``near[w, 1]`` =
    Δ(X_a, X_b) between the two clades below each internal node w."""
    for t in range(2, k):
        x = pre[t]
        near[x, 0] = M[parent[x], x]
        if x >= n_leaves:
            near[x, 1] = get(M, stamp, kid1[x], kid2[x])
    x = kid1[pre[0]]
    near[x, 1] = get(M, stamp, kid1[x], kid2[x])


@nb.njit(cache=True, nogil=True, inline="always")
def _replace_child(u, old, new, kid1, kid2):
    if kid1[u] == old:
        kid1[u] = new
    else:
        kid2[u] = new


@nb.njit(cache=True, nogil=True)
def regraft(v, t, parent, kid1, kid2):
    """Prune X_v (its parent p removed) and put it, through p, on the branch above t.

    Returns
    -------
    int
        p's old parent (its clade and those above it changed).
    """
    p = parent[v]
    s = sibling(v, parent, kid1, kid2)
    q = parent[p]
    _replace_child(q, p, s, kid1, kid2)
    parent[s] = q
    u = parent[t]
    _replace_child(u, t, p, kid1, kid2)
    parent[p] = u
    _replace_child(p, s, t, kid1, kid2)
    parent[t] = p
    return q


@nb.njit(cache=True, nogil=True)
def update_two_paths(M, stamp, clock, x, y, parent, kid1, kid2, n_leaves, pre, pos, count, size, depth):
    """Bring the balanced table up to date after the clades of x, y and their
    ancestors changed: their clade rows and columns, deepest first (so a pair
    of changed clades is last set from up-to-date rows), then every side row.
    Columns too: every regraft search reads a whole row, and a regraft is
    rarer than a search."""
    top = pre[0]
    k = preorder(top, kid1, kid2, n_leaves, pre, pos, count, size)
    depth[top] = 0
    for t in range(1, k):
        w = pre[t]
        depth[w] = depth[parent[w]] + 1
    nodes = np.empty(2 * k, np.int64)
    keys = np.empty(2 * k, np.int64)
    m = 0
    for start in (x, y):
        w = start
        while w != top and w >= 0:
            nodes[m] = w
            keys[m] = -depth[w]
            m += 1
            w = parent[w]
    order = np.argsort(keys[:m], kind="mergesort")
    done = np.zeros(parent.shape[0], np.bool_)
    for i in range(m):
        w = nodes[order[i]]
        if done[w]:  # an ancestor of both x and y
            continue
        done[w] = True
        clade_row(M, stamp, clock, w, kid1, kid2, pre, k, pos, count, size, True, True)
    n_total = size[kid1[top]] + 1
    side_rows(M, stamp, parent, kid1, kid2, pre, k, pos, count, size, n_total, True)
    return k


@nb.njit(cache=True, nogil=True)
def spr_search(M, tol, parent, kid1, kid2, top, rows, d, n_leaves):
    """SPR moves under BME to a local optimum, in place on ``parent``, ``kid1``, ``kid2``.

    Parameters
    ----------
    M, tol, parent, kid1, kid2, top, rows, d, n_leaves
        As for :func:`cladewright._kernels.nni.nni_search`.

    Returns
    -------
    moves, rounds : int
        Moves made (interchanges, then regrafts); passes over every branch or clade.
    """
    m = parent.shape[0]
    pre, pos, count, size, stamp, clock = work_arrays(m, top)
    depth = np.empty(m, np.int64)
    sw = np.empty(m, np.int64)
    sxp = np.empty(m, np.float64)
    sh = np.empty(m, np.float64)
    sg = np.empty(m, np.float64)
    ssc = np.empty(m, np.float64)
    near = np.zeros((m, 2), np.float64)
    # interchanges first: the cheap moves, to the NNI optimum (SPR moves
    # include them), leave the full rounds few regrafts to make
    moves, rounds = nni_search(M, tol, parent, kid1, kid2, top, rows, d, n_leaves, True)
    k = build_table(M, stamp, clock, parent, kid1, kid2, rows, d, n_leaves, pre, pos, count, size, True)
    local_entries(M, stamp, parent, kid1, kid2, pre, k, n_leaves, near)
    while True:
        rounds += 1
        made = 0
        for v in range(m):
            if v == top or parent[v] < 0 or parent[v] == top:
                continue
            gain, t = best_regraft(M, stamp, near, tol, v, parent, kid1, kid2, top, n_leaves, sw, sxp, sh, sg, ssc)
            if t < 0:
                continue
            q = regraft(v, t, parent, kid1, kid2)
            k = update_two_paths(M, stamp, clock, q, parent[v], parent, kid1, kid2, n_leaves, pre, pos, count, size,
                                 depth)
            local_entries(M, stamp, parent, kid1, kid2, pre, k, n_leaves, near)
            made += 1
        moves += made
        if made == 0:
            return moves, rounds
