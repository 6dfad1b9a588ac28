"""Invented test data, made in one place: random trees, tree-like matrices and simulated sequences.

Every test that needs random data takes it from here (``from simulate import ...``; pyproject.toml puts
tests/ on the import path). Each generator takes a numpy Generator and draws from it in the fixed order its
docstring gives, so a seed gives the same data in every test and the tests' seeded values stay what they
were when the generators lived in separate files. Nothing here is a reference value: the matrices computed
from a generated tree (``path_lengths``) are a plain walk over the parent array, written without the package.

Sources: random joins of a pool of subtrees and the star of sequences mutated from one random root are
common practice for invented test data; transitions (A<->G, C<->T) outnumbering transversions is the
observed bias of nucleotide substitution (Kimura 1980, J. Mol. Evol. 16:111-120); the IUPAC ambiguity
codes are those of NC-IUB (1985).
"""

import numpy as np

BASES = "ACGT"
AMINO_ACIDS = "ACDEFGHIKLMNPQRSTVWY"
TRANSITION = {"A": "G", "G": "A", "C": "T", "T": "C"}


# ---- trees -------------------------------------------------------------------------------------------

def random_joins(rng, n, rooted):
    """The parent array of a random binary tree of ``n`` leaves, by joining random pairs of subtrees.

    Parameters
    ----------
    rng : numpy.random.Generator
        Draws one ``rng.choice(len(pool), 2, replace=False)`` per join and nothing else.
    n : int
        Number of leaves (nodes 0..n-1).
    rooted : bool
        Join down to one subtree (a degree-2 root, ``2n - 1`` nodes), or down to three and hang them
        on a degree-3 root (``2n - 2`` nodes for n >= 3; for n = 2, the two leaves on a root of degree 2).

    Returns
    -------
    numpy.ndarray of int64
        ``parent[v]`` of every node, -1 at the root (the last node); new nodes are numbered n, n+1, ...
    """
    joins = n - 1 if rooted else max(n - 3, 0)
    m = n + joins + (0 if rooted else 1)
    parent = np.full(m, -1, dtype=np.int64)
    pool = list(range(n))
    nxt = n
    while len(pool) > (1 if rooted else 3):
        a, b = rng.choice(len(pool), 2, replace=False)
        parent[pool[a]] = parent[pool[b]] = nxt
        pool = [x for i, x in enumerate(pool) if i not in (a, b)] + [nxt]
        nxt += 1
    if not rooted:
        parent[pool] = nxt
    return parent


def random_join_arrays(rng, n, rooted=True, *, shortest=0.01, longest=1.0, mean_length=None):
    """A random tree by random joins, as arrays: the joins, then one length per node.

    Parameters
    ----------
    rng : numpy.random.Generator
        Draws the joins (``random_joins``), then all the lengths at once.
    n, rooted
        As for ``random_joins``.
    shortest, longest : float
        Lengths are uniform on [shortest, longest) ...
    mean_length : float, optional
        ... or, when given, exponential with this mean.

    Returns
    -------
    parent : numpy.ndarray of int64
    length : numpy.ndarray of float64
        NaN at the root (the last node).
    """
    parent = random_joins(rng, n, rooted)
    m = parent.size
    length = rng.exponential(mean_length, m) if mean_length is not None else rng.uniform(shortest, longest, m)
    length[m - 1] = np.nan
    return parent, length


