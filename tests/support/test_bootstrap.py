"""The bootstrap (Felsenstein 1985): support checked against DendroPy's split counting, against the
definitions of FBP and TBE (Lemoine et al. 2018), on simulated data whose true groups are known, and for
reproducibility across workers, executors and interruptions."""

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import dendropy
import numpy as np
import pytest
from click.testing import CliRunner

from cladewright.cli import main
from cladewright.errors import InputError
from cladewright.io import read_trees
from cladewright.resampling import bootstrap, replicate_weights

from simulate import make_alignment, mutate, random_sequence

EXAMPLE = Path(__file__).resolve().parents[2] / "example_alignments" / "glass_snails_coi.fasta"


def clade_and_star(seed, length=400):
    """Five sequences below one long shared branch (a clade), seven on a star (invented data)."""
    rng = np.random.default_rng(seed)
    root = random_sequence(rng, length)
    clade_anc = mutate(rng, root, 0.35)
    seqs = [mutate(rng, clade_anc, 0.04) for _ in range(5)] + [mutate(rng, root, 0.12) for _ in range(7)]
    names = [f"in{i}" for i in range(5)] + [f"out{i}" for i in range(7)]
    return make_alignment(names, ["".join(s) for s in seqs])


def star(seed, n=12, length=300):
    rng = np.random.default_rng(seed)
    root = random_sequence(rng, length)
    seqs = ["".join(mutate(rng, root, 0.15)) for _ in range(n)]
    return make_alignment([f"t{i}" for i in range(n)], seqs)


def _support_of(tree, taxa):
    """Support on the edge whose split is ``taxa`` (either side)."""
    bits, nodes = tree.splits()
    want = np.zeros(len(tree.leaf_names), bool)
    want[[tree.leaf_names.index(t) for t in taxa]] = True
    for row, node in zip(bits, nodes):
        side = np.unpackbits(row.view(np.uint8), bitorder="little")[: len(want)].astype(bool)
        if np.array_equal(side, want) or np.array_equal(side, ~want):
            return tree.support[node]
    return None


def test_multinomial_weights_sum_to_the_sites():
    # Felsenstein (1985): a replicate draws L sites with replacement; the draw is per replicate index
    w = np.array([5, 1, 3, 1])
    a = replicate_weights(w, 42, 7)
    assert a.sum() == 10 and np.array_equal(a, replicate_weights(w, 42, 7))
    assert not np.array_equal(a, replicate_weights(w, 42, 8)) or not np.array_equal(a, replicate_weights(w, 43, 7))


def test_fbp_equals_dendropy_split_counting(tmp_path):
    # reference: DendroPy split counting (TreeList.split_distribution) over the saved replicate trees
    aln = clade_and_star(3)
    reps = tmp_path / "reps.nwk"
    result = bootstrap(aln, 60, seed=5, workers=1, save_replicates=reps)
    taxa = dendropy.TaxonNamespace()
    ref = dendropy.Tree.get(data=result.tree.to_newick(support_digits=6), schema="newick",
                            taxon_namespace=taxa, preserve_underscores=True)
    trees = dendropy.TreeList.get(path=str(reps), schema="newick", taxon_namespace=taxa,
                                  preserve_underscores=True)
    assert len(trees) == 60
    dist = trees.split_distribution(is_bipartitions_updated=False)
    freqs = dist.split_frequencies
    ref.encode_bipartitions()
    checked = 0
    for edge in ref.postorder_edge_iter():
        if edge.head_node.is_leaf() or edge.tail_node is None or edge.head_node.label is None:
            continue
        ours = float(edge.head_node.label)
        key = edge.bipartition.split_bitmask
        assert ours == pytest.approx(100 * freqs.get(key, 0.0), abs=1e-6)
        checked += 1
    assert checked == len(result.tree.splits()[1])


