"""The benchmark suite: cladewright beside the reference libraries, in one run.

    python bench/run.py                 # the full suite (about half an hour on 2 cores), writes docs/benchmarks.md
    python bench/run.py --quick         # small sizes only, prints the table, writes nothing
    python bench/run.py --budget 60     # per-measurement time budget in seconds (default 120)

Every measurement runs in a child process of its own, so that its peak
memory (whole process, ``ru_maxrss``) is its own. Inputs are simulated with
fixed seeds (bench/simulate.py). A reference is skipped where its cost,
extrapolated from the previous size at its known order, would pass the
budget, and the table says so. The fitted scaling exponent is the slope of
log(time) against log(n) over the sizes measured.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import resource
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
from simulate import simulate_states, to_strings  # noqa: E402

CACHE = Path(os.environ.get("CLADEWRIGHT_BENCH_CACHE", "/tmp/cladewright-bench"))
SITES = 1000
REPEAT_BELOW = 30.0  # seconds: a measurement shorter than this is repeated, and the best kept (the first
# large allocation of a fresh process is slow and erratic on a virtual machine; the repeats run warm)


# ---- inputs ------------------------------------------------------------------------------------------
def states_for(n, length=SITES):
    return simulate_states(n, length, seed=n)


def matrix_for(n, precision="double"):
    """K2P distances of a simulated alignment, cached on disk between runs."""
    CACHE.mkdir(parents=True, exist_ok=True)
    path = CACHE / f"k2p_{n}.npy"
    if not path.exists():
        from cladewright.alignment import Alignment
        from cladewright.distances import distance_matrix

        aln = Alignment([f"s{i}" for i in range(n)], states_for(n), "dna")
        np.save(path, distance_matrix(aln, "k2p").values)
    values = np.load(path, mmap_mode=None)
    return values.astype(np.float32) if precision == "single" else values


# ---- one measurement per tool (run in a child) -----------------------------------------------------------
def _ours_distances(n, model):
    from cladewright.alignment import Alignment
    from cladewright.distances import distance_matrix

    aln = Alignment([f"s{i}" for i in range(n)], states_for(n), "dna")
    # Load the compiled kernels and start the thread pool outside the timing.
    distance_matrix(Alignment([f"w{i}" for i in range(20)], states_for(20), "dna"), model)
    t = time.perf_counter()
    distance_matrix(aln, model)
    return time.perf_counter() - t


def _skbio_distances(n, model):
    from skbio import DNA, TabularMSA
    from skbio.alignment import align_dists

    msa = TabularMSA([DNA(s) for s in to_strings(states_for(n))])
    t = time.perf_counter()
    align_dists(msa, model, shared_by_all=False)
    return time.perf_counter() - t


def _biopython_distances(n, model):
    from Bio.Align import MultipleSeqAlignment
    from Bio.Phylo.TreeConstruction import DistanceCalculator
    from Bio.Seq import Seq
    from Bio.SeqRecord import SeqRecord

    aln = MultipleSeqAlignment([SeqRecord(Seq(s), id=f"s{i}") for i, s in enumerate(to_strings(states_for(n)))])
    t = time.perf_counter()
    DistanceCalculator("identity").get_distance(aln)
    return time.perf_counter() - t


def _ours_tree(n, method, precision="double"):
    from cladewright.build import build_tree
    from cladewright.matrix import DistanceMatrix

    values = matrix_for(n, precision)
    # the benchmark's own matrix is handed over without a copy (as the distance engine does)
    dm = DistanceMatrix._adopt([f"s{i}" for i in range(n)], values)
    small = DistanceMatrix(["a", "b", "c", "d"], np.ones((4, 4)) - np.eye(4), dtype=values.dtype)
    build_tree(small, method)  # compile outside the timing
    t = time.perf_counter()
    build_tree(dm, method)
    return time.perf_counter() - t


# Every tree tool starts from the same square matrix and its timing includes
# whatever copy it makes to work in: cladewright's triangle copy, the
# references' condensed form (squareform), so that no tool is handed its
# work space ready-made.
def _scipy_tree(n, method):
    from scipy.cluster.hierarchy import linkage
    from scipy.spatial.distance import squareform

    square = matrix_for(n)
    t = time.perf_counter()
    linkage(squareform(square, checks=False), method={"upgma": "average", "wpgma": "weighted"}[method])
    return time.perf_counter() - t


def _fastcluster_tree(n, method):
    import fastcluster
    from scipy.spatial.distance import squareform

    square = matrix_for(n)
    t = time.perf_counter()
    fastcluster.linkage(squareform(square, checks=False), method={"upgma": "average", "wpgma": "weighted"}[method])
    return time.perf_counter() - t


def _skbio_tree(n, method):
    from skbio import DistanceMatrix as SkDM
    from skbio.tree import nj

    dm = SkDM(matrix_for(n), ids=[f"s{i}" for i in range(n)])
    t = time.perf_counter()
    nj(dm)
    return time.perf_counter() - t


def _dendropy_tree(n, method):
    import dendropy

    values = matrix_for(n)
    names = [f"s{i}" for i in range(n)]
    csv = ",".join([""] + names) + "\n" + "\n".join(
        ",".join([names[i]] + [repr(float(x)) for x in values[i]]) for i in range(n))
    pdm = dendropy.PhylogeneticDistanceMatrix.from_csv(src=__import__("io").StringIO(csv), delimiter=",")
    t = time.perf_counter()
    pdm.nj_tree()
    return time.perf_counter() - t


def _ours_bootstrap(n, replicates, workers):
    from cladewright.alignment import Alignment
    from cladewright.resampling import bootstrap

    aln = Alignment([f"s{i}" for i in range(n)], states_for(n), "dna")
    t = time.perf_counter()
    bootstrap(aln, replicates, seed=1, workers=workers, progress=False)
    return time.perf_counter() - t


def _skbio_bootstrap(n, replicates, workers):
    """The scikit-bio route: resample columns, align_dists, nj, per replicate."""
    from skbio import DNA, TabularMSA
    from skbio.alignment import align_dists
    from skbio.tree import nj

    seqs = np.array([list(s) for s in to_strings(states_for(n))])
    rng = np.random.default_rng(1)
    t = time.perf_counter()
    for _ in range(replicates):
        cols = rng.integers(0, seqs.shape[1], seqs.shape[1])
        msa = TabularMSA([DNA("".join(row)) for row in seqs[:, cols]], index=[f"s{i}" for i in range(n)])
        nj(align_dists(msa, "k2p", shared_by_all=False))
    return time.perf_counter() - t


def _fasta_for(n):
    """The simulated alignment as a FASTA file, for whole-process runs."""
    CACHE.mkdir(parents=True, exist_ok=True)
    path = CACHE / f"aln_{n}.fasta"
    if not path.exists():
        path.write_text("".join(f">s{i}\n{s}\n" for i, s in enumerate(to_strings(states_for(n)))))
    return path


SKBIO_SCRIPT = """
import sys
import numpy as np
from skbio import DNA, TabularMSA
from skbio.alignment import align_dists
from skbio.tree import nj
path, replicates, out = sys.argv[1], int(sys.argv[2]), sys.argv[3]
msa = TabularMSA.read(path, constructor=DNA, format="fasta")
ids = [str(s.metadata["id"]) for s in msa]
seqs = np.array([list(str(s)) for s in msa])
tree = nj(align_dists(msa, "k2p", shared_by_all=False))
rng = np.random.default_rng(1)
with open(out, "w") as fh:
    for _ in range(replicates):
        cols = rng.integers(0, seqs.shape[1], seqs.shape[1])
        rep = TabularMSA([DNA("".join(row)) for row in seqs[:, cols]], index=ids)
        fh.write(str(nj(align_dists(rep, "k2p", shared_by_all=False))))
