"""Neighbour joining and BIONJ with an exact bounded pair search (numba).

The pair to join is the one of least Q(i, j) = (r − 2) d(i, j) − R_i − R_j
(Saitou & Nei 1987, in the form of Studier & Keppler 1988). Instead of
scanning all r(r − 1)/2 pairs, rows keep short lists of their smallest
distances in ascending order, and a list is read only while

    (r − 2) d(i, k) − R_i − R_max  <=  best Q found so far,

a lower bound on Q(i, k) for that entry and every later one (Simonsen,
Mailund & Pedersen 2008). The bound is only as good as R_max is close to R_k,
so the clusters are put in G classes by their R (by rank, when they are
made) and each row keeps one list per class, bounded by that class's current
largest R: with a wide spread of R (long and short branches) one global R_max
would let almost every entry through.

A pair is listed once: the row of a cluster lists the clusters alive when the
list was made; later clusters list it in theirs. A list holds the K smallest
entries of its class; everything left out is at least its last value, so when
the bound still passes there the list is rebuilt from the matrix (and the
row is read in full if even that is not enough). Entries of clusters since
joined are skipped. The bounds are exact in floating point, and a row that
can only tie is skipped when it cannot hold a lower-indexed pair, so the
search returns the same pair as a full scan, ties included (see
:func:`nj_kernel`), and all-equal matrices stay fast. Most rows are ruled out
by one comparison, most of the rest by the cached first entry of each list
(see :mod:`.nj_lists`). A new cluster's distances go to its own row only, the
older rows are not updated (see :func:`.nj_lists.dist`). Time is O(n^2) in
practice (O(n^3) at worst, as the plain scan); memory is the n x n matrix
(two for BIONJ) plus n x G x (K + 2) list entries.

Far from tree-like (Euclidean distances of points in ten dimensions, say),
the lists run out: most rows are rebuilt or read in full at every join, ten
times the time of a tree-like matrix and more. When that goes on for two
windows of joins, the search moves for good to lower bounds kept per row
between joins (:mod:`.nj_rows`), where the same pair is found.

References
----------
Saitou, N. & Nei, M. (1987) Mol. Biol. Evol. 4:406–425.
Studier, J. A. & Keppler, K. J. (1988) Mol. Biol. Evol. 5:729–731.
Gascuel, O. (1997) Mol. Biol. Evol. 14:685–695 (BIONJ).
Simonsen, M., Mailund, T. & Pedersen, C. N. S. (2008) Rapid neighbour-joining.
WABI 2008, LNCS 5251.
"""

import numba as nb
import numpy as np

from .matrix import mirror_upper
from .nj_lists import (begin_row, better, dist, end_row, fill_row, insert, new_lists,
                       read_list, skip_joined)
from .nj_rows import C0, mirror_rows, row_search

LIST_LENGTH = 8    # entries kept per row and class (speed only)
N_CLASSES = 8      # classes of R (speed only; 8 measured best at n = 2,000 and 10,000)
ROW_SWITCH = 1 / 16  # lists rebuilt or rows read in full per join, over r, before row bounds take over
WINDOW = 64          # joins over which that is counted, in two windows running (both speed only)


@nb.njit(cache=True)
def _visit(D, born, cand, m, c, rmax, lowest, best, live, r, node, slot, lab, R, L, slow):
    """Look at the lists cand[:m] (s G + g for list g of row s, rows
    ascending) and return the updated ``best`` = (q, i, j).

    First the Q of each list's first entry from the cached head, node and
    bound behind it, in a loop of independent loads that the processor can
    overlap; only the lists whose bound still passes beyond the first entry
    (or whose first entry is of a joined cluster) are opened after that. A
    bound is c d − (R_s + R_max) and Q is c d − (R_s + R_k): as R_k <= R_max
    and rounding is monotone, a bound never exceeds the Q it stands for, so
    the pruning is exact without any tolerance.
    """
    head, hmin, hnode, after = L.head, L.hmin, L.hnode, L.after
    G = head.shape[1]
    bq, bi, bj = best
    ns = 0
    for t in range(m):
        s = cand[t] // G
        g = cand[t] - s * G
        nd = hnode[s, g]
        k = slot[nd] if nd >= 0 else -1
        if k >= 0:
            q = c * head[s, g] - (R[s] + R[k])
            lo, hi = min(s, k), max(s, k)
            if better(q, lo, hi, bq, bi, bj):
                bq, bi, bj = q, lo, hi
            if c * after[s, g] - (R[s] + rmax[g]) > bq:
                continue
        slow[ns] = cand[t]
        ns += 1
    whole = -1
    for t in range(ns):
        s = slow[t] // G
        g = slow[t] - s * G
        sr = R[s] + rmax[g]
        hb = c * head[s, g] - sr
        if s == whole or rmax[g] == -np.inf or hb > bq or (
                hb == bq and s >= bj and bi == lowest):
            continue
        bq, bi, bj, full = read_list(D, born, s, g, c, sr, (bq, bi, bj), live, r, node,
                                      slot, lab, R, L)
        if full:
            whole = s
        hm = np.inf
        for e in range(G):
            hm = min(hm, head[s, e])
        hmin[s] = hm
    return bq, bi, bj


