"""Regenerate the pictures and outputs shown in docs/tools.md.

Everything comes from the invented example data (example_alignments/
glass_snails_coi.fasta): a neighbour-joining tree of K2P distances with 100
bootstrap replicates (seed 1), as in the README's quick start, plus the true
tree of the simulation and a UPGMA tree for the comparison. Each tree tool is
then run through the command line itself, in a scratch folder, so that what
the page shows is what the command writes. Figures go to docs/img/; text
outputs replace the blocks of docs/tools.md between ``<!-- begin NAME -->``
and ``<!-- end NAME -->``.

Usage::

    python docs/make_tool_pictures.py
"""

from __future__ import annotations

import contextlib
import os
import re
import shutil
import sys
import tempfile
from pathlib import Path

from click.testing import CliRunner

import cladewright as cw
from cladewright.cli import main

HERE = Path(__file__).resolve().parent
IMG = HERE / "img"
DATA = HERE.parent / "example_alignments"
PAGE = HERE / "tools.md"
CLUSTER_D = "0.15"


def run(*args):
    """Run one cladewright command; return (stdout, stderr); stop on failure."""
    result = CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)
    if result.exit_code != 0:
        sys.exit(f"cladewright {' '.join(map(str, args))} failed:\n{result.stderr}")
    return result.stdout, result.stderr


def block(command, output):
    return f"```\n$ {command}\n{output.rstrip()}\n```"


def replace_blocks(page, blocks):
    text = page.read_text(encoding="utf-8")
    for name, body in blocks.items():
        pattern = re.compile(rf"(<!-- begin {name} -->\n).*?(<!-- end {name} -->)", re.S)
        if not pattern.search(text):
            sys.exit(f"{page}: no block '{name}' (<!-- begin {name} --> ... <!-- end {name} -->)")
        text = pattern.sub(lambda m: m.group(1) + body + "\n" + m.group(2), text)
    page.write_text(text, encoding="utf-8")


@contextlib.contextmanager
def inside(folder):
    old = os.getcwd()
    os.chdir(folder)
    try:
        yield
    finally:
        os.chdir(old)


def make():
    IMG.mkdir(exist_ok=True)
    blocks = {}
    with tempfile.TemporaryDirectory() as scratch, inside(scratch):
        aln = cw.read_alignment(DATA / "glass_snails_coi.fasta")
        boot = cw.bootstrap(aln, 100, model="k2p", method="nj", seed=1, workers=2, progress=False)
        boot.tree.write("glass_snails_coi.nwk")
        shutil.copy(DATA / "glass_snails_coi.true.nwk", "glass_snails_coi.true.nwk")
        cw.build_tree(cw.distance_matrix(aln, "k2p"), "upgma").write("glass_snails_coi.upgma.nwk")

        _, err = run("root", "glass_snails_coi.nwk", "-o", "rooted.nwk", "--root", "midpoint")
        blocks["root"] = block("cladewright root glass_snails_coi.nwk -o rooted.nwk --root midpoint", err)
        run("draw", "rooted.nwk", "-o", IMG / "root.svg", "--title", "rooted at the midpoint")

        # the table on stdout, then the summary's output line on stderr, as a terminal shows them
        out, err = run("compare", "glass_snails_coi.nwk", "glass_snails_coi.true.nwk")
        blocks["compare"] = block("cladewright compare glass_snails_coi.nwk glass_snails_coi.true.nwk", out + err)
        trees = ("glass_snails_coi.nwk", "glass_snails_coi.true.nwk", "glass_snails_coi.upgma.nwk")
        out, err = run("compare", *trees)
        blocks["compare-many"] = block("cladewright compare " + " ".join(trees), out + err)
        out, err = run("compare", "--tsv", *trees[:2])
        blocks["compare-tsv"] = block("cladewright compare --tsv " + " ".join(trees[:2]), out + err)

        _, err = run("clusters", "glass_snails_coi.nwk", "--within", CLUSTER_D, "-o", "groups.tsv")
        head = "".join(Path("groups.tsv").read_text().splitlines(keepends=True)[:8])
        blocks["clusters"] = block(f"cladewright clusters glass_snails_coi.nwk --within {CLUSTER_D} -o groups.tsv",
                                   err) + "\n\n" + block("head -8 groups.tsv", head)
        run("draw", "glass_snails_coi.nwk", "-o", IMG / "clusters.svg", "--root", "midpoint",
            "--groups-within", CLUSTER_D, "--title", f"groups within {CLUSTER_D}")

        run("draw", "glass_snails_coi.nwk", "-o", IMG / "draw.svg", "--root", "midpoint",
            "--highlight-below", "70", "--title", "Glass snails, COI: NJ, K2P, 100 replicates")

        out, _ = run("show", "rooted.nwk", "--width", "60")
        blocks["show"] = block("cladewright show rooted.nwk --width 60", out)
        out, _ = run("show", "rooted.nwk", "--width", "60", "--ascii")
        blocks["show-ascii"] = block("cladewright show rooted.nwk --width 60 --ascii",
                                     "\n".join(out.splitlines()[:6]) + "\n...")
    replace_blocks(PAGE, blocks)
    for name in sorted(os.listdir(IMG)):
        print(f"docs/img/{name}  {(IMG / name).stat().st_size // 1024} KB")


if __name__ == "__main__":
    make()