tree.write(out + ".tree")
"""


def _wall(cmd):
    t = time.perf_counter()
    subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - t


def _ours_bootstrap_process(n, replicates, workers):
    """The whole command, from interpreter start to the written files."""
    out = CACHE / f"ours_{n}.nwk"
    for f in (out, CACHE / f"ours_{n}.reps.nwk", CACHE / f"ours_{n}.reps.nwk.run.json"):
        f.unlink(missing_ok=True)
    seconds = _wall([sys.executable, "-m", "cladewright.cli", "--quiet", "tree", str(_fasta_for(n)), "-o", str(out),
                     "--replicates", str(replicates), "--seed", "1", "--workers", str(workers),
                     "--save-replicates", str(CACHE / f"ours_{n}.reps.nwk")])
    return seconds


def _skbio_bootstrap_process(n, replicates, workers):
    """The scikit-bio route as a whole script: read, tree, replicates written as they finish."""
    return _wall([sys.executable, "-c", SKBIO_SCRIPT, str(_fasta_for(n)), str(replicates),
                  str(CACHE / f"skbio_{n}.nwk")])


TOOLS = {
    "ours_distances": _ours_distances, "skbio_distances": _skbio_distances,
    "biopython_distances": _biopython_distances, "ours_tree": _ours_tree, "scipy_tree": _scipy_tree,
    "fastcluster_tree": _fastcluster_tree, "skbio_tree": _skbio_tree, "dendropy_tree": _dendropy_tree,
    "ours_bootstrap": _ours_bootstrap, "skbio_bootstrap": _skbio_bootstrap,
    "ours_bootstrap_process": _ours_bootstrap_process, "skbio_bootstrap_process": _skbio_bootstrap_process,
}


def child(tool, args):
    """Run one measurement and print seconds and this process's peak memory."""
    parsed = [int(a) if a.isdigit() else a for a in args]
    # Best of up to three runs while they stay short (timeit's rule: the
    # minimum is the least disturbed by the rest of the machine), for every tool alike.
    seconds = TOOLS[tool](*parsed)
    for _ in range(2):
        if seconds > REPEAT_BELOW:
            break
        seconds = min(seconds, TOOLS[tool](*parsed))
    # Whole-process measurements run the tool as a child of this one: count the larger.
    peak = max(resource.getrusage(who).ru_maxrss for who in (resource.RUSAGE_SELF, resource.RUSAGE_CHILDREN)) * 1024
    print(json.dumps({"seconds": seconds, "peak": peak}))


