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
:func:`nj_kernel`), and all-equal matrices stay fast. Time is O(n^2) in
practice (O(n^3) at worst, as the plain scan); memory is the n x n matrix
(two for BIONJ) plus n x G x K list entries.

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

from .linkage import mirror_upper

LIST_LENGTH = 8    # entries kept per row and class (speed only)
N_CLASSES = 8      # classes of R (speed only; 8 measured best at n = 2,000 and 10,000)


@nb.njit(cache=True, inline="always")
def _insert(Lv, Ln, ln, g, v, nd, K):
    """Insert (v, nd) into the ascending list g of one row (Lv, Ln, ln);
    when the list is full its largest entry drops out. The caller tests
    that v is below that entry."""
    take = ln[g]
    if take == K:
        pos = K - 1
    else:
        pos = take
        ln[g] = take + 1
    while pos > 0 and Lv[g, pos - 1] > v:
        Lv[g, pos] = Lv[g, pos - 1]
        Ln[g, pos] = Ln[g, pos - 1]
        pos -= 1
    Lv[g, pos] = v
    Ln[g, pos] = nd


@nb.njit(cache=True)
def _fill_row(D, s, live, r, node, lab, L, cnt, thr):
    """Rebuild every class list of row s from the matrix: the K smallest
    entries of each class, ascending; whatever is left out is at least the
    list's last value (among equal values the first in row order is kept)."""
    Lval, Lnode, Llen, Lstart, Lfull, head = L
    G = Lval.shape[1]
    K = Lval.shape[2]
    row = D[s]
    Lv = Lval[s]
    Ln = Lnode[s]
    ln = Llen[s]
    cnt[:] = 0
    ln[:] = 0
    thr[:] = np.inf
    for b in range(r):
        k = live[b]
        if k != s:
            g = lab[k]
            cnt[g] += 1
            v = row[k]
            if v < thr[g]:
                _insert(Lv, Ln, ln, g, v, node[k], K)
                if ln[g] == K:
                    thr[g] = Lv[g, K - 1]
    for g in range(G):
        Lstart[s, g] = 0
        Lfull[s, g] = cnt[g] <= K
        head[s, g] = Lv[g, 0] if ln[g] > 0 else np.inf


@nb.njit(cache=True)
def _fill_class(D, s, g, live, r, node, lab, L):
    """Rebuild the class-g list of row s from the matrix."""
    Lval, Lnode, Llen, Lstart, Lfull, head = L
    K = Lval.shape[2]
    row = D[s]
    Lv = Lval[s]
    Ln = Lnode[s]
    ln = Llen[s]
    ln[g] = 0
    c = 0
    t = np.inf
    for b in range(r):
        k = live[b]
        if k != s and lab[k] == g:
            c += 1
            v = row[k]
            if v < t:
                _insert(Lv, Ln, ln, g, v, node[k], K)
                if ln[g] == K:
                    t = Lv[g, K - 1]
    Lstart[s, g] = 0
    Lfull[s, g] = c <= K
    head[s, g] = Lv[g, 0] if ln[g] > 0 else np.inf


@nb.njit(cache=True, inline="always")
def _better(q, a, b, bq, ba, bb):
    """Least Q first, then the lowest (row, column) pair (row < column)."""
    if q < bq:
        return True
    if q > bq:
        return False
    return a < ba or (a == ba and b < bb)


@nb.njit(cache=True)
def _scan_row(D, s, c, rmax, lowest, best, live, r, node, slot, lab, R, L):
    """Read the lists of row s while their bounds can reach ``best``.

    ``best`` is (q, i, j); returns the updated triple. A bound is computed as
    c d − (R_s + R_max) and Q as c d − (R_s + R_k): since R_k <= R_max and
    rounding is monotone, the bound never exceeds the Q it stands for, so
    the pruning is exact without any tolerance.
    """
    Lval, Lnode, Llen, Lstart, Lfull, head = L
    G = Lval.shape[1]
    bq, bi, bj = best
    for g in range(G):
        if rmax[g] == -np.inf:
            continue
        sr = R[s] + rmax[g]
        # head is the first value of the list, possibly of a joined cluster:
        # still a lower bound for the rest of the list.
        hb = c * head[s, g] - sr
        if hb > bq or (hb == bq and s >= bj and bi == lowest):
            continue
        refilled = False
        while True:
            p = Lstart[s, g]
            while p < Llen[s, g] and slot[Lnode[s, g, p]] < 0:
                p += 1
            Lstart[s, g] = p
            if p < Llen[s, g]:
                head[s, g] = Lval[s, g, p]
            elif Lfull[s, g]:
                head[s, g] = np.inf
            stop = False
            while p < Llen[s, g]:
                v = Lval[s, g, p]
                if c * v - sr > bq:
                    stop = True
                    break
                k = slot[Lnode[s, g, p]]
                if k >= 0:
                    q = c * v - (R[s] + R[k])
                    lo, hi = min(s, k), max(s, k)
                    if _better(q, lo, hi, bq, bi, bj):
                        bq, bi, bj = q, lo, hi
                p += 1
            if stop or Lfull[s, g]:
                break
            if Llen[s, g] > 0 and c * Lval[s, g, Llen[s, g] - 1] - sr > bq:
                break
            if not refilled:
                _fill_class(D, s, g, live, r, node, lab, L)
                refilled = True
                continue
            # Even a fresh list is not enough (many equal Q values): read
            # the whole row once, which covers all its classes and caps the
            # work per row at that of the plain scan.
            row = D[s]
            for b in range(r):
                k = live[b]
                if k == s:
                    continue
                q = c * row[k] - (R[s] + R[k])
                lo, hi = min(s, k), max(s, k)
                if _better(q, lo, hi, bq, bi, bj):
                    bq, bi, bj = q, lo, hi
            return bq, bi, bj
    return bq, bi, bj


