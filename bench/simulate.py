"""Seeded simulated alignments for the benchmarks (invented data).

Sequences descend from one root along a random coalescent-like hierarchy:
each new sequence copies a random earlier one and mutates a few per cent of
its sites (transitions twice as likely as transversions), so that the
alignment has realistic numbers of distinct site patterns and no saturated pairs.
"""

import numpy as np

TS = np.array([2, 3, 0, 1], dtype=np.uint8)  # A<->G, C<->T in the A, C, G, T encoding


def simulate_states(n, length, seed, rate=0.03, gaps=0.01):
    """uint8 states (n, length): 0..3 bases, 4 gap."""
    rng = np.random.default_rng(seed)
    states = np.empty((n, length), dtype=np.uint8)
    states[0] = rng.choice(4, length, p=[0.3, 0.2, 0.2, 0.3])
    parents = np.concatenate(([0], [rng.integers(0, i) for i in range(1, n)])).astype(np.int64)
    for i in range(1, n):
        s = states[parents[i]].copy()
        s[s == 4] = rng.integers(0, 4, np.count_nonzero(s == 4))
        hit = rng.random(length) < rate
        ts = hit & (rng.random(length) < 2 / 3)
        s[ts] = TS[s[ts]]
        tv = hit & ~ts
        s[tv] = (s[tv] + rng.choice([1, 3], tv.sum())) % 4
        states[i] = s
    states[rng.random((n, length)) < gaps] = 4
    return states


def to_strings(states):
    letters = np.array(list("ACGT-"))
    return ["".join(letters[row]) for row in states]