@nb.njit(cache=True)
def _search(D, born, live, r, node, slot, lab, R, L, rmax, rowlb, cand, slow):
    """The pair of least Q (ties: lowest rows), as rows (i, j), i < j.

    ``rmax`` holds the largest R of each class (−inf for an empty class);
    ``rowlb``, ``cand`` and ``slow`` are work space (n, n G and n G).
    """
    head, hmin = L.head, L.hmin
    n, G = head.shape
    c = float(r - 2)
    top = rmax.max()
    # One comparison per row first: c min(head) − (R_s + max R) is below
    # every class bound of the row (same operations on smaller or equal
    # operands, and rounding is monotone).
    first = 0
    for a in range(r):
        s = live[a]
        lb = c * hmin[s] - (R[s] + top)
        rowlb[a] = lb
        if lb < rowlb[first]:
            first = a
    # The most promising row first, past its joined entries, so that its
    # first entries give a bound before any list is read further.
    s = live[first]
    for g in range(G):
        skip_joined(L, s, g, slot)
        cand[g] = s * G + g
    lowest = live[0]
    best = _visit(D, born, cand, G, c, rmax, lowest, (np.inf, n, n), live, r, node, slot, lab, R,
                  L, slow)
    # Then every list whose bound reaches that: rows by the one comparison,
    # their classes by c head − (R_s + R_max of the class). The selection
    # is without branches, as about as many rows fail as pass.
    bq = best[0]
    m = 0
    for a in range(r):
        cand[m] = live[a]
        m += (rowlb[a] <= bq) & (a != first)
    mc = 0
    for t in range(m):
        s = cand[t]
        Rs = R[s]
        for g in range(G):
            slow[mc] = s * G + g
            mc += c * head[s, g] - (Rs + rmax[g]) <= bq
    best = _visit(D, born, slow, mc, c, rmax, lowest, best, live, r, node, slot, lab, R, L, cand)
    return best[1], best[2]


