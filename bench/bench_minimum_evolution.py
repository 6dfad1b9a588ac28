"""Minimum-evolution trees: accuracy against the true tree, and speed.

Accuracy: alignments simulated along seeded random trees (invented data), K2P distances, then the mean
normalised Robinson–Foulds distance (Robinson & Foulds 1981) to the true tree for NJ, BIONJ, greedy BME
insertion, NJ + NNI under BME (Desper & Gascuel 2002), NJ + SPR when cladewright offers it, and scikit-bio's
balanced NNI (``skbio.tree.nni(tree, dm, balanced=True)``) from the same NJ tree.

Speed: NNI from the NJ tree at n = 1,000 beside scikit-bio's nni from the same tree (one process, best of 3),
and NJ + NNI against NJ alone at n = 5,000 (time and peak memory, each in a child process of its own).

    python bench/bench_minimum_evolution.py            # full table (10 replicates a row) and the speed runs
    python bench/bench_minimum_evolution.py --quick    # 2 replicates a row, no n = 500 rows, speed at 200 / 1,000
    python bench/bench_minimum_evolution.py --speed-only --speed-n 5000   # the speed runs at another size
    python bench/bench_minimum_evolution.py --accuracy-only | --speed-only

Simulation: a random binary tree by joining random pairs of lineages (the topology of the coalescent), branch
lengths drawn from an exponential and the whole tree scaled to a mean leaf-to-leaf distance (0.1 "low",
0.5 "high" substitutions per site); sequences evolve down it under K2P (Kimura 1980, kappa = 4), with rates
across sites either equal or gamma distributed (shape 0.5, mean 1; Yang 1994). K2P distances without a gamma
correction, saturated pairs capped (as bootstrap replicates do).
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import time

import numpy as np

KAPPA = 4.0
GAMMA_SHAPE = 0.5
DIVERGENCE = {"low": 0.1, "high": 0.5}


# ---- simulation (invented data, seeded) --------------------------------------------------------------
def random_tree(rng, n):
    """parent, length arrays of a random unrooted binary tree (leaves 0..n-1, root last, three children)."""
    parent = np.full(2 * n - 2, -1, dtype=np.int64)
    live = list(range(n))
    node = n
    while len(live) > 3:
        i, j = rng.choice(len(live), 2, replace=False)
        a, b = live[i], live[j]
        parent[a] = parent[b] = node
        live = [x for k, x in enumerate(live) if k not in (i, j)] + [node]
        node += 1
    for x in live:
        parent[x] = node
    length = rng.exponential(1.0, 2 * n - 2)
    length = np.maximum(length, 1e-3)
    length[-1] = np.nan
    return parent, length


def mean_pair_distance(parent, length, n):
    """Mean leaf-to-leaf path length: sum over edges of length x leaves below x leaves above / pairs."""
    below = np.zeros(len(parent), dtype=np.int64)
    below[:n] = 1
    for v in range(len(parent) - 1):  # children before parents by construction
        below[parent[v]] += below[v]
    edges = np.arange(len(parent) - 1)
    return float(np.sum(length[edges] * below[edges] * (n - below[edges])) / (n * (n - 1) / 2))


def evolve(rng, parent, length, n, sites, gamma):
    """K2P sequences down the tree (states 0..3 = A, C, G, T), per-site rates optional gamma(0.5)."""
    m = len(parent)
    rates = rng.gamma(GAMMA_SHAPE, 1 / GAMMA_SHAPE, sites) if gamma else np.ones(sites)
    seq = np.empty((m, sites), dtype=np.uint8)
    seq[m - 1] = rng.integers(0, 4, sites)
    ts_partner = np.array([2, 3, 0, 1], dtype=np.uint8)  # A<->G, C<->T
    for v in range(m - 2, -1, -1):  # parents before children
        b = length[v] * rates  # expected substitutions per site on this edge
        beta = b / (KAPPA + 2)  # each transversion's rate x time; transitions kappa x that
        p_tv = 0.5 - 0.5 * np.exp(-4 * beta)  # both transversions together (Kimura 1980)
        p_ts = 0.25 + 0.25 * np.exp(-4 * beta) - 0.5 * np.exp(-2 * (KAPPA + 1) * beta)
        u = rng.random(sites)
        s = seq[parent[v]].copy()
        ts = u < p_ts
        tv = (u >= p_ts) & (u < p_ts + p_tv)
        s[ts] = ts_partner[s[ts]]
        s[tv] = (s[tv] + rng.choice(np.array([1, 3], dtype=np.uint8), tv.sum())) % 4
        seq[v] = s
    return seq[:n]


def simulate(n, sites, divergence, gamma, seed):
    from cladewright.tree import Tree

    rng = np.random.default_rng(seed)
    parent, length = random_tree(rng, n)
    length[:-1] *= DIVERGENCE[divergence] / mean_pair_distance(parent, length, n)
    names = [f"t{i}" for i in range(n)]
    return Tree(parent, length, names), names, evolve(rng, parent, length, n, sites, gamma)


# ---- the methods -----------------------------------------------------------------------------------------
def refinements():
    from cladewright.choices import REFINEMENTS

    return [r for r in ("nni", "spr") if r in REFINEMENTS]


def skbio_nni(nj_tree, dm):
    """scikit-bio's balanced NNI from our NJ tree; back as a cladewright Tree."""
    import io

    from skbio import DistanceMatrix as SkDM, TreeNode
    from skbio.tree import nni

    from cladewright.io import parse_newick

    sk_tree = TreeNode.read(io.StringIO(nj_tree.to_newick()))
    sk_dm = SkDM(np.asarray(dm.values, dtype=np.float64), list(dm.names))
    out = nni(sk_tree, sk_dm, balanced=True)
    return parse_newick(str(out).strip())[0]


