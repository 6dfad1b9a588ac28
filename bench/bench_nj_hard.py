"""Neighbour joining on a matrix far from tree-like beside one close to it.

The bounded pair search (Simonsen, Mailund & Pedersen 2008) prunes well when the matrix is nearly additive;
this benchmark times ``cladewright.build.nj_arrays`` on two seeded, invented matrices of the same size:

- hard: Euclidean distances between n random points uniform in the 10-D unit cube (``--dim`` for another
  dimension). Measured at n = 2,000 and 5,000 before the row bounds of ``_kernels/nj_rows.py``: points in 1 to
  3 dimensions are as fast as tree-like matrices or faster (2-D: 0.3x), 5-D 1.3x, 10-D 11x to 16x, 30-D and
  100-D 80x, all with the sorted lists alone; 10-D is the default, the first clearly hard case;
- tree-like: path lengths of a random binary tree (random pairs of lineages joined, branch lengths exponential
  with mean 1), each distance times (1 + 0.05 z), z standard normal, symmetric, zero diagonal.

Each time is the best of ``--repeat`` runs (default 3) after a warm-up compile at n = 50; the ratio hard /
tree-like is printed (the target is <= 2 at n = 10,000). scikit-bio's ``skbio.tree.nj``, where installed, is
timed at n = 2,000 beside cladewright on both kinds as the reference (``--no-reference`` leaves it out).

    .venv-test/bin/python bench/bench_nj_hard.py                 # n = 5,000 and 10,000
    .venv-test/bin/python bench/bench_nj_hard.py 2000 --bionj    # other sizes; BIONJ instead of NJ
    .venv-test/bin/python bench/bench_nj_hard.py 5000 --dim 30   # points in the 30-D unit cube
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from cladewright.build.nj import nj_arrays


def euclidean_matrix(n, dim, seed):
    """Distances between n points uniform in the unit cube of ``dim`` dimensions (exactly symmetric)."""
    x = np.random.default_rng(seed).random((n, dim))
    sq = (x * x).sum(axis=1)
    d2 = sq[:, None] + sq[None, :] - 2.0 * (x @ x.T)
    d = np.sqrt(np.maximum(d2, 0.0))
    d = np.triu(d, 1)
    return d + d.T


def tree_like_matrix(n, seed, noise=0.05):
    """Path lengths of a random binary tree times (1 + noise z): clusters of leaves are joined in random
    pairs; each join writes the block of distances between its two sides once, so the work is O(n^2)."""
    rng = np.random.default_rng(seed)
    d = np.zeros((n, n))
    clusters = [(np.array([i]), np.zeros(1)) for i in range(n)]   # leaves, their depths below the top
    while len(clusters) > 1:
        a, b = rng.choice(len(clusters), 2, replace=False)
        (la, da), (lb, db) = clusters[a], clusters[b]
        ea, eb = rng.exponential(1.0, 2)
        da, db = da + ea, db + eb
        d[np.ix_(la, lb)] = da[:, None] + db[None, :]
        for k in sorted((a, b), reverse=True):
            clusters[k] = clusters[-1]
            clusters.pop()
        clusters.append((np.concatenate([la, lb]), np.concatenate([da, db])))
    d = np.triu(d + d.T, 1) * (1.0 + noise * np.triu(rng.standard_normal((n, n)), 1))
    return d + d.T


def best_time(f, repeat):
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        f()
        best = min(best, time.perf_counter() - t0)
    return best


def reference_nj():
    """scikit-bio's nj and DistanceMatrix, or None when it is not installed."""
    try:
        from skbio import DistanceMatrix
        from skbio.tree import nj
    except ImportError:
        return None
    return lambda d: nj(DistanceMatrix(d, ids=[str(i) for i in range(len(d))]))


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("n", type=int, nargs="*", default=[5000, 10000])
    ap.add_argument("--dim", type=int, default=10, help="dimension of the random points (default 10)")
    ap.add_argument("--repeat", type=int, default=3, help="runs per timing, best kept (default 3)")
    ap.add_argument("--bionj", action="store_true", help="BIONJ instead of NJ")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--no-reference", action="store_true", help="leave out scikit-bio at n = 2,000")
    a = ap.parse_args(argv)
    nj_arrays(euclidean_matrix(50, a.dim, 0), bionj=a.bionj)            # compile
    nj_arrays(tree_like_matrix(50, 0), bionj=a.bionj)
    kind = "BIONJ" if a.bionj else "NJ"
    print(f"cladewright {kind}; hard = Euclidean, {a.dim}-D; tree-like = tree path lengths x (1 + 0.05 z); "
          f"best of {a.repeat}")
    print(f"{'n':>7} {'hard s':>9} {'tree-like s':>12} {'hard/tree':>10}")
    for n in a.n:
        hard = euclidean_matrix(n, a.dim, a.seed)
        tree = tree_like_matrix(n, a.seed)
        th = best_time(lambda: nj_arrays(hard, bionj=a.bionj), a.repeat)
        tt = best_time(lambda: nj_arrays(tree, bionj=a.bionj), a.repeat)
        print(f"{n:>7} {th:>9.3f} {tt:>12.3f} {th / tt:>10.2f}", flush=True)
    ref = None if a.no_reference else reference_nj()
    if ref is not None and not a.bionj:
        n = 2000
        hard = euclidean_matrix(n, a.dim, a.seed)
        tree = tree_like_matrix(n, a.seed)
        ours = [best_time(lambda: nj_arrays(m), a.repeat) for m in (hard, tree)]
        theirs = [best_time(lambda: ref(m), a.repeat) for m in (hard, tree)]
        print(f"reference scikit-bio nj at n = {n}:")
        for name, o, t in zip(("hard", "tree-like"), ours, theirs):
            print(f"  {name:>9}: cladewright {o:.3f} s, scikit-bio {t:.3f} s, {t / o:.1f}x faster")
        print(f"  hard/tree-like: cladewright {ours[0] / ours[1]:.2f}, scikit-bio {theirs[0] / theirs[1]:.2f}")


if __name__ == "__main__":
    main()
