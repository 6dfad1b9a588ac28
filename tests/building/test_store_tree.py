"""Trees straight from a tiled distance store (store_tree.py).

The reference is the in-memory path, cladewright.pipeline.tree_from_alignment with the store's settings,
whose trees are checked against published worked examples and scikit-bio in test_nj.py, test_linkage.py and
test_search.py: a tree from the store must be that tree bit for bit (the issue's requirement: the store is a
way to hold the matrix, not another method), fit statistic included. The memory check measures the
requirement itself: no second full copy of the matrix beside the method's work space.
"""

from __future__ import annotations

import tracemalloc

import numpy as np
import pytest
import zarr  # noqa: F401  (part of the test extra: a missing or broken zarr must fail the suite, not skip it)
from click.testing import CliRunner

from cladewright import tree_from_alignment, tree_from_store
from cladewright.alignment import Alignment, encode
from cladewright.cli import main
from cladewright.distances.tiled import tiled_distances
from cladewright.io.readers import open_store


METHODS = ("nj", "bionj", "upgma", "wpgma", "single", "complete", "bme")


def _alignment(n, length, seed=1, duplicates=True, spread=(0.05, 0.4)):
    """Invented data: a random ancestor and n copies mutated at random rates (common practice)."""
    rng = np.random.default_rng(seed)
    anc = rng.integers(0, 4, length)
    seqs = []
    for _ in range(n):
        s = anc.copy()
        mut = rng.random(length) < rng.uniform(*spread)
        s[mut] = rng.integers(0, 4, int(mut.sum()))
        seqs.append("".join("ACGT"[x] for x in s))
    if duplicates:
        seqs[5] = seqs[9] = seqs[3]
        seqs[20] = seqs[21]
    names = [f"s{i}" for i in range(n)]
    return Alignment(names, encode(names, seqs, "dna", "x"), "dna")


@pytest.fixture(scope="module")
def stores(tmp_path_factory):
    aln = _alignment(70, 240)
    out = {}
    for dtype in (np.float64, np.float32):
        path = tmp_path_factory.mktemp("s") / "m.zarr"
        tiled_distances(aln, path, "tn93", tile=16, dtype=dtype)
        out[np.dtype(dtype).name] = path
    return aln, out


@pytest.mark.parametrize("dtype", ["float64", "float32"])
@pytest.mark.parametrize("method", METHODS)
def test_every_method_gives_the_tree_of_the_alignment(stores, method, dtype):
    aln, paths = stores
    want, want_info, _ = tree_from_alignment(aln, "tn93", method, dtype=np.dtype(dtype))
    got, info = tree_from_store(paths[dtype], method)
    assert got.to_newick(digits=17) == want.to_newick(digits=17)
    assert info["fit_name"] == want_info["fit_name"] and info["fit_value"] == want_info["fit_value"]
    assert info["identical_groups"] == want_info["identical_groups"] == 2
    assert (info["taxa"], info["distinct"]) == (70, 67)


@pytest.mark.parametrize("refine", ["nni", "spr"])
def test_refined_trees_from_the_store(stores, refine):
    aln, paths = stores
    want, want_info, _ = tree_from_alignment(aln, "tn93", "bme" if refine == "spr" else "nj", refine=refine)
    got, info = tree_from_store(paths["float64"], "bme" if refine == "spr" else "nj", refine=refine)
    assert got.to_newick(digits=17) == want.to_newick(digits=17)
    assert info["length_after"] == want_info["length_after"]


def test_single_precision_work_on_a_double_store(stores):
    aln, paths = stores
    want, _, _ = tree_from_alignment(aln, "tn93", "bionj", dtype=np.float32)
    got, _ = tree_from_store(paths["float64"], "bionj", dtype=np.float32)
    assert got.to_newick(digits=17) == want.to_newick(digits=17)