def test_long_clade_is_supported_and_star_is_not():
    # expected from the simulation design (common practice): a long, well-separated clade is recovered in
    # nearly every replicate; a star phylogeny leaves every grouping weakly supported (Hillis & Bull 1993
    # discuss how support relates to the true tree).
    clade = bootstrap(clade_and_star(11), 100, seed=2, workers=1)
    assert _support_of(clade.tree, [f"in{i}" for i in range(5)]) >= 95
    flat = bootstrap(star(12), 100, seed=2, workers=1)
    values = flat.tree.support[np.isfinite(flat.tree.support)]
    assert values.size and np.median(values) < 40 and values.max() < 80


def test_tbe_is_at_least_fbp():
    # Lemoine et al. (2018): a split present in a replicate scores 1 under both; an absent one 0 under FBP
    # and >= 0 under TBE, so TBE >= FBP on every branch.
    aln = star(4)
    fbp = bootstrap(aln, 40, seed=9, workers=1, support="fbp").tree.support
    tbe = bootstrap(aln, 40, seed=9, workers=1, support="tbe").tree.support
    ok = np.isfinite(fbp)
    assert np.all(tbe[ok] >= fbp[ok] - 1e-9)


def _cli(args, **kw):
    return CliRunner().invoke(main, ["--quiet"] + [str(a) for a in args], **kw)


def test_same_bytes_for_one_and_two_workers(tmp_path):
    outs = []
    for w in (1, 2):
        out, reps = tmp_path / f"t{w}.nwk", tmp_path / f"r{w}.nwk"
        r = _cli(["tree", EXAMPLE, "-o", out, "--replicates", 24, "--seed", 17, "--workers", w, "--save-replicates", reps])
        assert r.exit_code == 0, r.output
        outs.append((out.read_bytes(), reps.read_bytes()))
    assert outs[0] == outs[1]


def test_dask_local_cluster_gives_the_same_bytes(tmp_path):
    # A Dask LocalCluster on loopback stands in for a real cluster.
    distributed = pytest.importorskip("dask.distributed", reason="the cluster extra is part of the test extra")
    aln = make_alignment(*_example_names_and_seqs())
    local = bootstrap(aln, 16, seed=4, workers=1, save_replicates=tmp_path / "a.nwk")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, host="127.0.0.1",
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        remote = bootstrap(aln, 16, seed=4, scheduler=client, save_replicates=tmp_path / "b.nwk")
    assert (tmp_path / "a.nwk").read_bytes() == (tmp_path / "b.nwk").read_bytes()
    assert local.tree.to_newick() == remote.tree.to_newick()


def _example_names_and_seqs():
    from Bio import SeqIO

    recs = list(SeqIO.parse(str(EXAMPLE), "fasta"))
    return [r.id for r in recs], [str(r.seq) for r in recs]


def test_resume_after_a_kill_equals_an_uninterrupted_run(tmp_path):
    whole, whole_reps = tmp_path / "whole.nwk", tmp_path / "whole_reps.nwk"
    args = ["tree", EXAMPLE, "--replicates", 300, "--seed", 23, "--workers", 1]
    assert _cli(args + ["-o", whole, "--save-replicates", whole_reps]).exit_code == 0

    part, part_reps = tmp_path / "part.nwk", tmp_path / "part_reps.nwk"
    cmd = [sys.executable, "-m", "cladewright.cli", "--quiet"] + [str(a) for a in args] + [
        "-o", str(part), "--save-replicates", str(part_reps)]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline:
        if part_reps.exists() and part_reps.read_bytes().count(b"\n") >= 20:
            break
        time.sleep(0.05)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    assert not part.exists()  # no partial output tree
    lines = part_reps.read_bytes().count(b"\n")
    assert 20 <= lines < 300
    with open(part_reps, "ab") as fh:  # a torn last line, as a kill mid-write would leave
        fh.write(b"((a:0.1,b:0.")
    r = _cli(args + ["-o", part, "--save-replicates", part_reps, "--resume"])
    assert r.exit_code == 0, r.output
    assert part.read_bytes() == whole.read_bytes()
    assert part_reps.read_bytes() == whole_reps.read_bytes()


