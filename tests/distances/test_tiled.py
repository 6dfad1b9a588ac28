"""The tiled distance store (distances/tiled.py, io/store.py).

The reference for every value is cladewright.distance_matrix, the in-memory path, whose formulas are checked
against the published ones and scikit-bio in test_distances.py and test_likelihood.py: the tiled path must give
the same bits (the issue's requirement), so equality of bytes is the check.
"""

from __future__ import annotations

import numpy as np
import pytest
import zarr  # part of the test extra: a missing or broken zarr must fail the suite, not skip it
from click.testing import CliRunner

from cladewright.alignment import Alignment, encode
from cladewright.cli import main
from cladewright.distances import MODELS, distance_matrix
from cladewright.distances.tiled import tiled_distances
from cladewright.errors import InputError, SaturationError
from cladewright.io.readers import open_store



def _alignment(n, length, alphabet="dna", seed=1, duplicates=True, spread=(0.05, 0.4)):
    """Invented data: a random ancestor and n copies mutated at random rates (common practice)."""
    rng = np.random.default_rng(seed)
    letters = "ACGT" if alphabet == "dna" else "ARNDCQEGHILKMFPSTWYV"
    anc = rng.integers(0, len(letters), length)
    seqs = []
    for _ in range(n):
        s = anc.copy()
        mut = rng.random(length) < rng.uniform(*spread)
        s[mut] = rng.integers(0, len(letters), int(mut.sum()))
        gap = rng.random(length) < 0.02
        seqs.append("".join("-" if g else letters[x] for x, g in zip(s, gap)))
    if duplicates:
        seqs[5] = seqs[3]
        seqs[9] = seqs[3]
    names = [f"s{i}" for i in range(n)]
    return Alignment(names, encode(names, seqs, alphabet, "x"), alphabet)


@pytest.mark.parametrize("model,kw,alphabet", [
    ("k2p", {}, "dna"), ("tn93", {}, "dna"), ("tn93", {"gamma": 0.7}, "dna"), ("f84", {"freqs": "pair"}, "dna"),
    ("logdet", {}, "dna"), ("p", {"gaps": "complete"}, "dna"), ("lg", {}, "protein"),
])
def test_store_equals_in_memory_matrix_bit_for_bit(tmp_path, model, kw, alphabet):
    # reference: distance_matrix (see the module docstring); tn93 uses the whole alignment's frequencies
    n = 40 if alphabet == "protein" else 90
    aln = _alignment(n, 120 if alphabet == "protein" else 300, alphabet)
    ref = distance_matrix(aln, model, saturated="cap", **kw)
    tiled_distances(aln, tmp_path / "m.zarr", model, saturated="cap", tile=16, **kw)
    got = open_store(tmp_path / "m.zarr")
    assert got.names == ref.names
    assert got.values.dtype == ref.values.dtype
    assert got.values.tobytes() == ref.values.tobytes()
    assert got.info["sites_used"] == ref.info["sites_used"]


@pytest.mark.parametrize("name", sorted(MODELS))
def test_every_model_gives_the_in_memory_bits(tmp_path, name):
    # reference: distance_matrix (see the module docstring), every model of its registry
    spec = MODELS[name]
    aln = _alignment(40, 150) if spec.alphabet == "dna" else _alignment(24, 80, "protein")
    model = "p" if name == "protein-p" else name
    ref = distance_matrix(aln, model, saturated="cap")
    tiled_distances(aln, tmp_path / "m.zarr", model, saturated="cap", tile=16)
    assert open_store(tmp_path / "m.zarr").values.tobytes() == ref.values.tobytes()


def test_float32_store(tmp_path):
    # reference: distance_matrix with dtype float32
    aln = _alignment(50, 200)
    ref = distance_matrix(aln, "k2p", dtype=np.float32)
    tiled_distances(aln, tmp_path / "m.zarr", "k2p", dtype=np.float32, tile=16)
    assert zarr.open_group(str(tmp_path / "m.zarr"), mode="r")["distances"].dtype == np.float32
    assert open_store(tmp_path / "m.zarr").values.tobytes() == ref.values.tobytes()


