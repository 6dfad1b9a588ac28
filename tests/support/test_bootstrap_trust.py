"""Trust in the bootstrap at its edges (issue 11, items 1, 5, 10, 12 and 14): repeated library calls in one
process, replicate files shared or changed behind the run's back, absurd replicate counts and seeds, and
replicates whose drawn sites saturate a pair. The bootstrap itself is Felsenstein (1985) Evolution
39:783-791: replicate ``i`` is a multinomial draw of the sites from its own stream, so a call gives the same
trees whatever ran before it in the process."""

import fcntl
import json
import os
import subprocess
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

import cladewright.memory
from cladewright.io.readers import read_alignment
from cladewright.cli import main
from cladewright.errors import InputError
from cladewright.memory import replicate_tree_bytes
from cladewright.resampling import bootstrap, replicate_weights

from simulate import simulate_dna

BASES = np.array(list("ACGT"))


def _cli(args):
    return CliRunner().invoke(main, ["--quiet"] + [str(a) for a in args])


def _one_line_error(result, *fragments):
    # source: the project's CLI contract (docs/errors.md): exit status 2 and one line "cladewright: error: ..."
    assert result.exit_code == 2, result.output
    lines = result.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("cladewright: error:"), result.stderr
    assert "Traceback" not in result.output
    for fragment in fragments:
        assert fragment in lines[0], lines[0]
    return lines[0]


def _write_fasta(path, names, seqs):
    path.write_text("".join(f">{n}\n{s}\n" for n, s in zip(names, seqs)))
    return path


def _result_text(result):
    return result.tree.to_newick() + "".join(t.to_newick() for t in result.replicates)


# ---- item 1: repeated library calls --------------------------------------------------------------------

FRESH = """
import json, os, sys
import cladewright as cw
from cladewright.support import fbp_support

# A child forked from a process that has never called bootstrap() is in the state of a fresh process. The
# compiled kernels are loaded here once, by the stages bootstrap() is made of, not by bootstrap() itself.
first = cw.read_alignment(json.loads(sys.argv[1])[0][0])
tree = cw.build_tree(cw.distance_matrix(first, "k2p", serial=True), "nj")  # serial: no OpenMP before fork
fbp_support(tree, [tree])
for fasta, reps, seed, workers, out in json.loads(sys.argv[1]):
    pid = os.fork()
    if pid == 0:
        try:
            r = cw.bootstrap(cw.read_alignment(fasta), reps, seed=seed, workers=workers, progress=False)
            with open(out, "w") as fh:
                fh.write(r.tree.to_newick() + "".join(t.to_newick() for t in r.replicates))
        except BaseException:
            import traceback
            traceback.print_exc()
            os._exit(1)
        os._exit(0)
    if os.waitpid(pid, 0)[1] != 0:
        sys.exit(1)
"""


def test_repeated_calls_in_one_process_equal_a_call_in_a_fresh_process(tmp_path):
    # source: Felsenstein (1985) and the per-replicate streams (numpy SeedSequence spawn keys): a call's
    # replicates depend on its own alignment and seed only, so each call must equal the same call made in a
    # fresh process, byte for byte, whatever calls came before it (common practice for library calls)
    files = []
    for k in range(6):
        names, seqs = simulate_dna(5 + k, 60 + 20 * k, seed=100 + k)
        files.append(_write_fasta(tmp_path / f"gene{k}.fasta", [f"g{k}_{n}" for n in names], seqs))
    jobs = [(str(f), 6, 40 + k, w, str(tmp_path / f"fresh{k}_{w}.txt")) for k, f in enumerate(files) for w in (1, 2)]
    done = subprocess.run([sys.executable, "-c", FRESH, json.dumps(jobs)], capture_output=True, text=True,
                          timeout=300)
    assert done.returncode == 0, done.stderr
    fresh = {(fasta, w): Path(out).read_text() for fasta, _, _, w, out in jobs}
    alignments = [read_alignment(f) for f in files]
    for _ in range(5):
        for k, (f, aln) in enumerate(zip(files, alignments)):  # interleaved: every gene in each round
            for w in (1, 2):
                got = _result_text(bootstrap(aln, 6, seed=40 + k, workers=w, progress=False))
                assert got == fresh[(str(f), w)]


