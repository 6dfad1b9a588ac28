"""Faults survived: Ctrl-C during a bootstrap, and a Dask worker lost mid-run. In both, every file stays
consistent and the final output equals that of an uninterrupted run with the same seed (common practice
for resumable runs; the bootstrap itself is Felsenstein 1985)."""

import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest
from click.testing import CliRunner

from cladewright.cli import main
from cladewright.io.readers import parse_newick, read_alignment
from cladewright.resampling import bootstrap

EXAMPLE = Path(__file__).resolve().parents[2] / "example_alignments" / "glass_snails_coi.fasta"


def _wait_for_lines(path, count, timeout=120):
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if path.exists() and path.read_bytes().count(b"\n") >= count:
            return True
        time.sleep(0.05)
    return False


def test_ctrl_c_leaves_files_consistent_and_resumable(tmp_path):
    args = ["tree", str(EXAMPLE), "--replicates", "300", "--seed", "31", "--workers", "2"]
    whole, whole_reps = tmp_path / "whole.nwk", tmp_path / "whole_reps.nwk"
    r = CliRunner().invoke(main, ["--quiet"] + args + ["-o", str(whole), "--save-replicates", str(whole_reps)])
    assert r.exit_code == 0, r.output

    out, reps = tmp_path / "out.nwk", tmp_path / "reps.nwk"
    # Ctrl-C at a terminal: SIGINT in its default disposition, even when this test runs where it is ignored
    # (a job started with & by a non-interactive shell inherits SIGINT ignored, and Python then keeps it so)
    proc = subprocess.Popen([sys.executable, "-m", "cladewright.cli"] + args +
                            ["-o", str(out), "--save-replicates", str(reps)],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                            preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
    assert _wait_for_lines(reps, 10)
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 130
    assert b"interrupted" in err and b"Traceback" not in err
    assert not out.exists()
    text = reps.read_text()
    assert text.endswith("\n")  # whole lines only: each written and flushed in one piece
    for line in text.splitlines():
        assert len(parse_newick(line)) == 1
    r = CliRunner().invoke(main, ["--quiet"] + args + ["-o", str(out), "--save-replicates", str(reps), "--resume"])
    assert r.exit_code == 0, r.output
    assert out.read_bytes() == whole.read_bytes() and reps.read_bytes() == whole_reps.read_bytes()


def test_lost_dask_worker_does_not_change_the_output(tmp_path):
    distributed = pytest.importorskip("dask.distributed", reason="the cluster extra is part of the test extra")
    aln = read_alignment(EXAMPLE)
    local = bootstrap(aln, 120, seed=6, workers=1, save_replicates=tmp_path / "local.nwk", progress=False)
    reps = tmp_path / "dask.nwk"
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, host="127.0.0.1",
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        result = {}

        def run():
            result["value"] = bootstrap(aln, 120, seed=6, scheduler=client, save_replicates=reps, progress=False)

        thread = threading.Thread(target=run)
        thread.start()
        assert _wait_for_lines(reps, 5)
        pids = client.run(os.getpid)
        victim = sorted(pids)[0]
        # The worker process dies at once, with whatever tasks it held; its nanny starts a fresh one.
        os.kill(pids[victim], signal.SIGKILL)
        thread.join(timeout=300)
        assert not thread.is_alive()
    assert reps.read_bytes() == (tmp_path / "local.nwk").read_bytes()
    assert result["value"].tree.to_newick() == local.tree.to_newick()
