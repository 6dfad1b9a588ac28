"""Past one machine: tiled distances into a store, trees from the store, a cluster beside local threads.

    python bench/bench_scale.py end-to-end --n 50000   # distances, NJ, UPGMA from the store (about 20 min)
    python bench/bench_scale.py cluster --n 20000      # LocalCluster of two workers beside local threads
    python bench/bench_scale.py model                  # tiles at 30,000 sites -> a 100,000 x 30,000 run

Invented data (bench/simulate.py: each sequence copies an earlier one and mutates 3% of its sites).
end-to-end runs each step as its own process of the command line, as a user would, and reports its wall
time and peak resident memory (the process's own high-water mark). The matrix is float32
(``--precision single``): at n = 50,000 it is 10 GB, and NJ's float64 work space (20 GB) would not leave
room on a 24 GiB machine. cluster times the same tiled path on local threads and on a Dask LocalCluster
of two single-threaded workers on loopback (target: the cluster within 15% of the threads). model measures
the counting rate of tiles of 2,048 sequences x 30,000 sites and prices a 100,000 x 30,000 run on N workers
from it (the rate per core times the cores; the per-site scaling is linear, so --sites may be smaller).
Each prints a Markdown section for docs/benchmarks.md ("## Past one machine").
"""

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
from simulate import simulate_states  # noqa: E402

STEP = """
import json, resource, sys, time
from cladewright.cli import main
t = time.perf_counter()
try:
    main(sys.argv[1:], standalone_mode=False)
finally:
    print(json.dumps({"seconds": time.perf_counter() - t,
                      "peak_gib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20}), file=sys.stderr)
"""


def write_fasta(path, n, sites, seed):
    states = simulate_states(n, sites, seed)
    letters = np.frombuffer(b"ACGT-", dtype=np.uint8)
    with open(path, "wb") as f:
        for i in range(n):
            f.write(b">t%d\n" % i)
            f.write(letters[states[i]].tobytes())
            f.write(b"\n")


def step(args):
    """One command-line run in its own process: (seconds, peak GiB)."""
    r = subprocess.run([sys.executable, "-c", STEP, "--quiet"] + args, capture_output=True, text=True)
    if r.returncode != 0:
        raise SystemExit(f"failed: {' '.join(args)}\n{r.stderr}")
    facts = json.loads(r.stderr.strip().splitlines()[-1])
    return facts["seconds"], facts["peak_gib"]


def end_to_end(n, sites, tile, workdir, reuse=False):
    fasta = os.path.join(workdir, "a.fasta")
    store = os.path.join(workdir, "m.zarr")
    rows = []
    if reuse and os.path.isdir(store):  # the store of an earlier run in this --workdir: trees only
        steps = ()
    else:
        t = time.perf_counter()
        write_fasta(fasta, n, sites, seed=n)
        print(f"simulated {n:,} x {sites:,} in {time.perf_counter() - t:.0f} s", flush=True)
        steps = (("distances K2P -> store", ["distances", fasta, "-o", store, "--precision", "single",
                                             "--tile-size", str(tile)]),)
    for label, args in steps + (
            ("NJ from the store", ["tree", store, "-o", os.path.join(workdir, "nj.nwk"), "--method", "nj"]),
            ("UPGMA from the store", ["tree", store, "-o", os.path.join(workdir, "upgma.nwk"),
                                      "--method", "upgma"])):
        seconds, peak = step(args)
        rows.append((label, seconds, peak))
        print(f"{label:24s} {seconds:8.1f} s  peak {peak:5.1f} GiB", flush=True)
    on_disk = sum(f.stat().st_size for f in Path(store).rglob("*") if f.is_file()) / 2**30
    lines = [f"### {n:,} taxa x {sites:,} sites on this machine", "",
             f"Matrix float32 ({n * n * 4 / 2**30:.2f} GiB in memory, {on_disk:.2f} GiB store on disk), "
             f"tile {tile}; each step a separate process of the command line.", "",
             "| step | time (s) | peak memory (GiB) |", "|---|---:|---:|"]
    lines += [f"| {label} | {s:.1f} | {p:.2f} |" for label, s, p in rows]
    lines.append(f"| total | {sum(r[1] for r in rows):.1f} | {max(r[2] for r in rows):.2f} |")
    return "\n".join(lines)


