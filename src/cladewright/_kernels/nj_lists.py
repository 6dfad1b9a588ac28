"""Short sorted per-row lists for the bounded neighbour-joining search (numba).

Each matrix row keeps, per class of R, the K smallest distances of that class
in ascending order (Simonsen, Mailund & Pedersen 2008). A list is two records
of one row and class: its values (float64) and an int32 record holding the
first unread entry, the length, whether the list is the whole class, and the
node ids. Keeping a list's bookkeeping beside its node ids means a pruned
visit to a row touches one line of each rather than one per field.

``L`` is a :class:`RowLists` (values, records, head, hmin, hnode, after),
a named tuple that numba compiles to plain field loads. head[s, g]
is a lower bound of every unread entry of list g of row s: the value of the
first, whose node is hnode[s, g] (−1 when the list is read to its end), and
after[s, g] the same for the entries behind it. The search mostly needs no
more than these three small arrays, so a row is usually dealt with without
opening its lists. hmin[s] is the least head of row s, so that a row can be
ruled out with one comparison before its classes are looked at. Node ids
are int32 (n < 2^30).

The module also holds the distance look-up (:func:`dist`) and the bounded
reading of one list (:func:`read_list`) that the search and refills share.

Reference
---------
Simonsen, M., Mailund, T. & Pedersen, C. N. S. (2008) Rapid neighbour-joining.
WABI 2008, LNCS 5251.
"""

from collections import namedtuple

import numba as nb
import numpy as np

START, LEN, FULL, NODE = 0, 1, 2, 3   # fields of a list record; node ids from NODE on

#: The per-row lists of the search (see the module doc): ``values`` (n, G, K)
#: float64 and ``records`` (n, G, NODE + K) int32 hold the lists;
#: ``head``, ``hnode`` and ``after`` (n, G) cache the first unread entry of
#: each list, its node and the bound behind it; ``hmin`` (n,) the least head
#: of each row; ``work`` (1,) counts the lists rebuilt and rows read in full.
RowLists = namedtuple("RowLists", ["values", "records", "head", "hmin", "hnode", "after",
                                   "work"])


@nb.njit(cache=True)
def new_lists(n, G, K):
    """Empty lists for n rows, G classes and K entries (see module doc)."""
    return RowLists(np.empty((n, G, K), np.float64), np.zeros((n, G, NODE + K), np.int32),
                    np.full((n, G), np.inf), np.full(n, np.inf), np.full((n, G), -1, np.int32),
                    np.full((n, G), np.inf), np.zeros(1, np.int64))


@nb.njit(cache=True, inline="always")
def set_start(L, s, g, p):
    """Make entry p the first unread one of list g of row s, and cache its
    value and node and the bound behind it. Entries left out of a list are
    at least its last value (inf once the list is the whole class)."""
    Lv, Lx, head, hnode, after = L.values, L.records, L.head, L.hnode, L.after
    m = Lx[s, g, LEN]
    rest = np.inf if Lx[s, g, FULL] or m == 0 else Lv[s, g, m - 1]
    Lx[s, g, START] = p
    if p < m:
        head[s, g] = Lv[s, g, p]
        hnode[s, g] = Lx[s, g, NODE + p]
        after[s, g] = Lv[s, g, p + 1] if p + 1 < m else rest
    else:
        head[s, g] = rest
        hnode[s, g] = -1
        after[s, g] = rest


@nb.njit(cache=True, inline="always")
def dist(D, born, a, b):
    """d(a, b) for the clusters on rows a and b. A cluster's row is written
    in full when it is made, with every cluster alive then, and the older
    rows are left alone: the pair is on the row of the newer of the two
    (born is when each row's cluster was made). Writing each new distance
    into the older rows too would touch one cache line per row and join,
    and most of those would never be read."""
    return D[b, a] if born[b] > born[a] else D[a, b]


@nb.njit(cache=True, inline="always")
def insert(Lv, Lx, g, v, nd, thr):
    """Put (v, nd) in the ascending list g of a row being rebuilt (Lv, Lx
    its values and records). Once the list is full, thr[g] is its last
    value, which an entry must beat and which then drops out (among equal
    values the first offered stays). Callers test v < thr[g] inline: most
    entries fail it, and a call per entry would cost more than the test."""
    K = Lv.shape[1]
    take = Lx[g, LEN]
    if take == K:
        pos = K - 1
    else:
        pos = take
        Lx[g, LEN] = take + 1
    while pos > 0 and Lv[g, pos - 1] > v:
        Lv[g, pos] = Lv[g, pos - 1]
        Lx[g, NODE + pos] = Lx[g, NODE + pos - 1]
        pos -= 1
    Lv[g, pos] = v
    Lx[g, NODE + pos] = nd
    if Lx[g, LEN] == K:
        thr[g] = Lv[g, K - 1]


