"""Internal: the replicate site weights cladewright.bootstrap draws.

Replicate site weights: the nonparametric bootstrap of sites as multinomial counts.

A replicate is a multinomial draw of site counts over the distinct site
patterns; the distance engine takes those weights directly, so no replicate
alignment is ever built. Replicate ``i`` draws from its own stream,
``SeedSequence(seed, spawn_key=(i,))``, so every output is the same whatever
the number of workers or the executor.

References
----------
Felsenstein (1985) Evolution 39:783–791.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["SEED_LIMIT", "replicate_weights"]

SEED_LIMIT = 2**128  # SeedSequence takes any entropy >= 0; 128 bits is its own pool size


def replicate_weights(weights: ArrayLike, seed: int, index: int) -> NDArray[np.int64]:
    """Site counts per pattern for replicate ``index``: a multinomial draw of
    L sites with the patterns' observed frequencies (Felsenstein 1985).

    Parameters
    ----------
    weights : array_like of int (P,)
        How many sites show each distinct site pattern (L in all).
    seed : int
        The run's seed, 0 <= seed < 2**128.
    index : int
        The replicate's number, from 0; it picks the replicate's own stream.

    Returns
    -------
    int64 array (P,)
        The replicate's count of each pattern; they sum to L.

    References
    ----------
    Felsenstein (1985) Evolution 39:783–791.

    Examples
    --------
    >>> int(replicate_weights([3, 1, 2], seed=7, index=0).sum())
    6
    """
    weights = np.asarray(weights, dtype=np.int64)
    total = int(weights.sum())
    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(index,)))
    return rng.multinomial(total, weights / total)
