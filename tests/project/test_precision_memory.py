"""Single-precision matrices and the memory check made before a large run."""

import numpy as np
import pytest

from cladewright import build_tree, distance_matrix, robinson_foulds
from cladewright.errors import InputError
from cladewright.memory import check_fits, estimate_bytes

from simulate import make_alignment, mutate, random_sequence, simulate_dna


@pytest.fixture(scope="module")
def separated():
    """Four well-separated groups of five (invented data): every internal split is long."""
    rng = np.random.default_rng(21)
    root = random_sequence(rng, 600)
    seqs, names = [], []
    for g in range(4):
        anc = mutate(rng, root, 0.25)
        for k in range(5):
            seqs.append("".join(mutate(rng, anc, 0.02 * (k + 1))))
            names.append(f"g{g}_{k}")
    return make_alignment(names, seqs)


@pytest.mark.parametrize("method", ["nj", "bionj", "upgma", "wpgma", "single", "complete"])
def test_single_precision_agrees_with_double(separated, method):
    # Documented tolerance (docs/benchmarks.md): float32 keeps about 7 significant digits, so distances and
    # branch lengths agree to a relative 1e-5; the topology is the same on well-separated data.
    d64 = distance_matrix(separated, "k2p")
    d32 = distance_matrix(separated, "k2p", dtype=np.float32)
    assert d32.values.dtype == np.float32 and d32.values.nbytes * 2 == d64.values.nbytes
    np.testing.assert_allclose(d32.values, d64.values, rtol=1e-5, atol=1e-7)
    t64, t32 = build_tree(d64, method), build_tree(d32, method)
    assert robinson_foulds(t64, t32)["rf"] == 0
    np.testing.assert_allclose(t32.patristic(), t64.patristic(), rtol=1e-4, atol=1e-6)


def test_estimate_counts_the_matrices():
    # n x n float64 (8 bytes) for the matrix, one working copy for NJ, two for BIONJ, one triangle
    # (n (n - 1) / 2 entries, as scipy's condensed form; rounded up to half a matrix) for UPGMA (common practice).
    n = 10_000
    base = estimate_bytes(n)
    assert estimate_bytes(n, method="nj") - base == n * n * 8
    assert estimate_bytes(n, method="bionj") - base == 2 * n * n * 8
    assert estimate_bytes(n, method="upgma") - base == n * n * 8 // 2
    assert estimate_bytes(n, method="nj", precision="single") < estimate_bytes(n, method="nj")


def test_a_run_that_cannot_fit_stops_with_the_option_that_would():
    n = 30_000
    single = estimate_bytes(n, method="nj", precision="single")
    # the library names its parameter; the command line shows it as --precision single (tests/app/test_run_warnings.py)
    with pytest.raises(InputError, match='precision="single" would fit'):
        check_fits(n, method="nj", available=single + 1)
    with pytest.raises(InputError, match="more memory or fewer taxa"):
        check_fits(n, method="nj", available=2**20)
    check_fits(n, method="nj", precision="single", available=single + 1)


def test_cli_single_precision_tree(tmp_path):
    from click.testing import CliRunner

    from cladewright.cli import main

    names, seqs = simulate_dna(12, 300, seed=3)
    path = tmp_path / "a.fasta"
    path.write_text("".join(f">{n}\n{s}\n" for n, s in zip(names, seqs)))
    out = tmp_path / "t.nwk"
    r = CliRunner().invoke(main, ["tree", str(path), "-o", str(out), "--precision", "single"])
    assert r.exit_code == 0, r.output
    assert out.read_text().endswith(";\n")