def measure(tool, *args, timeout=3600):
    cmd = [sys.executable, __file__, "--child", tool] + [str(a) for a in args]
    env = dict(os.environ)
    out = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, env=env)
    if out.returncode != 0:
        raise RuntimeError(f"{tool} {args} failed: {out.stderr.strip().splitlines()[-1:]}")
    return json.loads(out.stdout.strip().splitlines()[-1])


# ---- the suite ---------------------------------------------------------------------------------------------
class Series:
    """Times of one tool on one task over growing n, with budget-based skipping."""

    def __init__(self, task, label, tool, extra, order, sizes, budget):
        self.task, self.label, self.tool, self.extra, self.order = task, label, tool, extra, order
        self.sizes, self.budget = sizes, budget
        self.points = {}   # n -> (seconds, peak) or a skip note (str)

    def run(self):
        last = None
        for n in self.sizes:
            if last is not None:
                n0, t0 = last
                predicted = t0 * (n / n0) ** self.order
                if predicted > self.budget:
                    self.points[n] = f"skipped (predicted {predicted:.0f} s > budget {self.budget:.0f} s)"
                    continue
            try:
                r = measure(self.tool, n, *self.extra)
            except (RuntimeError, subprocess.TimeoutExpired) as err:
                self.points[n] = f"failed: {err}"
                continue
            self.points[n] = (r["seconds"], r["peak"])
            last = (n, r["seconds"])
            print(f"  {self.task:<24} {self.label:<28} n={n:<6} {r['seconds']:9.3f} s  "
                  f"{r['peak'] / 2**30:6.2f} GiB", flush=True)
        return self

    def exponent(self):
        pts = [(n, v[0]) for n, v in self.points.items() if isinstance(v, tuple) and v[0] > 0.05]
        if len(pts) < 2:
            return None
        x, y = np.log([p[0] for p in pts]), np.log([p[1] for p in pts])
        return float(np.polyfit(x, y, 1)[0])