def accuracy_row(n, sites, divergence, gamma, replicates):
    from cladewright import build_tree
    from cladewright.alignment import Alignment
    from cladewright.distances import distance_matrix
    from cladewright.support import robinson_foulds

    labels = ["NJ", "BIONJ", "BME"] + [f"NJ+{r.upper()}" for r in refinements()] + ["skbio NNI"]
    rf = {k: [] for k in labels}
    for r in range(replicates):
        seed = 1_000_003 * r + 7919 * n + sites + 17 * (divergence == "high") + 31 * gamma
        true, names, states = simulate(n, sites, divergence, gamma, seed)
        dm = distance_matrix(Alignment(names, states, "dna"), "k2p", saturated="cap")
        nj = build_tree(dm, "nj")
        trees = {"NJ": nj, "BIONJ": build_tree(dm, "bionj"), "BME": build_tree(dm, "bme")}
        for ref in refinements():
            trees[f"NJ+{ref.upper()}"] = build_tree(dm, "nj", refine=ref)
        trees["skbio NNI"] = skbio_nni(nj, dm)
        for k in labels:
            rf[k].append(robinson_foulds(true, trees[k])["normalised"])
    return labels, {k: float(np.mean(v)) for k, v in rf.items()}


def accuracy(quick):
    sizes = (50, 200) if quick else (50, 200, 500)
    replicates = 2 if quick else 10
    lines, header = [], None
    for n in sizes:
        for sites in (300, 1500):
            for div in ("low", "high"):
                for gamma in (False, True):
                    t = time.perf_counter()
                    labels, means = accuracy_row(n, sites, div, gamma, replicates)
                    if header is None:
                        header = ("| n | sites | divergence | rates | " + " | ".join(labels) + " |\n| "
                                  + " | ".join(["---"] * (4 + len(labels))) + " |")
                        print(header)
                    best_ours = means[f"NJ+{refinements()[-1].upper()}"]  # the widest search offered
                    line = (f"| {n} | {sites:,} | {div} | {'gamma' if gamma else 'equal'} | "
                            + " | ".join(f"{100 * means[k]:.1f}" for k in labels) + " |")
                    print(line, f"  ({time.perf_counter() - t:.1f} s; NJ+{refinements()[-1].upper()} <= skbio: "
                          f"{best_ours <= means['skbio NNI'] + 1e-12})", flush=True)
                    lines.append((line, means, labels))
    labels = lines[0][2]
    mean_all = {k: np.mean([m[k] for _, m, _ in lines]) for k in labels}
    print("| mean | | | | " + " | ".join(f"{100 * mean_all[k]:.1f}" for k in labels) + " |")
    for ref in refinements():
        e = mean_all[f"NJ+{ref.upper()}"]
        print(f"NJ+{ref.upper()} / NJ error: {e / mean_all['NJ']:.3f}; "
              f"NJ+{ref.upper()} / skbio NNI: {e / mean_all['skbio NNI']:.3f}")
    print(f"replicates per row: {replicates}")


