"""Checks of the bundled demo data in example_alignments/.

The data are simulated by example_alignments/make_examples.py; these tests make
sure the files are what the script makes, and that independent readers
(Biopython, DendroPy) and independent formulas agree with them.
"""
import importlib.util
import pathlib

import numpy as np
import pytest
import scipy.linalg
from Bio import AlignIO, SeqIO
import dendropy

EXAMPLES = pathlib.Path(__file__).resolve().parents[2] / "example_alignments"
SCRIPT = EXAMPLES / "make_examples.py"
DATA_FILES = [
    "glass_snails_coi.fasta",
    "glass_snails_coi.nex",
    "glass_snails_coi.true.nwk",
    "glass_snails_shell.fasta",
    "glass_snails_shell.true.nwk",
]
FASTA_FILES = ["glass_snails_coi.fasta", "glass_snails_shell.fasta"]
TREE_FOR = {
    "glass_snails_coi.fasta": "glass_snails_coi.true.nwk",
    "glass_snails_shell.fasta": "glass_snails_shell.true.nwk",
}


@pytest.fixture(scope="module")
def script():
    spec = importlib.util.spec_from_file_location("make_examples", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def regenerated(script, tmp_path_factory):
    out = tmp_path_factory.mktemp("regenerated")
    script.main(["--out", str(out)])
    return out


def _fasta(name):
    # reference: Biopython Bio.SeqIO ("fasta")
    return [(r.id, str(r.seq)) for r in SeqIO.parse(str(EXAMPLES / name), "fasta")]


@pytest.mark.parametrize("name", DATA_FILES)
def test_bundled_file_is_what_the_script_writes(regenerated, name):
    # common practice: bundled generated data must be reproducible byte for byte.
    assert (EXAMPLES / name).read_bytes() == (regenerated / name).read_bytes()


def test_script_is_deterministic(script, regenerated, tmp_path):
    # common practice: a fixed seed gives the same bytes on a second run.
    script.main(["--out", str(tmp_path)])
    for name in DATA_FILES:
        assert (tmp_path / name).read_bytes() == (regenerated / name).read_bytes()


@pytest.mark.parametrize("name", FASTA_FILES)
def test_fasta_parses_with_equal_lengths_and_unique_names(name):
    # reference: Biopython Bio.SeqIO; an alignment has equal row lengths (common practice).
    records = _fasta(name)
    assert len(records) >= 20
    names = [n for n, _ in records]
    assert len(set(names)) == len(names)
    assert len({len(s) for _, s in records}) == 1
    assert len(records[0][1]) >= 300


def test_fasta_lines_are_wrapped_at_60():
    # common practice: FASTA sequence lines of at most 60 characters.
    for name in FASTA_FILES:
        for line in (EXAMPLES / name).read_text().splitlines():
            if not line.startswith(">"):
                assert 0 < len(line) <= 60


def test_coi_alphabet_is_iupac():
    # source: NC-IUB (1985) nucleotide codes, plus '-' for gaps; some ambiguity codes and gaps are present.
    seqs = "".join(s for _, s in _fasta("glass_snails_coi.fasta"))
    assert set(seqs) <= set("ACGTRYSWKMBDHVN-")
    assert set(seqs) & set("RYSWKMBDHVN")
    assert "-" in seqs


def test_shell_alphabet_is_amino_acids():
    # source: IUPAC-IUB one-letter amino-acid codes (X = unknown), '-' for gaps.
    seqs = "".join(s for _, s in _fasta("glass_snails_shell.fasta"))
    assert set(seqs) <= set("ACDEFGHIKLMNPQRSTVWYX-")
    assert "X" in seqs and "-" in seqs


def test_nexus_matches_fasta():
    # reference: Biopython Bio.AlignIO ("nexus"); format: Maddison, Swofford & Maddison (1997).
    fasta = _fasta("glass_snails_coi.fasta")
    aln = AlignIO.read(str(EXAMPLES / "glass_snails_coi.nex"), "nexus")
    nexus = [(r.id, str(r.seq).upper()) for r in aln]
    assert nexus == fasta


def test_nexus_dimensions_agree_with_matrix():
    # source: Maddison, Swofford & Maddison (1997): NTAX and NCHAR give the matrix size.
    text = (EXAMPLES / "glass_snails_coi.nex").read_text()
    fasta = _fasta("glass_snails_coi.fasta")
    assert f"NTAX={len(fasta)}" in text
    assert f"NCHAR={len(fasta[0][1])}" in text


@pytest.mark.parametrize("name", FASTA_FILES)
def test_true_tree_leaves_are_the_alignment_names(name):
    # reference: DendroPy newick reader, default settings. The labels are quoted, so
    # their underscores are kept (Newick, 1986 informal specification: in an
    # unquoted label '_' means a blank).
    tree = dendropy.Tree.get(path=str(EXAMPLES / TREE_FOR[name]), schema="newick")
    leaves = sorted(leaf.taxon.label for leaf in tree.leaf_node_iter())
    assert leaves == sorted(n for n, _ in _fasta(name))
    lengths = [e.length for e in tree.postorder_edge_iter() if e.tail_node is not None]
    assert all(length is not None and length > 0 for length in lengths)


def _p_distances(seqs, alphabet):
    """Pairwise p-distances over sites where both rows hold an unambiguous state."""
    codes = np.array([np.frombuffer(s.encode(), dtype=np.uint8) for s in seqs])
    valid = np.isin(codes, np.frombuffer(alphabet.encode(), dtype=np.uint8)).astype(float)
    both = valid @ valid.T
    same = np.zeros_like(both)
    for letter in np.frombuffer(alphabet.encode(), dtype=np.uint8):
        hit = (codes == letter).astype(float)
        same += hit @ hit.T
    p = 1.0 - same / both
    return p[np.triu_indices(len(seqs), 1)]


def test_nucleotide_p_distances_are_sensible():
    # common practice: simulated sequences differ (p > 0) but are far from saturation (p < 0.5).
    p = _p_distances([s for _, s in _fasta("glass_snails_coi.fasta")], "ACGT")
    assert p.min() > 0.0
    assert p.max() < 0.5


def test_protein_p_distances_are_sensible():
    # common practice: as for nucleotides; 20 states saturate towards 1 - sum(pi^2), about 0.94.
    p = _p_distances([s for _, s in _fasta("glass_snails_shell.fasta")], "ACDEFGHIKLMNPQRSTVWY")
    assert p.min() > 0.0
    assert p.max() < 0.8


def test_hky85_probabilities_match_matrix_exponential(script):
    # source: Hasegawa, Kishino & Yano (1985): q_ij = kappa*pi_j (transition) or pi_j
    # (transversion), scaled to one expected substitution per unit time.
    # reference: scipy.linalg.expm.
    pi = np.array([0.30, 0.16, 0.16, 0.38])
    kappa = 4.0
    q = np.array([[0, pi[1], kappa * pi[2], pi[3]],
                  [pi[0], 0, pi[2], kappa * pi[3]],
                  [kappa * pi[0], pi[1], 0, pi[3]],
                  [pi[0], kappa * pi[1], pi[2], 0]])
    np.fill_diagonal(q, -q.sum(axis=1))
    q /= -(pi * np.diag(q)).sum()
    times = np.array([0.001, 0.05, 0.3, 2.0])
    got = script.hky85_p(script.hky85_eigen(pi, kappa), times)
    for k, t in enumerate(times):
        np.testing.assert_allclose(got[k], scipy.linalg.expm(q * t), atol=1e-12)


def test_equal_input_probabilities_match_matrix_exponential(script):
    # source: Felsenstein (1981): q_ij = mu*pi_j, mu = 1/(1 - sum pi^2).
    # reference: scipy.linalg.expm.
    pi = script.SHELL_FREQS
    q = np.tile(pi, (20, 1)) / (1.0 - np.sum(pi ** 2))
    np.fill_diagonal(q, 0.0)
    np.fill_diagonal(q, -q.sum(axis=1))
    times = np.array([0.01, 0.2, 1.5])
    got = script.equal_input_p(pi, times)
    for k, t in enumerate(times):
        np.testing.assert_allclose(got[k], scipy.linalg.expm(q * t), atol=1e-12)


def test_gamma_categories_have_mean_one_and_spread(script):
    # source: Yang (1994) J. Mol. Evol. 39:306-314: equal-probability categories, mean rate 1;
    # for alpha = 0.5 the four category means are about 0.03, 0.25, 0.82, 2.90 (from memory).
    rates = script.gamma_category_rates(0.5, 4, np.random.default_rng(1))
    assert rates.mean() == pytest.approx(1.0)
    np.testing.assert_allclose(rates, [0.0334, 0.2519, 0.8203, 2.8944], rtol=0.05)