def suite(quick, budget):
    s = (lambda full, small: small if quick else full)
    plan = [
        ("distances K2P", [
            ("cladewright", "ours_distances", ("k2p",), 2),
            ("scikit-bio align_dists", "skbio_distances", ("k2p",), 2),
            ("Biopython DistanceCalculator (identity)", "biopython_distances", ("identity",), 2)],
         s([250, 500, 1000, 2000, 4000, 10000], [100, 200, 400])),
        ("distances TN93", [
            ("cladewright", "ours_distances", ("tn93",), 2),
            ("scikit-bio align_dists", "skbio_distances", ("tn93",), 2)],
         s([500, 1000, 2000, 10000], [100, 200, 400])),
        ("distances LogDet", [
            ("cladewright", "ours_distances", ("logdet",), 2),
            ("scikit-bio align_dists", "skbio_distances", ("logdet",), 2)],
         s([500, 1000, 2000, 10000], [100, 200, 400])),
        ("UPGMA", [
            ("cladewright", "ours_tree", ("upgma",), 2),
            ("cladewright, single precision", "ours_tree", ("upgma", "single"), 2),
            ("scipy linkage(average)", "scipy_tree", ("upgma",), 2),
            ("fastcluster average", "fastcluster_tree", ("upgma",), 2)],
         s([1000, 2000, 4000, 10000, 20000], [200, 400, 800])),
        ("WPGMA", [
            ("cladewright", "ours_tree", ("wpgma",), 2),
            ("scipy linkage(weighted)", "scipy_tree", ("wpgma",), 2),
            ("fastcluster weighted", "fastcluster_tree", ("wpgma",), 2)],
         s([1000, 2000, 4000, 10000, 20000], [200, 400, 800])),
        ("neighbour joining", [
            ("cladewright NJ", "ours_tree", ("nj",), 2),
            ("cladewright BIONJ", "ours_tree", ("bionj",), 2),
            ("cladewright NJ, single precision", "ours_tree", ("nj", "single"), 2),
            ("scipy linkage(average) [yardstick]", "scipy_tree", ("upgma",), 2),
            ("scikit-bio nj", "skbio_tree", ("nj",), 3),
            ("DendroPy nj_tree", "dendropy_tree", ("nj",), 3)],
         s([250, 500, 1000, 2000, 4000, 10000], [100, 200, 400])),
        ("bootstrap NJ/K2P x100", [
            ("cladewright, 1 worker", "ours_bootstrap", (100, 1), 2),
            ("cladewright, 2 workers", "ours_bootstrap", (100, 2), 2),
            # Its cost grows as align_dists' (quadratic) plus nj's (cubic, small at these sizes).
            ("scikit-bio route", "skbio_bootstrap", (100, 1), 2)],
         s([125, 250, 500], [50, 100])),
    ]
    plan.append(("bootstrap NJ/K2P x100, whole process", [
        ("cladewright tree, 1 worker", "ours_bootstrap_process", (100, 1), 2),
        ("cladewright tree, 2 workers", "ours_bootstrap_process", (100, 2), 2),
        ("scikit-bio route, one script", "skbio_bootstrap_process", (100, 1), 2)],
        s([500], [100])))
    if not quick:
        plan.append(("bootstrap NJ/K2P x1000", [
            ("cladewright, 1 worker", "ours_bootstrap", (1000, 1), 2),
            ("cladewright, 2 workers", "ours_bootstrap", (1000, 2), 2)], [1000]))
    results = []
    for task, tools, sizes in plan:
        for label, tool, extra, order in tools:
            results.append(Series(task, label, tool, extra, order, sizes, budget).run())
    return results


def versions():
    import importlib.metadata as md

    out = {"python": platform.python_version()}
    for pkg in ("cladewright", "numpy", "scipy", "numba", "scikit-bio", "fastcluster", "biopython", "dendropy"):
        try:
            out[pkg] = md.version(pkg)
        except md.PackageNotFoundError:
            out[pkg] = "not installed"
    return out


def machine():
    cpu = platform.processor() or platform.machine()
    try:
        for line in open("/proc/cpuinfo"):
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    mem = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES") / 2**30
    return f"{os.cpu_count()} cores ({cpu}), {mem:.0f} GiB memory, {platform.system()} {platform.release()}"


