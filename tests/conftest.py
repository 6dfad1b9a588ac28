"""Shared test data: small simulated alignments (invented, seeded)."""

import numpy as np
import pytest

TRANSITION = {"A": "G", "G": "A", "C": "T", "T": "C"}


def simulate_dna(n, length, seed, gaps=0.05, ambiguous=0.02, divergence=(0.01, 0.15)):
    """Sequences diverged from one random root with a transition bias, gap
    runs and IUPAC ambiguity codes, as strings (names s0, s1, ...)."""
    rng = np.random.default_rng(seed)
    bases = np.array(list("ACGT"))
    root = rng.choice(bases, length, p=[0.3, 0.2, 0.2, 0.3])
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


def random_join_tree(rng, n, rooted, *, prefix="t", shortest=0.01, support=True, shuffle=True,
                     one_root_support=True):
    """A random binary tree by random joins (invented test data), with uniform branch lengths, random
    support percentages and shuffled leaf names when asked. The draws come in a fixed order (joins, lengths,
    support, names), so a seed gives the same tree in every test that uses it."""
    from cladewright.tree import Tree

    m = 2 * n - 1 if rooted else 2 * n - 2
    parent = np.full(m, -1)
    pool = list(range(n))
    nxt = n
    while len(pool) > (1 if rooted else 3):
        a, b = rng.choice(len(pool), 2, replace=False)
        parent[pool[a]] = parent[pool[b]] = nxt
        pool = [x for i, x in enumerate(pool) if i not in (a, b)] + [nxt]
        nxt += 1
    if not rooted:
        parent[pool] = nxt
    length = rng.uniform(shortest, 1.0, m)
    length[m - 1] = np.nan
    sup = np.full(m, np.nan)
    if support:
        sup[n:m - 1] = rng.integers(0, 101, m - 1 - n)
        if rooted and one_root_support:
            # the two branches at a degree-2 root are one split: one support value
            kids = np.flatnonzero(parent == m - 1)
            sup[kids[kids >= n]] = np.nanmax(sup[kids]) if np.any(kids >= n) else np.nan
    names = [f"{prefix}{i}" for i in (rng.permutation(n) if shuffle else range(n))]
    return Tree(parent, length, names, support=sup, rooted=rooted)


def make_alignment(names, seqs, alphabet="dna"):
    from cladewright.alignment import Alignment, encode

    return Alignment(names, encode(names, seqs, alphabet, "test"), alphabet, source="test")


@pytest.fixture(scope="session")
def dna_alignment():
    return simulate_dna(25, 400, seed=11)