# ---- item 5: replicate files -----------------------------------------------------------------------------

def _small_alignment(tmp_path, n=8, length=120, seed=3):
    names, seqs = simulate_dna(n, length, seed=seed, gaps=0, ambiguous=0)
    return _write_fasta(tmp_path / "small.fasta", names, seqs)


def test_replicate_file_that_is_also_the_tree_or_report_is_refused(tmp_path):
    # source: common practice (one path, one content): the tree written over the replicates would later be
    # counted as a replicate by --resume. Symbolic links are resolved (POSIX realpath), hard links compared
    # by device and inode (os.path.samefile).
    fasta = _small_alignment(tmp_path)
    base = ["tree", fasta, "--replicates", 3, "--seed", 1, "--workers", 1]
    out = tmp_path / "out.nwk"
    _one_line_error(_cli(base + ["-o", out, "--save-replicates", out]), "--save-replicates and --output")
    assert not out.exists()
    link = tmp_path / "link.nwk"
    link.symlink_to(out)  # a link to a file not made yet
    _one_line_error(_cli(base + ["-o", out, "--save-replicates", link]), "--save-replicates and --output")
    assert not out.exists() and not os.path.exists(tmp_path / "link.nwk.run.json")
    report = tmp_path / "run.html"
    _one_line_error(_cli(base + ["-o", out, "--report", report, "--save-replicates", report]),
                    "--save-replicates and --report")
    assert not report.exists() and not out.exists()
    kept = tmp_path / "kept.nwk"
    kept.write_text("(a,b,c);\n")
    hard = tmp_path / "hard.nwk"
    os.link(kept, hard)
    _one_line_error(_cli(base + ["-o", kept, "--save-replicates", hard, "--resume"]),
                    "--save-replicates and --output")
    assert kept.read_text() == "(a,b,c);\n"


