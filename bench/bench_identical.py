"""Identical sequences cost what the distinct ones cost.

Times `cladewright tree` (K2P, NJ) on D distinct invented haplotypes, then on N sequences drawn from those
same D haplotypes (every haplotype present), each in a child process, and prints the ratio. Invented data,
seeded.

    python bench/bench_identical.py [--distinct 1000] [--sequences 100000] [--sites 500]
"""

import argparse
import os
import subprocess
import sys
import tempfile
import time

import numpy as np


def write_fasta(path, names, seqs):
    with open(path, "w") as fh:
        for name, seq in zip(names, seqs):
            fh.write(f">{name}\n{seq}\n")


def run(path, out):
    start = time.perf_counter()
    subprocess.run([sys.executable, "-m", "cladewright.cli", "-q", "tree", path, "-o", out], check=True)
    return time.perf_counter() - start


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--distinct", type=int, default=1000)
    ap.add_argument("--sequences", type=int, default=100_000)
    ap.add_argument("--sites", type=int, default=500)
    args = ap.parse_args()
    rng = np.random.default_rng(20261202)
    base = rng.choice(list("ACGT"), args.sites)
    haplotypes = []
    for _ in range(args.distinct):
        s = base.copy()
        hit = rng.random(args.sites) < 0.05
        s[hit] = rng.choice(list("ACGT"), hit.sum())
        haplotypes.append("".join(s))
    pick = np.concatenate([np.arange(args.distinct), rng.integers(0, args.distinct, args.sequences - args.distinct)])
    with tempfile.TemporaryDirectory() as tmp:
        few, many = os.path.join(tmp, "distinct.fasta"), os.path.join(tmp, "many.fasta")
        write_fasta(few, [f"h{i}" for i in range(args.distinct)], haplotypes)
        write_fasta(many, [f"q{i}" for i in range(args.sequences)], [haplotypes[i] for i in pick])
        run(few, os.path.join(tmp, "warm.nwk"))  # compile the kernels outside the timing
        t_few = run(few, os.path.join(tmp, "a.nwk"))
        t_many = run(many, os.path.join(tmp, "b.nwk"))
    print(f"{args.distinct} distinct sequences: {t_few:.2f} s")
    print(f"{args.sequences} sequences of those {args.distinct} haplotypes: {t_many:.2f} s "
          f"({t_many / t_few:.2f}x; the rest is reading {args.sequences} records and writing their tree)")


if __name__ == "__main__":
    main()
