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


def make_alignment(names, seqs, alphabet="dna"):
    from cladewright.alignment import Alignment, encode

    return Alignment(names, encode(names, seqs, alphabet, "test"), alphabet, source="test")


@pytest.fixture(scope="session")
def dna_alignment():
    return simulate_dna(25, 400, seed=11)