def test_a_replicate_file_held_by_another_run_is_refused(tmp_path):
    # source: flock(2): an exclusive lock held through one open file description makes a non-blocking
    # exclusive lock through another fail at once; here the test holds it, as a running bootstrap does
    fasta = _small_alignment(tmp_path)
    base = ["tree", fasta, "--seed", 4, "--workers", 1]
    reps, whole_reps = tmp_path / "reps.nwk", tmp_path / "whole.nwk"
    assert _cli(base + ["--replicates", 5, "-o", tmp_path / "a.nwk", "--save-replicates", reps]).exit_code == 0
    before = reps.read_bytes(), Path(f"{reps}.run.json").read_bytes()
    with open(reps, "rb") as held:
        fcntl.flock(held.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        r = _cli(base + ["--replicates", 9, "-o", tmp_path / "b.nwk", "--save-replicates", reps, "--resume"])
        _one_line_error(r, "in use by another run")
        fcntl.flock(held.fileno(), fcntl.LOCK_UN)
    assert (reps.read_bytes(), Path(f"{reps}.run.json").read_bytes()) == before
    assert not (tmp_path / "b.nwk").exists()
    # once the other run has let go, the file resumes to what an uninterrupted run gives (Felsenstein 1985)
    assert _cli(base + ["--replicates", 9, "-o", tmp_path / "b.nwk", "--save-replicates", reps, "--resume"]).exit_code == 0
    assert _cli(base + ["--replicates", 9, "-o", tmp_path / "c.nwk", "--save-replicates", whole_reps]).exit_code == 0
    assert reps.read_bytes() == whole_reps.read_bytes()
    assert (tmp_path / "b.nwk").read_bytes() == (tmp_path / "c.nwk").read_bytes()


def test_two_runs_on_one_replicate_file_at_once(tmp_path):
    # source: the run asked for 4000 replicates, so the file must end with exactly 4000 trees (Felsenstein
    # 1985: one tree per replicate); a second run resuming the same file while the first writes it stops
    fasta = _small_alignment(tmp_path, n=10, length=150)
    reps = tmp_path / "reps.nwk"
    args = ["tree", str(fasta), "--replicates", "4000", "--seed", "8", "--workers", "1"]
    first = subprocess.Popen([sys.executable, "-m", "cladewright.cli", "--quiet"] + args +
                             ["-o", str(tmp_path / "first.nwk"), "--save-replicates", str(reps)],
                             stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    deadline = time.monotonic() + 120
    while time.monotonic() < deadline and not (reps.exists() and reps.read_bytes().count(b"\n") >= 1):
        time.sleep(0.01)
    second = _cli(args + ["-o", tmp_path / "second.nwk", "--save-replicates", reps, "--resume"])
    still_running = first.poll() is None
    _, err = first.communicate(timeout=300)
    assert first.returncode == 0, err
    assert still_running  # the refusal happened while the first run held the file
    _one_line_error(second, "in use by another run")
    assert not (tmp_path / "second.nwk").exists()
    assert reps.read_bytes().count(b"\n") == 4000
    assert json.loads(Path(f"{reps}.run.json").read_text())["lines"] == 4000


def _run_to_file(tmp_path, fasta, replicates, name):
    out, reps = tmp_path / f"{name}.nwk", tmp_path / f"{name}_reps.nwk"
    r = _cli(["tree", fasta, "--replicates", replicates, "--seed", 12, "--workers", 1, "-o", out, "--save-replicates", reps])
    assert r.exit_code == 0, r.output
    return out, reps


def _resume(tmp_path, fasta, replicates, reps, out):
    return _cli(["tree", fasta, "--replicates", replicates, "--seed", 12, "--workers", 1, "-o", out,
                 "--save-replicates", reps, "--resume"])


@pytest.mark.parametrize("damage", ["delete", "alter", "swap-for-last"])
def test_resume_refuses_a_file_changed_in_the_middle(tmp_path, damage):
    # source: common practice for resumable runs: support counted from a file whose lines were deleted or
    # edited would differ from an uninterrupted run's, so the lines the run wrote are checked (SHA-256,
    # FIPS 180-4) and a changed file is refused, left as it is
    fasta = _small_alignment(tmp_path)
    _, reps = _run_to_file(tmp_path, fasta, 12, "part")
    lines = reps.read_text().splitlines(keepends=True)
    if damage == "delete":
        del lines[5]
    elif damage == "alter":
        lines[5] = lines[5].replace(":0.", ":0.9", 1)
    else:  # the line count is kept: line 6 removed and the last line written twice
        del lines[5]
        lines.append(lines[-1])
    reps.write_text("".join(lines))
    damaged = reps.read_bytes()
    out = tmp_path / "out.nwk"
    line = _one_line_error(_resume(tmp_path, fasta, 20, reps, out), "cannot resume", "start a new replicate file")
    assert ("deleted" in line) if damage == "delete" else ("changed" in line)
    assert reps.read_bytes() == damaged and not out.exists()


def test_resume_remakes_lines_the_record_does_not_vouch_for(tmp_path):
    # source: Felsenstein (1985) with one stream per replicate: a resumed run equals an uninterrupted one. A
    # whole line appended after the run's own (by hand, or by a run killed before its record caught up) is
    # made again, not trusted; so is a torn last line.
    fasta = _small_alignment(tmp_path)
    whole_out, whole_reps = _run_to_file(tmp_path, fasta, 20, "whole")
    _, reps = _run_to_file(tmp_path, fasta, 12, "part")
    with open(reps, "a") as fh:
        fh.write(reps.read_text().splitlines(keepends=True)[0] + "((a:0.1,b:0.")
    out = tmp_path / "out.nwk"
    assert _resume(tmp_path, fasta, 20, reps, out).exit_code == 0
    assert reps.read_bytes() == whole_reps.read_bytes() and out.read_bytes() == whole_out.read_bytes()


# ---- item 12 and item 10: absurd counts, seeds and workers ----------------------------------------------

def test_a_huge_replicate_count_names_the_count_not_memory(tmp_path):
    # source: the memory a machine has (far below 10^12 trees of 2 kB: common practice); the message must
    # name the replicate count and a count that fits, not a generic out-of-memory advice
    fasta = _small_alignment(tmp_path)
    out = tmp_path / "t.nwk"
    line = _one_line_error(_cli(["tree", fasta, "-o", out, "--replicates", 1000000000000, "--seed", 1]),
                           "1000000000000 replicates", "ask for at most")
    assert "out of memory" not in line and not out.exists()
    fit = int(line.split("ask for at most ")[1].split()[0])
    assert 1 <= fit < 10**12


def test_the_suggested_replicate_count_fits(monkeypatch, tmp_path):
    # source: measurement (tracemalloc, Python standard library): the memory the kept replicate trees really
    # take must not exceed the estimate that the check relies on, so the count it suggests does fit
    names, seqs = simulate_dna(40, 200, seed=9)
    aln = read_alignment(_write_fasta(tmp_path / "a.fasta", names, seqs))
    bootstrap(aln, 2, seed=1, workers=1, progress=False)  # compiled and warmed up before measuring
    sizes = []
    for count in (10, 60):
        tracemalloc.start()
        result = bootstrap(aln, count, seed=1, workers=1, progress=False)
        sizes.append(tracemalloc.get_traced_memory()[0])
        tracemalloc.stop()
        del result
    per_tree = (sizes[1] - sizes[0]) / 50
    assert 0 < per_tree <= replicate_tree_bytes(aln.n_taxa) <= 3 * per_tree
    # a machine with room for the run and about 1,000 trees: 5,000 are refused with a count that fits
    run = cladewright.memory.estimate_bytes(aln.n_taxa, method="nj", workers=1)
    monkeypatch.setattr(cladewright.memory, "available_bytes", lambda: run + int(1000.5 * per_tree))
    with pytest.raises(InputError, match="5000 replicates") as err:
        bootstrap(aln, 5000, seed=1, workers=1, progress=False)
    fit = int(str(err.value).split("ask for at most ")[1].split()[0])
    assert 100 <= fit <= 1000
    assert len(bootstrap(aln, fit, seed=1, workers=1, progress=False).replicates) == fit


@pytest.mark.parametrize("value", [0, -3, True, 2.0, "10", None, 10**30 + 0.5])
def test_replicates_must_be_a_whole_number(value, tmp_path):
    # source: Felsenstein (1985): the number of replicates is a count >= 1; a bool is not a count here
    aln = read_alignment(_small_alignment(tmp_path))
    with pytest.raises(InputError, match="^replicates must be a whole number >= 1"):
        bootstrap(aln, value, progress=False)


@pytest.mark.parametrize("seed", [-1, True, 1.5, "7", 2**128])
def test_bad_seeds_name_the_seed(seed, tmp_path):
    # source: numpy SeedSequence takes a non-negative integer entropy (numpy documentation); the library's
    # own bound is 128 bits, SeedSequence's pool size
    aln = read_alignment(_small_alignment(tmp_path))
    with pytest.raises(InputError, match="^seed must be a whole number from 0 to 2\\*\\*128 - 1"):
        bootstrap(aln, 2, seed=seed, workers=1, progress=False)


def test_the_largest_seed_is_taken(tmp_path):
    # source: numpy SeedSequence documentation: any non-negative integer entropy; replicate 0 of the run
    # draws from SeedSequence(seed, spawn_key=(0,)), written out here with numpy alone
    aln = read_alignment(_small_alignment(tmp_path))
    seed = 2**128 - 1
    result = bootstrap(aln, 2, seed=seed, workers=1, progress=False)
    assert result.seed == seed
    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(0,)))
    expect = rng.multinomial(int(aln.weights.sum()), aln.weights / aln.weights.sum())
    assert np.array_equal(replicate_weights(aln.weights, seed, 0), expect)