def cluster(n, sites, tile, workdir):
    import dask
    from dask.distributed import Client, LocalCluster

    from cladewright.alignment import Alignment
    from cladewright.distances.tiled import tiled_distances

    aln = Alignment([f"t{i}" for i in range(n)], simulate_states(n, sites, seed=n), "dna")
    small = Alignment(aln.names[:300], aln.states[:300], "dna")
    tiled_distances(small, os.path.join(workdir, "warm.zarr"), "k2p", tile=100)  # compile
    # Dask's nanny starts workers with MALLOC_TRIM_THRESHOLD_ set, which makes every large temporary array
    # come from fresh memory (page faults on each tile); the second cluster starts its workers without it
    environ = dask.config.get("distributed.nanny.pre-spawn-environ")
    untrimmed = {k: v for k, v in environ.items() if k != "MALLOC_TRIM_THRESHOLD_"}
    times = {}
    for label in ("threads", "cluster", "untrimmed") * 2:
        path = os.path.join(workdir, f"{label}.zarr")
        shutil.rmtree(path, ignore_errors=True)
        if label != "threads":
            env = environ if label == "cluster" else untrimmed
            with dask.config.set({"distributed.nanny.pre-spawn-environ": env}), \
                    LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                 dashboard_address=None) as lc, Client(lc) as client:
                client.run(lambda: tiled_distances(small, os.path.join(tempfile.mkdtemp(), "w.zarr"), "k2p",
                                                   tile=100))  # compile on the workers too
                t = time.perf_counter()
                tiled_distances(aln, path, "k2p", tile=tile, scheduler=client, dtype=np.float32)
        else:
            t = time.perf_counter()
            tiled_distances(aln, path, "k2p", tile=tile, dtype=np.float32)
        seconds = time.perf_counter() - t
        times[label] = min(times.get(label, np.inf), seconds)
        print(f"{label:10s} {seconds:7.1f} s", flush=True)
    return "\n".join([
        f"### {n:,} x {sites:,} distances (K2P, float32, tile {tile}): Dask LocalCluster beside local threads",
        "", "| run | time (s, best of 2) | / threads |", "|---|---:|---:|",
        f"| local threads (2 cores) | {times['threads']:.1f} | 1 |",
        f"| LocalCluster, 2 workers x 1 thread, loopback, Dask's default worker settings | "
        f"{times['cluster']:.1f} | {times['cluster'] / times['threads']:.2f} |",
        f"| the same, workers started without MALLOC_TRIM_THRESHOLD_ | {times['untrimmed']:.1f} | "
        f"{times['untrimmed'] / times['threads']:.2f} |",
        "", "Target: the cluster within 1.15 of the threads."])


def model(sites, tile, workdir, target_n=100_000, target_sites=30_000):
    from cladewright.alignment import Alignment
    from cladewright.distances.tiled import tiled_distances

    n = 2 * tile
    aln = Alignment([f"t{i}" for i in range(n)], simulate_states(n, sites, seed=7), "dna")
    warm = Alignment(aln.names[:200], aln.states[:200], "dna")
    tiled_distances(warm, os.path.join(workdir, "warm.zarr"), "k2p", tile=100)
    best = np.inf
    for k in range(2):
        t = time.perf_counter()
        tiled_distances(aln, os.path.join(workdir, f"m{k}.zarr"), "k2p", tile=tile, dtype=np.float32)
        best = min(best, time.perf_counter() - t)
    pairs = n * (n - 1) // 2
    cores = os.cpu_count() or 1
    per_core = pairs / best / cores  # pairs per second per core at these sites
    per_core_target = per_core * sites / target_sites  # counting is linear in the sites
    big_pairs = target_n * (target_n - 1) // 2
    nt = -(-target_n // tile)
    tiles = nt * (nt + 1) // 2
    words = -(-target_sites // 64)
    scatter = target_n * words * 5 * 8  # four bit planes and the valid mask per sequence, 64 sites a word
    result = target_n * target_n * 4  # float32 tiles back to the client, each written with its mirror
    core_hours = big_pairs / per_core_target / 3600
    lines = [f"### Paper model: {target_n:,} x {target_sites:,} on a cluster", "",
             f"Measured here: {n:,} sequences x {sites:,} sites in tiles of {tile} on {cores} cores took "
             f"{best:.1f} s, {per_core:.3g} pairs per second per core; at {target_sites:,} sites (counting is "
             f"linear in the sites) {per_core_target:.3g} pairs per second per core.", "",
             f"- pairs: {big_pairs:.3g}; tiles of {tile}: {tiles:,} (one task each, "
             f"{tile * tile * 4 / 2**20:.0f} MiB a tile, written by the worker where it sees the store)",
             f"- bytes moved: the encoded alignment once to each worker, {scatter / 2**30:.1f} GiB; the "
             f"results, {result / 2**30:.0f} GiB into the store (float32, written with its mirror image)",
             f"- compute: {core_hours:,.0f} core-hours", "",
             "| workers x cores | hours (compute only) |", "|---|---:|"]
    for workers, c in ((1, cores), (4, 16), (16, 32)):
        lines.append(f"| {workers} x {c}{' (this machine)' if workers == 1 else ''} | "
                     f"{core_hours / (workers * c):.2f} |")
    lines += ["", "The store must take the results as fast as they come: on 16 x 32 cores about "
              f"{result / (core_hours / (16 * 32) * 3600) / 2**20:.0f} MiB/s of writes."]
    return "\n".join(lines)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("what", choices=("end-to-end", "cluster", "model"))
    ap.add_argument("--n", type=int, default=None)
    ap.add_argument("--sites", type=int, default=1000)
    ap.add_argument("--tile", type=int, default=2048)
    ap.add_argument("--workdir", default=None, help="Where the alignment and stores go (default: a temporary "
                                                     "folder, removed at the end).")
    ap.add_argument("--reuse", action="store_true", help="end-to-end: build the trees from the store an earlier "
                                                          "run left in --workdir")
    args = ap.parse_args()
    workdir = args.workdir or tempfile.mkdtemp(prefix="cw-scale-")
    try:
        if args.what == "end-to-end":
            text = end_to_end(args.n or 50_000, args.sites, args.tile, workdir, args.reuse)
        elif args.what == "cluster":
            text = cluster(args.n or 20_000, args.sites, args.tile, workdir)
        else:
            text = model(args.sites if args.sites != 1000 else 30_000, min(args.tile, 1024), workdir)
        print("\n" + text)
    finally:
        if args.workdir is None:
            shutil.rmtree(workdir, ignore_errors=True)


if __name__ == "__main__":
    main()