@nb.njit(cache=True)
def _search(D, live, r, node, slot, lab, R, L, rowlb):
    """The pair of least Q (ties: lowest rows), as rows (i, j), i < j."""
    head = L[5]
    n, G = head.shape
    c = float(r - 2)
    rmax = np.full(G, -np.inf)
    for a in range(r):
        s = live[a]
        g = lab[s]
        rmax[g] = max(rmax[g], R[s])
    # A lower bound of Q over each row from its list heads alone.
    first = 0
    for a in range(r):
        s = live[a]
        lb = np.inf
        for g in range(G):
            lb = min(lb, c * head[s, g] - (R[s] + rmax[g]))
        rowlb[a] = lb
        if lb < rowlb[first]:
            first = a
    # The most promising row first: its own first live entries give a bound.
    best = (np.inf, n, n)
    s = live[first]
    lowest = live[0]
    Lval, Lnode, Llen, Lstart, Lfull, _ = L
    for g in range(G):
        p = Lstart[s, g]
        while p < Llen[s, g] and slot[Lnode[s, g, p]] < 0:
            p += 1
        if p < Llen[s, g]:
            k = slot[Lnode[s, g, p]]
            q = c * Lval[s, g, p] - (R[s] + R[k])
            lo, hi = min(s, k), max(s, k)
            if _better(q, lo, hi, best[0], best[1], best[2]):
                best = (q, lo, hi)
    best = _scan_row(D, s, c, rmax, lowest, best, live, r, node, slot, lab, R, L)
    for a in range(r):
        bq, bi, bj = best
        lb = rowlb[a]
        # When the best pair (i, j) is on the lowest live row, a row s >= j
        # whose bound only reaches a tie cannot hold a lower pair.
        if a == first or lb > bq or (lb == bq and live[a] >= bj and bi == lowest):
            continue
        best = _scan_row(D, live[a], c, rmax, lowest, best, live, r, node, slot, lab, R, L)
    return best[1], best[2]


@nb.njit(cache=True)
def nj_kernel(D, bionj, K, G):
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
    # Per row and class: values, node ids, length, first unread entry,
    # whether the list is the whole class, and the head value (a bound).
    L = (np.empty((n, G, K), np.float64), np.empty((n, G, K), np.int64),
         np.zeros((n, G), np.int64), np.zeros((n, G), np.int64),
         np.zeros((n, G), np.bool_), np.full((n, G), np.inf))
    rowlb = np.empty(n, np.float64)
    cnt = np.zeros(G, np.int64)
    thr = np.empty(G, np.float64)
    live = np.arange(n)                       # live rows, ascending
    r = n
    for s in range(n):
        _fill_row(D, s, live, r, node, lab, L, cnt, thr)
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
            bq = 2.0 * D[i, j] - (R[i] + R[j])
            for b in range(2, 4):
                k = live[b]
                q = 2.0 * D[i, k] - (R[i] + R[k])
                if q < bq:
                    bq, j = q, k
        else:
            i, j = _search(D, live, r, node, slot, lab, R, L, rowlb)
        c = float(r - 2)
        dij = D[i, j]
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
            vij = V[i, j]
            if vij != 0.0:
                lam = 0.5 + (SV[j] - SV[i]) / (2.0 * c * vij)
                lam = min(1.0, max(0.0, lam))
        di = D[i]
        dj = D[j]
        ru = 0.0
        svu = 0.0
        below = 0
        for b in range(r):
            k = live[b]
            if k == i or k == j:
                continue
            if bionj:
                dku = lam * (di[k] - li) + (1.0 - lam) * (dj[k] - lj)
                vku = lam * V[i, k] + (1.0 - lam) * V[j, k] - lam * (1.0 - lam) * vij
                SV[k] += vku - V[i, k] - V[j, k]
                svu += vku
                V[i, k] = vku
                V[k, i] = vku
            else:
                dku = 0.5 * (di[k] + dj[k] - dij)
            R[k] += dku - di[k] - dj[k]
            ru += dku
            di[k] = dku
            D[k, i] = dku
        di[j] = 0.0
        R[i] = ru
        SV[i] = svu
        slot[node[i]] = -1
        slot[node[j]] = -1
        node[i] = u
        slot[u] = i
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
        _fill_row(D, i, live, r, node, lab, L, cnt, thr)
    # The last three clusters meet at the root.
    a, b, e = live[0], live[1], live[2]
    root = n + t
    dab, dae, dbe = D[a, b], D[a, e], D[b, e]
    parent[node[a]] = root
    parent[node[b]] = root
    parent[node[e]] = root
    length[node[a]] = 0.5 * (dab + dae - dbe)
    length[node[b]] = 0.5 * (dab + dbe - dae)
    length[node[e]] = 0.5 * (dae + dbe - dab)
    return parent, length