def test_saturation_cap_over_the_whole_store(tmp_path):
    # reference: distance_matrix's cap (twice the largest defined distance); sequences mutated at rates up
    # to 90% saturate jc69 (p >= 3/4 is undefined: Jukes & Cantor 1969)
    aln = _alignment(60, 80, spread=(0.1, 0.95), seed=3, duplicates=False)
    ref = distance_matrix(aln, "jc69", saturated="cap")
    assert ref.info["saturated"] > 0
    with pytest.raises(SaturationError):
        tiled_distances(aln, tmp_path / "m.zarr", "jc69", tile=16)
    # every tile is done: the resumed run with the cap only applies it
    calls = []
    tiled_distances(aln, tmp_path / "m.zarr", "jc69", tile=16, saturated="cap", resume=True,
                    on_tile=lambda i, j: calls.append((i, j)))
    assert calls == []
    got = open_store(tmp_path / "m.zarr")
    assert got.values.tobytes() == ref.values.tobytes()
    assert got.info["saturated"] == ref.info["saturated"] and got.info["cap"] == ref.info["cap"]


class Stop(KeyboardInterrupt):
    pass


def test_resume_after_interruption_gives_the_same_bytes(tmp_path):
    # reference: an uninterrupted run of the same path (the issue: the same bytes); Ctrl-C is a KeyboardInterrupt
    aln = _alignment(100, 200)
    tiled_distances(aln, tmp_path / "a.zarr", "k2p", tile=16)
    seen = []

    def stop_after_three(i, j):
        seen.append((i, j))
        if len(seen) == 3:
            raise Stop

    with pytest.raises(Stop):
        tiled_distances(aln, tmp_path / "b.zarr", "k2p", tile=16, workers=2, on_tile=stop_after_three)
    with pytest.raises(InputError, match="not finished"):
        open_store(tmp_path / "b.zarr")
    rest = []
    tiled_distances(aln, tmp_path / "b.zarr", "k2p", tile=16, resume=True, on_tile=lambda i, j: rest.append((i, j)))
    n_tiles = 7 * 8 // 2  # 98 distinct rows in tiles of 16: 7 tile rows, upper triangle with the diagonal
    assert sorted(seen + rest) == sorted(set(seen + rest)) and len(seen) + len(rest) == n_tiles
    a = zarr.open_group(str(tmp_path / "a.zarr"), mode="r")["distances"][:]
    b = zarr.open_group(str(tmp_path / "b.zarr"), mode="r")["distances"][:]
    assert a.tobytes() == b.tobytes()


def test_resume_refuses_other_settings_and_existing_stores(tmp_path):
    # source: common practice (the project's output rules: never overwrite a store unless resuming)
    aln = _alignment(30, 100)
    tiled_distances(aln, tmp_path / "m.zarr", "k2p", tile=16)
    with pytest.raises(InputError, match="exists"):
        tiled_distances(aln, tmp_path / "m.zarr", "k2p", tile=16)
    with pytest.raises(InputError, match="model"):
        tiled_distances(aln, tmp_path / "m.zarr", "jc69", tile=16, resume=True)
    with pytest.raises(InputError, match="another input"):
        tiled_distances(_alignment(30, 100, seed=2), tmp_path / "m.zarr", "k2p", tile=16, resume=True)
    with pytest.raises(InputError, match="not one"):
        tiled_distances(aln, tmp_path / "new.zarr", "k2p", tile=16, resume=True)


def test_local_cluster_on_loopback(tmp_path):
    # A Dask LocalCluster on loopback stands in for a real cluster; reference: distance_matrix
    distributed = pytest.importorskip("dask.distributed", reason="the cluster extra is part of the test extra")
    aln = _alignment(200, 200)
    ref = distance_matrix(aln, "tn93")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, host="127.0.0.1",
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        tiled_distances(aln, tmp_path / "m.zarr", "tn93", tile=64, scheduler=client)
        # the command line connects to the scheduler by its address
        fasta = tmp_path / "a.fasta"
        letters = np.array(list("ACGT-"))
        fasta.write_text("".join(f">{n}\n{''.join(letters[np.minimum(r, 4)])}\n"
                                 for n, r in zip(aln.names, aln.states)))
        r = CliRunner().invoke(main, ["distances", str(fasta), "-o", str(tmp_path / "c.zarr"), "--model", "tn93",
                                      "--tile-size", "64", "--scheduler", cluster.scheduler_address])
        assert r.exit_code == 0, r.output
    assert open_store(tmp_path / "m.zarr").values.tobytes() == ref.values.tobytes()
    assert open_store(tmp_path / "c.zarr").values.tobytes() == ref.values.tobytes()
    # the workers saw the store (one file system) and wrote their tiles; the finished store's attributes are
    # those of a local run, the run's token gone
    tiled_distances(aln, tmp_path / "t.zarr", "tn93", tile=64)
    a, b = (dict(zarr.open_group(str(tmp_path / x), mode="r").attrs) for x in ("m.zarr", "t.zarr"))
    assert a == b and "run_token" not in a


