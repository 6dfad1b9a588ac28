"""LogDet beside K2P on the same alignment: the cost of the sixteen counts and the determinant per pair.

    python bench/bench_logdet.py             # n = 10,000 x 1,000 (about 2 min with the simulation)
    python bench/bench_logdet.py --n 3000    # another size

The alignment is simulated by bench/bench_minimum_evolution.py's generator (invented data: a random tree,
K2P evolution, low divergence); each time is the better of two runs after one that compiles the kernels,
on all cores. Target (issue 16): LogDet within 2x the time of K2P at n = 10,000.
"""

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_minimum_evolution import simulate  # noqa: E402


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=int, default=10_000)
    ap.add_argument("--sites", type=int, default=1000)
    args = ap.parse_args()
    from cladewright.alignment import Alignment
    from cladewright.distances import distance_matrix

    _, names, states = simulate(args.n, args.sites, "low", False, seed=args.n)
    aln = Alignment(names, states, "dna")
    best = {}
    for model in ("k2p", "logdet"):
        distance_matrix(aln, model, saturated="cap")  # compile
        times = []
        for _ in range(2):
            t = time.perf_counter()
            distance_matrix(aln, model, saturated="cap")
            times.append(time.perf_counter() - t)
        best[model] = min(times)
        print(f"{model:7s} n = {args.n:,} x {args.sites:,}: {best[model]:.2f} s", flush=True)
    print(f"LogDet / K2P = {best['logdet'] / best['k2p']:.2f} (target 2)")


if __name__ == "__main__":
    main()