def random_join_tree(rng, n, rooted, *, names=None, prefix="t", shortest=0.01, longest=1.0, mean_length=None,
                     support=True, shuffle=True, one_root_support=True):
    """A random binary Tree by random joins, with random branch lengths, support and leaf order.

    The draws come in a fixed order: joins, lengths (``random_join_arrays``), support (one integer 0..100
    per internal node below the root, when ``support``), leaf order (one permutation, when ``shuffle``).

    Parameters
    ----------
    rng : numpy.random.Generator
    n : int
        Number of leaves.
    rooted : bool
        A rooted tree (degree-2 root) or an unrooted one (degree-3 root).
    names : sequence of str, optional
        The leaf names (default ``prefix + index``); leaf i gets ``names[i]``, or ``names[perm[i]]`` when
        shuffled.
    prefix : str
        Prefix of the default names.
    shortest, longest, mean_length
        Branch lengths, as for ``random_join_arrays``.
    support : bool
        Random support percentages on internal branches.
    shuffle : bool
        Hand the names to the leaves in a random order.
    one_root_support : bool
        On a rooted tree, give the two branches at the root one support value (they are one split).

    Returns
    -------
    cladewright.tree.Tree
    """
    from cladewright.tree import Tree

    parent, length = random_join_arrays(rng, n, rooted, shortest=shortest, longest=longest,
                                        mean_length=mean_length)
    m = parent.size
    sup = np.full(m, np.nan)
    if support:
        sup[n:m - 1] = rng.integers(0, 101, m - 1 - n)
        if rooted and one_root_support:
            # the two branches at a degree-2 root are one split: one support value
            kids = np.flatnonzero(parent == m - 1)
            sup[kids[kids >= n]] = np.nanmax(sup[kids]) if np.any(kids >= n) else np.nan
    names = [f"{prefix}{i}" for i in range(n)] if names is None else list(names)
    if shuffle:
        names = [names[i] for i in rng.permutation(n)]
    return Tree(parent, length, names, support=sup, rooted=rooted)


def random_ultrametric(rng, n):
    """A random rooted binary tree with distinct, increasing node heights (leaves at height 0).

    Draws, for each join in turn, the pair (``rng.choice``) and then the rise in height above the last
    join (uniform on [0.1, 1)).

    Returns
    -------
    parent : numpy.ndarray of int64
    height : numpy.ndarray of float64
    """
    parent = np.full(2 * n - 1, -1)
    height = np.zeros(2 * n - 1)
    pool = list(range(n))
    h = 0.0
    for nxt in range(n, 2 * n - 1):
        a, b = sorted(rng.choice(len(pool), 2, replace=False), reverse=True)
        x, y = pool.pop(a), pool.pop(b)
        parent[x] = parent[y] = nxt
        h += rng.uniform(0.1, 1.0)
        height[nxt] = h
        pool.append(nxt)
    return parent, height


# ---- matrices ----------------------------------------------------------------------------------------

def symmetric(a):
    """The upper triangle of ``a`` mirrored below the diagonal, with a zero diagonal."""
    d = np.triu(a, 1)
    return d + d.T


def path_lengths(parent, length, n):
    """Leaf-to-leaf path lengths of a parent-array tree, by walking every leaf up to the root.

    A plain O(n^2 depth) walk written without the package: a matrix made from a random tree this way is
    additive (a tree metric) by construction.
    """
    up = []
    for leaf in range(n):
        dist, v, acc = {}, leaf, 0.0
        while v >= 0:
            dist[v] = acc
            if parent[v] >= 0:
                acc += length[v]
            v = parent[v]
        up.append(dist)
    d = np.zeros((n, n))
    for a in range(n):
        for b in range(a + 1, n):
            d[a, b] = d[b, a] = min(up[a][x] + up[b][x] for x in up[a] if x in up[b])
    return d


def additive_matrix(rng, n, *, noise=0.0, shortest=0.05, longest=1.0):
    """The path lengths of a random rooted tree (``random_join_arrays``), optionally with noise.

    Parameters
    ----------
    noise : float
        When nonzero, each cell is then multiplied by a factor uniform on [1 - noise, 1 + noise) (one draw
        per cell of the full matrix) and the upper triangle mirrored: a tree-like matrix, no longer additive.

    Returns
    -------
    parent, length : numpy.ndarray
        The generating tree.
    d : numpy.ndarray
        The n x n matrix.
    """
    parent, length = random_join_arrays(rng, n, True, shortest=shortest, longest=longest)
    d = path_lengths(parent, length, n)
    if noise:
        d = symmetric(d * rng.uniform(1 - noise, 1 + noise, d.shape))
    return parent, length, d


def ultrametric_matrix(rng, n):
    """The path lengths of a random ultrametric tree (``random_ultrametric``).

    Returns
    -------
    parent, height : numpy.ndarray
        The generating tree and its node heights.
    d : numpy.ndarray
        The n x n matrix: twice the height of each pair's last common ancestor.
    """
    parent, height = random_ultrametric(rng, n)
    length = np.where(parent >= 0, height[np.maximum(parent, 0)] - height, np.nan)
    return parent, height, path_lengths(parent, length, n)