def test_workers_write_only_into_this_runs_store(tmp_path):
    # common practice for shared-file-system writes: a worker writes a tile only into the store that carries
    # this run's token; a store it sees that is not this run's (a stale copy at the same path on its own disk),
    # or no store, gets nothing and the tile goes back to the client
    from cladewright.io import store as st

    aln = _alignment(20, 60, duplicates=False)
    tiled_distances(aln, tmp_path / "m.zarr", "k2p", tile=16)
    root = zarr.open_group(str(tmp_path / "m.zarr"), mode="r+")
    token = st.start_run(root)
    assert st.open_for_tiles(str(tmp_path / "m.zarr"), token) is not None
    assert st.open_for_tiles(str(tmp_path / "m.zarr"), "another run") is None
    assert st.open_for_tiles(str(tmp_path / "absent.zarr"), token) is None


def test_lost_worker_leaves_the_store_unchanged(tmp_path):
    # reference: a local run of the same path; a worker process killed mid-run (SIGKILL) loses its tiles,
    # which the Dask scheduler runs again on the other worker (common practice for this check)
    import os
    import signal

    distributed = pytest.importorskip("dask.distributed", reason="the cluster extra is part of the test extra")
    aln = _alignment(200, 150)
    tiled_distances(aln, tmp_path / "local.zarr", "k2p", tile=16)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, host="127.0.0.1",
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        pids = client.run(os.getpid)
        written = []

        def kill_one(i, j):
            written.append((i, j))
            if len(written) == 5:
                os.kill(pids[sorted(pids)[0]], signal.SIGKILL)

        tiled_distances(aln, tmp_path / "dask.zarr", "k2p", tile=16, scheduler=client, on_tile=kill_one)
        assert pids[sorted(pids)[0]] not in client.run(os.getpid).values()  # the worker did die
    a = zarr.open_group(str(tmp_path / "local.zarr"), mode="r")["distances"][:]
    b = zarr.open_group(str(tmp_path / "dask.zarr"), mode="r")["distances"][:]
    assert len(written) == 13 * 14 // 2  # 198 distinct rows in tiles of 16: every tile written once
    assert a.tobytes() == b.tobytes()


@pytest.mark.parametrize("duplicates", [False, True])
def test_command_line_store_and_tree_from_it(tmp_path, duplicates):
    # reference: the TSV path of the same command and `tree` on the alignment (the same settings)
    aln = _alignment(40, 200, duplicates=duplicates)
    fasta = tmp_path / "a.fasta"
    letters = np.array(list("ACGT-"))
    fasta.write_text("".join(f">{n}\n{''.join(letters[np.minimum(r, 4)])}\n"
                             for n, r in zip(aln.names, aln.states)))
    run = CliRunner().invoke
    r = run(main, ["distances", str(fasta), "-o", str(tmp_path / "m.zarr"), "--tile-size", "16"])
    assert r.exit_code == 0, r.output
    assert r.output.strip().splitlines()[-1] == f"output    {tmp_path / 'm.zarr'} (Zarr store)"
    r = run(main, ["distances", str(fasta), "-o", str(tmp_path / "m.zarr")])
    assert r.exit_code != 0 and "exists" in r.output + r.stderr
    assert run(main, ["distances", str(fasta), "-o", str(tmp_path / "m.tsv")]).exit_code == 0
    trees = {}
    for src in ("m.zarr", "m.tsv", "a.fasta"):
        r = run(main, ["tree", str(tmp_path / src), "-o", str(tmp_path / f"{src}.nwk")])
        assert r.exit_code == 0, r.output
        trees[src] = (tmp_path / f"{src}.nwk").read_text()
    # the store, like `tree ALN`, joins the distinct sequences and puts identical ones back as polytomies
    assert trees["m.zarr"] == trees["a.fasta"]
    if not duplicates:
        assert trees["m.zarr"] == trees["m.tsv"]


def test_without_zarr_the_message_names_the_extra(tmp_path, monkeypatch):
    # source: common practice (an optional dependency named with its install command)
    import sys

    monkeypatch.setitem(sys.modules, "zarr", None)
    with pytest.raises(InputError, match=r"cladewright\[cluster\]"):
        tiled_distances(_alignment(20, 50), tmp_path / "m.zarr", "k2p", tile=16)