@nb.njit(cache=True, inline="always")
def begin_row(L, s, thr):
    """Empty every list of row s before its entries are offered."""
    L.records[s, :, LEN] = 0
    thr[:] = np.inf


@nb.njit(cache=True, inline="always")
def end_row(L, s, cnt):
    """Close the lists of row s once all its entries were offered (cnt[g]
    of class g): whatever was left out is at least the list's last value."""
    K = L.values.shape[2]
    hm = np.inf
    for g in range(L.values.shape[1]):
        L.records[s, g, FULL] = cnt[g] <= K
        set_start(L, s, g, 0)
        hm = min(hm, L.head[s, g])
    L.hmin[s] = hm


@nb.njit(cache=True)
def fill_row(D, s, live, r, node, lab, L, cnt, thr):
    """Build every class list of row s from row s of the matrix (which must
    hold all of its live pairs); cnt[g] is the number of entries of class g
    and thr work space of G."""
    begin_row(L, s, thr)
    row = D[s]
    Lv = L.values[s]
    Lx = L.records[s]
    for b in range(r):
        k = live[b]
        if k != s:
            g = lab[k]
            if row[k] < thr[g]:
                insert(Lv, Lx, g, row[k], node[k], thr)
    end_row(L, s, cnt)


@nb.njit(cache=True, inline="always")
def skip_joined(L, s, g, slot):
    """Move the start of list g of row s past entries of joined clusters
    (slot −1) and return it."""
    Lx = L.records
    p = Lx[s, g, START]
    while p < Lx[s, g, LEN] and slot[Lx[s, g, NODE + p]] < 0:
        p += 1
    set_start(L, s, g, p)
    return p


@nb.njit(cache=True)
def fill_class(D, born, s, g, live, r, node, lab, L):
    """Rebuild the class-g list of row s from the matrix (head[s, g] is
    updated; hmin[s] is left to the caller)."""
    Lv = L.values[s]
    Lx = L.records[s]
    K = Lv.shape[1]
    Lx[g, LEN] = 0
    cnt = np.zeros(g + 1, np.int64)
    thr = np.full(g + 1, np.inf)
    for b in range(r):
        k = live[b]
        if k != s and lab[k] == g:
            cnt[g] += 1
            v = dist(D, born, s, k)
            if v < thr[g]:
                insert(Lv, Lx, g, v, node[k], thr)
    Lx[g, FULL] = cnt[g] <= K
    set_start(L, s, g, 0)


@nb.njit(cache=True, inline="always")
def better(q, a, b, bq, ba, bb):
    """Least Q first, then the lowest (row, column) pair (row < column)."""
    if q < bq:
        return True
    if q > bq:
        return False
    return a < ba or (a == ba and b < bb)


@nb.njit(cache=True)
def read_list(D, born, s, g, c, sr, best, live, r, node, slot, lab, R, L):
    """Read list g of row s from its first unread entry while the bound
    c d − sr can reach ``best``, refilling it from the matrix when it runs
    out. Returns the updated best and whether row s was read in full."""
    Lv, Lx = L.values, L.records
    bq, bi, bj = best
    Rs = R[s]
    refilled = False
    while True:
        p = skip_joined(L, s, g, slot)
        m = Lx[s, g, LEN]
        while p < m:
            v = Lv[s, g, p]
            if c * v - sr > bq:
                return bq, bi, bj, False
            k = slot[Lx[s, g, NODE + p]]
            if k >= 0:
                q = c * v - (Rs + R[k])
                lo, hi = min(s, k), max(s, k)
                if better(q, lo, hi, bq, bi, bj):
                    bq, bi, bj = q, lo, hi
            p += 1
        if Lx[s, g, FULL] or (m > 0 and c * Lv[s, g, m - 1] - sr > bq):
            return bq, bi, bj, False
        L.work[0] += 1
        if not refilled:
            fill_class(D, born, s, g, live, r, node, lab, L)
            refilled = True
            continue
        # Even a fresh list is not enough (many equal Q values): read the
        # whole row once, which covers all its classes and caps the work per
        # row at that of the plain scan.
        for b in range(r):
            k = live[b]
            if k != s:
                q = c * dist(D, born, s, k) - (Rs + R[k])
                lo, hi = min(s, k), max(s, k)
                if better(q, lo, hi, bq, bi, bj):
                    bq, bi, bj = q, lo, hi
        return bq, bi, bj, True