@pytest.mark.parametrize("workers", [0, -2, True, 1.5, "2"])
def test_bad_workers_name_the_workers(workers, tmp_path):
    # source: common practice: a number of workers is a whole number >= 1
    aln = read_alignment(_small_alignment(tmp_path))
    with pytest.raises(InputError, match="^workers must be a whole number >= 1"):
        bootstrap(aln, 2, seed=1, workers=workers, progress=False)


# ---- item 14: a replicate that saturates a pair ----------------------------------------------------------

def _near_saturated(tmp_path):
    """Four sequences on a star over 24 sites: each of three leaves differs from the centre at its own
    eight sites, so leaf pairs differ at 16 of 24 sites (p = 2/3, defined under JC69), and a replicate that
    draws 18 or more of their differing sites reaches p >= 3/4 (invented data)."""
    root = np.arange(24) % 4
    seqs = [root]
    for k in range(3):
        s = root.copy()
        s[8 * k:8 * k + 8] = (s[8 * k:8 * k + 8] + 1 + k) % 4
        seqs.append(s)
    return _write_fasta(tmp_path / "near.fasta", ["centre", "leaf1", "leaf2", "leaf3"],
                        ["".join(BASES[s]) for s in seqs]), np.array(seqs)


def _saturated_replicates(aln, seed, replicates):
    """Replicates with a pair at p >= 3/4 (JC69 undefined: Jukes & Cantor 1969), by plain numpy on the
    resampled site counts."""
    pats = aln.patterns
    differ = pats[:, None, :] != pats[None, :, :]
    hit = []
    for r in range(replicates):
        w = replicate_weights(aln.weights, seed, r)
        diffs = (differ * w).sum(axis=2)
        hit.append(bool(np.any(4 * diffs >= 3 * w.sum())))  # p >= 3/4, in whole numbers
    return np.array(hit)