# ---- speed -----------------------------------------------------------------------------------------------
def speed_matrix(n):
    from cladewright.alignment import Alignment
    from cladewright.distances import distance_matrix

    _, names, states = simulate(n, 1000, "low", False, seed=n)
    return distance_matrix(Alignment(names, states, "dna"), "k2p", saturated="cap")


def nni_vs_skbio(n):
    """NNI from the same NJ tree, ours and scikit-bio's, best of 3 each, in this process."""
    import io

    from skbio import DistanceMatrix as SkDM, TreeNode
    from skbio.tree import nni

    from cladewright import build_tree
    from cladewright.build import refine_tree

    dm = speed_matrix(n)
    nj = build_tree(dm, "nj")
    refine_tree(build_tree(speed_matrix(20), "nj"), speed_matrix(20))  # compile outside the timing
    ours, theirs = [], []
    text = nj.to_newick()
    sk_dm = SkDM(np.asarray(dm.values, dtype=np.float64), list(dm.names))
    for _ in range(3):
        t = time.perf_counter()
        refine_tree(nj, dm, "nni")
        ours.append(time.perf_counter() - t)
        sk_tree = TreeNode.read(io.StringIO(text))  # parsing outside the timing
        t = time.perf_counter()
        nni(sk_tree, sk_dm, balanced=True)
        theirs.append(time.perf_counter() - t)
    a, b = min(ours), min(theirs)
    print(f"NNI from NJ at n = {n:,}: cladewright {a:.3f} s, scikit-bio nni(balanced=True) {b:.3f} s "
          f"(scikit-bio time / cladewright time = {b / a:.2f})", flush=True)


def _child(n, refine):
    import os
    import tempfile

    from cladewright import build_tree
    from cladewright.matrix import DistanceMatrix

    path = os.path.join(tempfile.gettempdir(), f"cladewright-me-bench-{n}.npy")
    if not os.path.exists(path):
        np.save(path, speed_matrix(n).values)
    values = np.load(path)
    dm = DistanceMatrix([f"t{i}" for i in range(n)], values, validate=False)
    build_tree(speed_matrix(20), "nj", refine=None if refine == "none" else refine)  # compile
    best = np.inf
    for _ in range(3):
        t = time.perf_counter()
        build_tree(dm, "nj", refine=None if refine == "none" else refine)
        best = min(best, time.perf_counter() - t)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    print(json.dumps({"seconds": best, "peak": peak}))


def measure(n, refine):
    out = subprocess.run([sys.executable, __file__, "--child", str(n), refine], capture_output=True, text=True,
                         check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def speed(quick, n=None):
    nni_vs_skbio(200 if quick else 1000)
    n = n or (1000 if quick else 10_000)
    measure(n, "none")  # writes the cached matrix outside the measured runs
    base = measure(n, "none")
    print(f"NJ at n = {n:,}: {base['seconds']:.2f} s, peak {base['peak'] / 2**30:.2f} GiB", flush=True)
    for ref in refinements():
        r = measure(n, ref)
        print(f"NJ+{ref.upper()} at n = {n:,}: {r['seconds']:.2f} s ({r['seconds'] / base['seconds']:.2f}x NJ), "
              f"peak {r['peak'] / 2**30:.2f} GiB ({r['peak'] / base['peak']:.2f}x NJ)", flush=True)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--accuracy-only", action="store_true")
    ap.add_argument("--speed-only", action="store_true")
    ap.add_argument("--speed-n", type=int, help="taxa of the NJ / NJ+NNI / NJ+SPR speed runs (default 10,000)")
    ap.add_argument("--child", nargs=2, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        _child(int(args.child[0]), args.child[1])
        return
    if not args.speed_only:
        accuracy(args.quick)
    if not args.accuracy_only:
        speed(args.quick, args.speed_n)


if __name__ == "__main__":
    main()