def render(results, elapsed):
    lines = ["# Benchmarks", "",
             "Made by `python bench/run.py` (one run; every measurement in a child process of its own). "
             "Times are wall-clock seconds of the computation alone (inputs built beforehand; tree tools all "
             "start from the same square matrix and include any copy they make to work in), the best of "
             "three runs for measurements under 30 s, of one run above; peak memory is "
             "the whole child process's maximum resident set, imports included. Inputs are simulated with "
             "fixed seeds (`bench/simulate.py`): alignments of 1,000 sites, and their K2P matrices for the "
             "tree methods.", "",
             f"- Machine: {machine()}", f"- Versions: " + ", ".join(f"{k} {v}" for k, v in versions().items()),
             f"- Suite time: {elapsed / 60:.1f} min", ""]
    tasks = []
    for r in results:
        if r.task not in tasks:
            tasks.append(r.task)
    for task in tasks:
        rows = [r for r in results if r.task == task]
        sizes = sorted({n for r in rows for n in r.points})
        lines += [f"## {task}", "", "| tool | " + " | ".join(f"n = {n:,}" for n in sizes) +
                  " | exponent | peak memory at largest n |",
                  "| --- |" + " ---: |" * (len(sizes) + 2)]
        base = rows[0]
        for r in rows:
            cells = []
            for n in sizes:
                v = r.points.get(n)
                if v is None:
                    cells.append("")
                elif isinstance(v, str):
                    cells.append(v)
                else:
                    ref = base.points.get(n)
                    ratio = f" ({v[0] / ref[0]:.1f}x)" if r is not base and isinstance(ref, tuple) else ""
                    cells.append(f"{v[0]:.3g} s{ratio}")
            done = [(n, v) for n, v in r.points.items() if isinstance(v, tuple)]
            peak = f"{done[-1][1][1] / 2**30:.2f} GiB (n = {done[-1][0]:,})" if done else ""
            exp = r.exponent()
            lines.append(f"| {r.label} | " + " | ".join(cells) + f" | {exp:.2f} |" if exp is not None else
                         f"| {r.label} | " + " | ".join(cells) + " |  |")
            lines[-1] += f" {peak} |"
        lines += ["", "Ratios in brackets are the tool's time over the first row's (above 1: slower than "
                  "cladewright).", ""]
    lines += ["![time against n, log-log](img/benchmarks.png)", ""]
    return "\n".join(lines)


def plot(results, path):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    tasks = []
    for r in results:
        if r.task not in tasks:
            tasks.append(r.task)
    cols = 3
    rows = (len(tasks) + cols - 1) // cols
    fig, axes = plt.subplots(rows, cols, figsize=(4.2 * cols, 3.4 * rows), squeeze=False)
    for ax, task in zip(axes.flat, tasks):
        for r in (r for r in results if r.task == task):
            pts = sorted((n, v[0]) for n, v in r.points.items() if isinstance(v, tuple))
            if not pts:
                continue
            exp = r.exponent()
            ax.loglog(*zip(*pts), marker="o", ms=3, lw=1.2,
                      label=r.label + (f" (slope {exp:.2f})" if exp is not None else ""))
        ax.set_title(task, fontsize=9)
        ax.set_xlabel("n (taxa)", fontsize=8)
        ax.set_ylabel("seconds", fontsize=8)
        ax.tick_params(labelsize=7)
        ax.grid(True, which="both", alpha=0.25)
        ax.legend(fontsize=6)
    for ax in list(axes.flat)[len(tasks):]:
        ax.axis("off")
    fig.tight_layout()
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path, dpi=110)


#: Sections of docs/benchmarks.md made by the other benchmark scripts (bench/bench_minimum_evolution.py,
#: bench/bench_likelihood.py, bench/bench_scale.py with bench/bench_nj_hard.py): carried over as they stand
#: when this suite rewrites the page.
KEPT_SECTIONS = ("## Minimum evolution", "## Model-based distances", "## Past one machine")


def kept_sections(page: Path) -> str:
    """The sections of ``page`` that other scripts made (:data:`KEPT_SECTIONS`), in their order."""
    if not page.exists():
        return ""
    kept, keep = [], False
    for line in page.read_text().splitlines(keepends=True):
        if line.startswith("## "):
            keep = line.startswith(KEPT_SECTIONS)
        if keep:
            kept.append(line)
    return "".join(kept)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small sizes, print only")
    ap.add_argument("--budget", type=float, default=120.0, help="seconds allowed per measurement")
    ap.add_argument("--child", nargs="+", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        child(args.child[0], args.child[1:])
        return
    start = time.perf_counter()
    results = suite(args.quick, args.budget)
    text = render(results, time.perf_counter() - start)
    if args.quick:
        print(text)
        return
    docs = HERE.parent / "docs"
    plot(results, docs / "img" / "benchmarks.png")
    page = docs / "benchmarks.md"
    others = kept_sections(page)
    notes = (HERE / "notes.md").read_text() if (HERE / "notes.md").exists() else ""
    page.write_text(text + ("\n" + notes if notes else "") + ("\n" + others if others else ""))
    print(text)


if __name__ == "__main__":
    main()