def test_saturated_pairs_take_the_stores_cap(tmp_path):
    # sequences mutated at rates up to 95% saturate jc69 (p >= 3/4 is undefined: Jukes & Cantor 1969)
    aln = _alignment(50, 80, seed=3, duplicates=False, spread=(0.1, 0.95))
    tiled_distances(aln, tmp_path / "m.zarr", "jc69", tile=16, saturated="cap")
    for method in ("nj", "upgma"):
        want, want_info, _ = tree_from_alignment(aln, "jc69", method, saturated="cap")
        got, info = tree_from_store(tmp_path / "m.zarr", method)
        assert want_info["saturated"] > 0 and info["saturated"] == want_info["saturated"]
        assert info["cap"] == want_info["cap"]
        assert got.to_newick(digits=17) == want.to_newick(digits=17)
        assert [w.kind for w in info["warnings"]] == [w.kind for w in want_info["warnings"]]


def test_two_distinct_sequences_give_one_branch(tmp_path):
    # three or more sequences but two distinct: one branch whatever the method, as from the alignment
    names = ["a", "b", "c", "d"]
    seqs = ["ACGTACGTAC", "ACGTACGTAC", "ACGTACGTAA", "ACGTACGTAC"]
    aln = Alignment(names, encode(names, seqs, "dna", "x"), "dna")
    tiled_distances(aln, tmp_path / "m.zarr", "p")
    for method in ("nj", "upgma"):
        want, _, _ = tree_from_alignment(aln, "p", method)
        got, _ = tree_from_store(tmp_path / "m.zarr", method)
        assert got.to_newick(digits=17) == want.to_newick(digits=17)


@pytest.mark.parametrize("method,share", [("nj", 1.0), ("upgma", 0.5)])
def test_no_second_copy_of_the_matrix(tmp_path, method, share):
    # the requirement: the store goes straight into the work space (nj: the square, linkage: the triangle),
    # so the peak of traced allocations (numpy's and the compiled kernels') stays near that one array plus
    # the method's own lists (nj: n x 8 x 8 entries, 16% of the matrix at this n) and a tile row being read;
    # reading the store into a matrix first and building from it needs a second matrix
    aln = _alignment(400, 60, duplicates=False)
    tiled_distances(aln, tmp_path / "m.zarr", "p", tile=32)
    whole = 400 * 400 * 8
    tracemalloc.start()
    try:
        tree_from_store(tmp_path / "m.zarr", method)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < (share + 0.6) * whole, peak / whole
    tracemalloc.start()
    try:
        dm = open_store(tmp_path / "m.zarr")
        from cladewright import build_tree
        build_tree(dm, method)
        old = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert old > peak + 0.5 * whole, (old / whole, peak / whole)


def test_command_line_tree_from_store_with_report(tmp_path, stores):
    aln, paths = stores
    fasta = tmp_path / "a.fasta"
    letters = np.array(list("ACGT-"))
    fasta.write_text("".join(f">{n}\n{''.join(letters[np.minimum(r, 4)])}\n" for n, r in zip(aln.names, aln.states)))
    run = CliRunner().invoke
    r = run(main, ["tree", str(paths["float64"]), "-o", str(tmp_path / "s.nwk"), "--method", "upgma",
                   "--report", str(tmp_path / "r.html")])
    assert r.exit_code == 0, r.output
    assert "taxa      70 (distance store, 67 distinct)" in r.output
    assert run(main, ["tree", str(fasta), "-m", "tn93", "--method", "upgma", "-o", str(tmp_path / "a.nwk")]
               ).exit_code == 0
    assert (tmp_path / "s.nwk").read_text() == (tmp_path / "a.nwk").read_text()
    assert (tmp_path / "r.html").stat().st_size > 0


@pytest.mark.parametrize("option", [["-m", "jc69"], ["--gamma-shape", "0.5"], ["--gaps", "complete"],
                                    ["--saturated", "cap"]])
def test_alignment_options_with_distances_are_refused(tmp_path, stores, option):
    # common practice: an option that would be ignored is an error, not a silent no-op (the tree would be
    # taken for one made with it)
    aln, paths = stores
    run = CliRunner().invoke
    assert run(main, ["distances", str(paths["float64"]).replace("m.zarr", "x"), "-o", "-"]).exit_code != 0
    for src in (str(paths["float64"]),):
        r = run(main, ["tree", src, "-o", str(tmp_path / "t.nwk")] + option)
        assert r.exit_code == 2
        assert "holds distances already" in r.output and "Traceback" not in r.output
        assert not (tmp_path / "t.nwk").exists()