@nb.njit(cache=True, nogil=True)  # bootstrap replicates build their trees side by side on threads
def nj_kernel(D, bionj, K, G, switch=ROW_SWITCH):
    """Join the closest pair by the NJ criterion until three clusters remain.

    Parameters
    ----------
    D : float64 ndarray (n, n), n >= 3
        Symmetric distances with zero diagonal; overwritten (work space).
    bionj : bool
        Reduce the matrix as BIONJ does (variance-weighted, Gascuel 1997)
        instead of canonical NJ.
    K, G : int
        List length and number of R classes of the search (speed only, not
        the result).
    switch : float
        The search moves from the lists to the row bounds of
        :mod:`.nj_rows` for good once, in two ``WINDOW``s of joins running,
        more than ``switch`` r lists a join had to be rebuilt or rows read
        in full (the sign of a matrix far from tree-like: on tree-like ones
        this comes in short bursts); 0 uses row bounds throughout, inf never
        (speed only, not the result).

    Returns
    -------
    parent : int64 ndarray (2n − 2,)
        Leaves 0..n−1; the t-th join makes node n + t; the last three
        clusters hang from the root 2n − 3 (parent −1), a basal trifurcation.
    length : float64 ndarray (2n − 2,)
        Branch lengths (may be negative); nan for the root.

    Notes
    -----
    Clusters live on matrix rows: a join of rows i < j puts the new cluster
    on row i and retires row j, so the live rows keep their relative order
    (the order of a compacted matrix where the new cluster takes the smaller
    index). Ties in Q go to the lowest (i, j), i < j, in row-major order of
    those rows: the first minimum of a plain row-major scan. With four
    clusters left, a pair and its complement have the same Q, so the scan's
    first minimum (in exact arithmetic) always contains the lowest row: the
    kernel picks among those three pairs only, so that rounding cannot choose.

    Branch lengths (Studier & Keppler 1988): d(i,u) = d(i,j)/2 +
    (R_i − R_j) / (2 (r − 2)), d(j,u) = d(i,j) − d(i,u). NJ reduction:
    d(k,u) = (d(i,k) + d(j,k) − d(i,j)) / 2. BIONJ (Gascuel 1997):
    lambda = 1/2 + sum_k (V(j,k) − V(i,k)) / (2 (r − 2) V(i,j)), clipped to
    [0, 1] (1/2 when V(i,j) = 0); d(k,u) = lambda (d(i,k) − d(i,u)) +
    (1 − lambda) (d(j,k) − d(j,u)); V(k,u) = lambda V(i,k) + (1 − lambda)
    V(j,k) − lambda (1 − lambda) V(i,j); V starts as D.

    References
    ----------
    Saitou & Nei (1987); Studier & Keppler (1988); Gascuel (1997);
    Simonsen, Mailund & Pedersen (2008).
    """
    n = D.shape[0]
    m = 2 * n - 2
    mirror_upper(D)
    parent = np.full(m, -1, np.int64)
    length = np.full(m, np.nan, np.float64)
    V = D.copy() if bionj else np.zeros((1, 1), D.dtype)
    node = np.arange(n)                       # node id on each row
    slot = np.full(m, -1, np.int64)           # row of each live node, -1 once joined
    slot[:n] = np.arange(n)
    born = np.zeros(n, np.int64)              # when each row's cluster was made (see dist)
    R = np.empty(n, np.float64)
    SV = np.zeros(n, np.float64)
    for i in range(n):
        R[i] = D[i].sum()
        if bionj:
            SV[i] = V[i].sum()
    K = max(1, min(K, n))
    G = max(1, min(G, n))
    lab = np.zeros(n, np.int64)               # R class of the cluster on each row, by rank
    order = np.argsort(R)
    for t in range(n):
        lab[order[t]] = t * G // n
    L = new_lists(n, G, K)
    rowlb = np.empty(n, np.float64)
    cand = np.empty(n * G, np.int64)
    slow = np.empty(n * G, np.int64)
    size = np.zeros(G, np.int64)              # live clusters per class
    for s in range(n):
        size[lab[s]] += 1
    cnt = np.zeros(G, np.int64)
    thr = np.empty(G, np.float64)
    rmax = np.full(G, -np.inf)
    live = np.arange(n)                       # live rows, ascending
    r = n
    rows = switch <= 0.0                      # search by row bounds (then D is kept symmetric)
    rec = np.full((n, 5), -1.0)               # row records of nj_rows (C0 = -1: never read)
    scale = np.zeros(1)
    delta = 0.0                               # sum of the least fall of R at each join
    mark_t = 0
    mark_w = 0
    hot = 0
    for s in range(n):
        if not rows:
            cnt[:] = size
            cnt[lab[s]] -= 1
            fill_row(D, s, live, r, node, lab, L, cnt, thr)
        rmax[lab[s]] = max(rmax[lab[s]], R[s])
        scale[0] = max(scale[0], abs(R[s]))
    t = 0
    while r > 3:
        if r == 4:
            # Q(i, j) = Q(k, l) for complementary pairs when r = 4, so the
            # first minimum of an exact row-major scan is always a pair with
            # the lowest row; choosing it directly keeps rounding from
            # deciding between two mathematically equal pairs (which changes
            # BIONJ's lengths).
            i = live[0]
            j = live[1]
            bq = 2.0 * dist(D, born, i, j) - (R[i] + R[j])
            for b in range(2, 4):
                k = live[b]
                q = 2.0 * dist(D, born, i, k) - (R[i] + R[k])
                if q < bq:
                    bq, j = q, k
        elif rows:
            i, j, _ = row_search(D, live, r, R, rec, scale, delta, rowlb, cand)
        else:
            i, j = _search(D, born, live, r, node, slot, lab, R, L, rmax, rowlb, cand, slow)
            if t - mark_t >= WINDOW:
                # tree-like matrices have short bursts of such work, far
                # from tree-like ones keep at it
                hot = hot + 1 if L.work[0] - mark_w > switch * r * (t - mark_t) else 0
                if hot == 2:
                    # every row gets all its distances (this join writes the
                    # new column too) and is read in full at the next search
                    rows = True
                    mirror_rows(D, born, live, r)
                    for b in range(r):
                        scale[0] = max(scale[0], abs(R[live[b]]))
                mark_t, mark_w = t, L.work[0]
        c = float(r - 2)
        dij = dist(D, born, i, j)
        li = 0.5 * dij + (R[i] - R[j]) / (2.0 * c)
        lj = dij - li
        u = n + t
        parent[node[i]] = u
        parent[node[j]] = u
        length[node[i]] = li
        length[node[j]] = lj
        lam = 0.5
        vij = 0.0
        if bionj:
            vij = dist(V, born, i, j)
            if vij != 0.0:
                lam = 0.5 + (SV[j] - SV[i]) / (2.0 * c * vij)
                lam = min(1.0, max(0.0, lam))
        di = D[i]
        dj = D[j]
        bi, bj = born[i], born[j]
        ru = 0.0
        svu = 0.0
        below = 0
        fall = np.inf
        top = abs(delta)
        # Row i's new lists and next round's class maxima of R are built in
        # the same pass as the reduction, while the row is in cache.
        begin_row(L, i, thr)
        size[lab[i]] -= 1
        size[lab[j]] -= 1
        cnt[:] = size
        Lvi = L.values[i]
        Lxi = L.records[i]
        rmax[:] = -np.inf
        # Bring rows i and j up to date first (see dist), in a loop of
        # independent loads that the processor can overlap; choosing the
        # source by index keeps branches on the ages out of it.
        for b in range(r):
            k = live[b]
            bk = born[k]
            a1, b1 = (k, i) if bk > bi else (i, k)
            a2, b2 = (k, j) if bk > bj else (j, k)
            di[k] = D[a1, b1]
            dj[k] = D[a2, b2]
            if bionj:
                V[i, k] = V[a1, b1]
                V[j, k] = V[a2, b2]
        for b in range(r):
            k = live[b]
            if k == i or k == j:
                continue
            dik = di[k]
            djk = dj[k]
            if bionj:
                vik = V[i, k]
                vjk = V[j, k]
                dku = lam * (dik - li) + (1.0 - lam) * (djk - lj)
                vku = lam * vik + (1.0 - lam) * vjk - lam * (1.0 - lam) * vij
                SV[k] += vku - vik - vjk
                svu += vku
                V[i, k] = vku
            else:
                dku = 0.5 * (dik + djk - dij)
            rk = R[k] + (dku - dik - djk)
            g = lab[k]
            if rows:
                fall = min(fall, R[k] - rk)
                top = max(top, abs(rk))
                D[k, i] = dku
            elif dku < thr[g]:
                insert(Lvi, Lxi, g, dku, node[k], thr)
            R[k] = rk
            ru += dku
            di[k] = dku
            rmax[g] = max(rmax[g], rk)
        R[i] = ru
        SV[i] = svu
        slot[node[i]] = -1
        slot[node[j]] = -1
        node[i] = u
        slot[u] = i
        born[i] = t + 1
        w = 0
        for b in range(r):
            k = live[b]
            if k != j:
                live[w] = k
                w += 1
                if k != i and R[k] < ru:
                    below += 1
        r -= 1
        t += 1
        lab[i] = min(G - 1, below * G // max(1, r - 1))
        rmax[lab[i]] = max(rmax[lab[i]], ru)
        size[lab[i]] += 1
        if rows:
            delta += fall
            rec[i, C0] = -1.0
            scale[0] = max(scale[0], top, abs(ru), abs(delta))
        else:
            end_row(L, i, cnt)
    # The last three clusters meet at the root.
    a, b, e = live[0], live[1], live[2]
    root = n + t
    dab, dae, dbe = dist(D, born, a, b), dist(D, born, a, e), dist(D, born, b, e)
    parent[node[a]] = root
    parent[node[b]] = root
    parent[node[e]] = root
    length[node[a]] = 0.5 * (dab + dae - dbe)
    length[node[b]] = 0.5 * (dab + dbe - dae)
    length[node[e]] = 0.5 * (dae + dbe - dab)
    return parent, length