def test_resume_refuses_other_settings(tmp_path):
    reps = tmp_path / "r.nwk"
    assert _cli(["tree", EXAMPLE, "-o", tmp_path / "a.nwk", "--replicates", 3, "--seed", 1, "--workers", 1,
                 "--save-replicates", reps]).exit_code == 0
    r = _cli(["tree", EXAMPLE, "-o", tmp_path / "b.nwk", "--replicates", 5, "--seed", 2, "--workers", 1,
              "--save-replicates", reps, "--resume"])
    assert r.exit_code == 2 and "other data, settings or seed" in r.output


def test_existing_replicate_file_is_not_overwritten(tmp_path):
    reps = tmp_path / "r.nwk"
    reps.write_text("keep me\n")
    r = _cli(["tree", EXAMPLE, "-o", tmp_path / "a.nwk", "--replicates", 3, "--save-replicates", reps])
    assert r.exit_code == 2 and "--resume" in r.output and reps.read_text() == "keep me\n"


def test_seed_is_drawn_and_reported(tmp_path):
    r = CliRunner().invoke(main, ["tree", str(EXAMPLE), "-o", str(tmp_path / "a.nwk"), "--replicates", "4",
                                  "--workers", "1"])
    assert r.exit_code == 0
    seed = int(r.stderr.split("seed ")[1].split()[0])
    again = CliRunner().invoke(main, ["tree", str(EXAMPLE), "-o", str(tmp_path / "b.nwk"), "--replicates", "4",
                                      "--workers", "1", "--seed", str(seed)])
    assert again.exit_code == 0
    assert (tmp_path / "a.nwk").read_bytes() == (tmp_path / "b.nwk").read_bytes()


def test_support_command_matches_the_bootstrap(tmp_path):
    out, reps = tmp_path / "t.nwk", tmp_path / "r.nwk"
    assert _cli(["tree", EXAMPLE, "-o", out, "--replicates", 20, "--seed", 3, "--workers", 1,
                 "--save-replicates", reps]).exit_code == 0
    again = tmp_path / "again.nwk"
    assert _cli(["tally", reps, "--onto", out, "-o", again]).exit_code == 0
    assert again.read_bytes() == out.read_bytes()


def test_support_command_names_missing_taxa(tmp_path):
    ref = tmp_path / "ref.nwk"
    ref.write_text("((a,b),(c,d),e);\n")
    reps = tmp_path / "reps.nwk"
    reps.write_text("((a,b),(c,x),e);\n")
    r = _cli(["tally", reps, "--onto", ref, "-o", tmp_path / "o.nwk"])
    assert r.exit_code == 2 and "'d'" in r.output and "'x'" in r.output


def test_consensus_command_equals_dendropy(tmp_path):
    # reference: DendroPy majority-rule consensus (TreeList.consensus, min_freq 0.5); 21 replicates so
    # that no split sits exactly at one half
    reps = tmp_path / "r.nwk"
    assert _cli(["tree", EXAMPLE, "-o", tmp_path / "t.nwk", "--replicates", 21, "--seed", 8, "--workers", 1,
                 "--save-replicates", reps]).exit_code == 0
    out = tmp_path / "c.nwk"
    assert _cli(["consensus", reps, "-o", out]).exit_code == 0
    taxa = dendropy.TaxonNamespace()
    ours = dendropy.Tree.get(path=str(out), schema="newick", taxon_namespace=taxa, preserve_underscores=True)
    theirs = dendropy.TreeList.get(path=str(reps), schema="newick", taxon_namespace=taxa,
                                   preserve_underscores=True).consensus(min_freq=0.5)
    from dendropy.calculate import treecompare

    assert treecompare.symmetric_difference(ours, theirs) == 0


def test_bad_replicate_counts_are_errors():
    with pytest.raises(InputError, match="replicates"):
        bootstrap(star(1), 0)
    r = _cli(["tree", EXAMPLE, "-o", "-", "--replicates", "-3"])
    assert r.exit_code == 2