def test_replicates_that_saturate_a_pair_cap_it_and_are_counted(tmp_path):
    # source: Jukes & Cantor (1969): JC69 is undefined at p >= 3/4; counted independently per replicate
    fasta, seqs = _near_saturated(tmp_path)
    aln = read_alignment(fasta)
    differ = (seqs[:, None, :] != seqs[None, :, :]).sum(axis=2)
    assert np.all(4 * differ < 3 * seqs.shape[1])  # the full data is defined for every pair
    hit = _saturated_replicates(aln, 3, 40)
    assert 0 < hit.sum() < 40
    for workers in (1, 2):
        result = bootstrap(aln, 40, model="jc69", seed=3, workers=workers, progress=False)
        assert len(result.replicates) == 40
        assert result.info["replicates_capped"] == hit.sum()
        assert result.info["saturated"] == 0  # the tree of the full data needed no cap

    out, report, reps = tmp_path / "t.nwk", tmp_path / "run.html", tmp_path / "reps.nwk"
    r = CliRunner().invoke(main, ["tree", str(fasta), "-o", str(out), "-m", "jc69", "--replicates", "40", "--seed", "3",
                                  "--workers", "1", "--report", str(report), "--save-replicates", str(reps)])
    assert r.exit_code == 0, r.output
    said = f"{hit.sum()} of 40 bootstrap replicates drew sites that saturate a pair"
    assert any(line.startswith("warning") and said in line for line in r.stderr.splitlines()), r.stderr
    assert said in report.read_text()
    # the count survives --resume: the run record lists which replicates were capped
    record = json.loads(Path(f"{reps}.run.json").read_text())
    assert record["capped"] == np.flatnonzero(hit).tolist()


def test_a_replicate_pair_sharing_no_site_names_the_replicate(tmp_path):
    # source: plain counting: a pair whose only shared unambiguous site is not drawn in a replicate shares
    # no site there, so its distance is undefined (any model); the first such replicate is found with numpy
    names = ["a", "b", "c", "d"]
    seqs = ["ACGTACGTACGTAC", "A-------------", "ACGTTCGTACGAAC", "ACTTACGTACGTTC"]
    fasta = _write_fasta(tmp_path / "gappy.fasta", names, seqs)
    aln = read_alignment(fasta)
    b_has_state = np.array([c != "-" for c in seqs[1]])
    b_patterns = np.unique(aln.site_pattern[b_has_state])
    first = next(r for r in range(200) if replicate_weights(aln.weights, 5, r)[b_patterns].sum() == 0)
    with pytest.raises(InputError) as err:
        bootstrap(aln, 200, seed=5, workers=1, progress=False)
    text = str(err.value)
    assert text.startswith(f"{fasta}: bootstrap replicate {first + 1}: ")
    assert "'b'" in text and "share no unambiguous site" in text and "\n" not in text