def random_matrix(rng, n, *, low=0.0, high=1.0, zeros=0, mirror="upper"):
    """A random symmetric matrix with a zero diagonal (no structure; continuous values, so no ties).

    Parameters
    ----------
    rng : numpy.random.Generator
        Draws an n x n block uniform on [low, high), then one pair per zero.
    mirror : {"upper", "mean"}
        Keep the upper triangle (``symmetric``) or average the block with its transpose.
    zeros : int
        Pairs (drawn at random, distinct within a pair) then set to 0.

    Returns
    -------
    numpy.ndarray, n x n, float64
    """
    a = rng.uniform(low, high, (n, n))
    if mirror == "mean":
        d = (a + a.T) / 2
        np.fill_diagonal(d, 0.0)
    else:
        d = symmetric(a)
    for _ in range(zeros):
        i, j = rng.choice(n, 2, replace=False)
        d[i, j] = d[j, i] = 0.0
    return d


def tied_matrix(rng, n, low, high):
    """A random symmetric matrix of small whole numbers in [low, high): many exact ties.

    Draws an n x n block of integers; the upper triangle is kept (``symmetric``). Returns float64.
    """
    return symmetric(rng.integers(low, high, (n, n)).astype(float))


# ---- sequences ---------------------------------------------------------------------------------------

def random_sequence(rng, length, alphabet=BASES, p=None):
    """``length`` letters drawn from ``alphabet`` (uniformly, or with probabilities ``p``), as an array."""
    return rng.choice(list(alphabet), length, p=p)


def mutate(rng, seq, rate, alphabet=BASES):
    """A copy of ``seq`` (an array of letters) with about a fraction ``rate`` of its sites redrawn.

    Draws one uniform number per site, then (when ``rate`` is a pair (low, high)) the rate itself, uniform on
    that range, then one letter of ``alphabet`` per site hit (a redrawn site may keep its letter).
    """
    s = np.array(seq, copy=True)
    u = rng.random(s.size)
    if not np.isscalar(rate):
        rate = rng.uniform(*rate)
    hit = u < rate
    s[hit] = rng.choice(list(alphabet), int(hit.sum()))
    return s


def simulate_dna(n, length, seed, gaps=0.05, ambiguous=0.02, divergence=(0.01, 0.15)):
    """Sequences diverged from one random root with a transition bias, gap runs and IUPAC ambiguity codes.

    Parameters
    ----------
    n, length : int
        Number of sequences and sites.
    seed : int
        Seed of the sequences' own Generator.
    gaps : float
        Expected fraction of sites opening a gap run (runs of 1-7 sites, about ``gaps * length / 5`` a
        sequence); 0 for none.
    ambiguous : float
        Fraction of sites replaced by an ambiguity code (N, R, Y, K, M); 0 for none.
    divergence : (float, float)
        Each sequence's substitution rate is uniform on this range; 60% of substitutions are transitions.

    Returns
    -------
    names : list of str
        s0, s1, ...
    seqs : list of str
    """
    rng = np.random.default_rng(seed)
    bases = np.array(list(BASES))
    root = random_sequence(rng, length, bases, p=[0.3, 0.2, 0.2, 0.3])
    ts = np.vectorize(TRANSITION.get, otypes=[str])
    seqs = []
    for _ in range(n):
        s = root.copy()
        rate = rng.uniform(*divergence)
        hit = rng.random(length) < rate
        is_ts = rng.random(length) < 0.6
        s[hit & is_ts] = ts(s[hit & is_ts])
        tv = hit & ~is_ts
        s[tv] = rng.choice(bases, tv.sum())
        if gaps:
            for _ in range(rng.poisson(gaps * length / 5)):
                start = rng.integers(0, length)
                s[start:start + rng.integers(1, 8)] = "-"
        if ambiguous:
            amb = rng.random(length) < ambiguous
            s[amb] = rng.choice(list("NRYKM"), amb.sum())
        seqs.append("".join(s))
    return [f"s{i}" for i in range(n)], seqs


def make_alignment(names, seqs, alphabet="dna"):
    """An Alignment of the given names and sequence strings (source "test")."""
    from cladewright.alignment import Alignment, encode

    return Alignment(names, encode(names, seqs, alphabet, "test"), alphabet, source="test")
