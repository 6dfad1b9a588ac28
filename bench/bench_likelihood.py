"""Maximum-likelihood distances: time and memory of the likelihood models beside the closed forms.

    python bench/bench_likelihood.py            # LG+gamma 1,000 and 2,000 x 400; GTR vs TN93 at 2,000 x 1,000
    python bench/bench_likelihood.py --quick    # 300 x 400 and 500 x 1,000

The data are invented and simulated here, cheaply, by our own numpy code (no reference library is timed):
sequence i (i >= 1) copies a random earlier sequence and evolves along a branch of random length
(uniform on [0.02, 0.15) substitutions per site for protein, [0.005, 0.04) for DNA) under the model, so the alignment is a tree's leaves and
its internal nodes. Protein sites take a gamma rate (shape 0.5, mean 1), drawn once per site and rounded
to one of 32 equal-probability rate classes (each class's median rate, scaled to mean 1) so that each
branch needs 32 transition matrices (``rate_models.transition_matrix`` through the eigendecomposition) rather
than one per site. DNA
evolves under a GTR model with unequal rates and frequencies at equal rates across sites.

Each time is the best of ``--repeats`` runs after one run that compiles the kernels, on all cores (set
NUMBA_NUM_THREADS=1 for one core). Memory is the peak of
Python-side allocations (``tracemalloc``, which sees numpy's arrays) during one ``distance_matrix`` call,
over the size of the output matrix (n x n float64).
"""

import argparse
import time
import tracemalloc

import numpy as np
from scipy import stats

from cladewright.alignment import Alignment
from cladewright.distances import distance_matrix
from cladewright.distances.rate_models import eigen_system, protein_model, transition_matrix

GTR_RATES = np.array([1.0, 4.0, 0.6, 1.2, 5.0, 1.0])  # AC AG AT CG CT GT
GTR_FREQS = np.array([0.3, 0.2, 0.22, 0.28])


def simulate(n, length, S, pi, seed, shape=None, classes=32, shortest=0.02, longest=0.15):
    """uint8 states (n, length) along the copy-and-evolve tree described in the module docstring."""
    rng = np.random.default_rng(seed)
    k = pi.shape[0]
    eig = eigen_system(S, pi)
    if shape is None:
        rate_of_class, site_class = np.ones(1), np.zeros(length, dtype=np.int64)
    else:
        rate_of_class = stats.gamma.ppf((np.arange(classes) + 0.5) / classes, shape, scale=1 / shape)
        rate_of_class /= rate_of_class.mean()
        site_class = rng.integers(0, classes, length)
    states = np.empty((n, length), dtype=np.uint8)
    states[0] = rng.choice(k, length, p=pi)
    for i in range(1, n):
        parent = rng.integers(0, i)
        t = rng.uniform(shortest, longest)
        P = np.stack([transition_matrix(eig, t * r) for r in rate_of_class])  # (classes, k, k)
        cum = np.cumsum(P[site_class, states[parent]], axis=1)
        u = rng.random(length)[:, None]
        states[i] = np.minimum((u > cum).sum(axis=1), k - 1)
    return states


def gtr_model():
    S = np.zeros((4, 4))
    S[np.triu_indices(4, 1)] = GTR_RATES
    return S + S.T, GTR_FREQS


def best_time(aln, model, repeats, **kwargs):
    distance_matrix(aln, model, **kwargs)  # compile (and warm) once
    best = np.inf
    for _ in range(repeats):
        start = time.perf_counter()
        dm = distance_matrix(aln, model, **kwargs)
        best = min(best, time.perf_counter() - start)
    return best, dm


def peak_memory(aln, model, **kwargs):
    tracemalloc.start()
    base = tracemalloc.get_traced_memory()[0]
    distance_matrix(aln, model, **kwargs)
    peak = tracemalloc.get_traced_memory()[1] - base
    tracemalloc.stop()
    return peak / (8.0 * aln.n_taxa ** 2)


def alignment(states, alphabet):
    return Alignment([f"s{i}" for i in range(states.shape[0])], states, alphabet)


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true")
    parser.add_argument("--repeats", type=int, default=2)
    args = parser.parse_args()
    protein_sizes = [(300, 400)] if args.quick else [(1000, 400), (2000, 400)]
    dna_size = (500, 1000) if args.quick else (2000, 1000)
    S_lg, pi_lg = protein_model("lg")
    print(f"{'run':<34}{'seconds':>9}{'target':>9}{'peak/matrix':>13}")
    for n, length in protein_sizes:
        aln = alignment(simulate(n, length, S_lg, pi_lg, seed=n, shape=0.5), "protein")
        seconds, dm = best_time(aln, "lg", args.repeats, gamma=0.5)
        target = {1000: 10.0, 2000: 40.0}.get(n)
        memory = peak_memory(aln, "lg", gamma=0.5)
        finite = dm.values[np.triu_indices(n, 1)]
        print(f"{f'LG+gamma(0.5) {n} x {length}':<34}{seconds:>9.2f}{(target or float('nan')):>9.1f}{memory:>13.2f}"
              f"   (mean distance {finite.mean():.3f}, {dm.info['saturated']} saturated)")
        if n == protein_sizes[0][0]:
            seconds, _ = best_time(aln, "lg", args.repeats, gamma=0.5, gamma_categories=4)
            print(f"{f'LG+gamma(0.5), 4 categories':<34}{seconds:>9.2f}")
    n, length = dna_size
    aln = alignment(simulate(n, length, *gtr_model(), seed=7, shortest=0.005, longest=0.04), "dna")
    t_tn93, _ = best_time(aln, "tn93", args.repeats)
    t_gtr, dm = best_time(aln, "gtr", args.repeats)
    t_hky, _ = best_time(aln, "hky", args.repeats)
    memory = peak_memory(aln, "gtr")
    print(f"{f'TN93 {n} x {length}':<34}{t_tn93:>9.2f}")
    print(f"{f'GTR {n} x {length}':<34}{t_gtr:>9.2f}{2 * t_tn93:>9.2f}{memory:>13.2f}"
          f"   (GTR / TN93 = {t_gtr / t_tn93:.2f}; estimated rates "
          + " ".join(f"{k}={v:.2f}" for k, v in dm.info["rates"].items()) + ")")
    print(f"{f'HKY {n} x {length}':<34}{t_hky:>9.2f}{'':>9}{'':>13}   (HKY / TN93 = {t_hky / t_tn93:.2f})")


if __name__ == "__main__":
    main()
