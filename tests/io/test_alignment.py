"""Alignment readers checked against Biopython's parsers (reference: Bio.SeqIO, Bio.AlignIO) and the
FASTA and NEXUS forms of one alignment against each other."""

import gzip
import io
from pathlib import Path

import numpy as np
import pytest
from Bio import AlignIO, SeqIO
from click.testing import CliRunner

from cladewright.io.readers import read_alignment
from cladewright.cli import main
from cladewright.errors import InputError

EXAMPLES = Path(__file__).resolve().parents[2] / "example_alignments"
FASTA = EXAMPLES / "glass_snails_coi.fasta"
NEXUS = EXAMPLES / "glass_snails_coi.nex"
PROTEIN = EXAMPLES / "glass_snails_shell.fasta"


def _as_distance_states(seq, alphabet):
    """A sequence as the states distances see: unambiguous letters, '-' gaps and '?' for the rest
    (IUPAC codes are missing data for distances: common practice)."""
    keep = "ACGT" if alphabet == "dna" else "ACDEFGHIKLMNPQRSTVWY"
    seq = seq.upper().replace("U", "T") if alphabet == "dna" else seq.upper()
    return "".join(c if c in keep or c == "-" else "?" for c in seq)


def _decoded(aln):
    letters = np.array(list(("ACGT" if aln.alphabet == "dna" else "ACDEFGHIKLMNPQRSTVWY") + "-?"))
    return ["".join(letters[row]) for row in aln.states]


@pytest.mark.parametrize("path,alphabet", [(FASTA, "dna"), (PROTEIN, "protein")])
def test_fasta_agrees_with_biopython(path, alphabet):
    # reference: Biopython Bio.SeqIO "fasta" (record.id is the first word of the header)
    aln = read_alignment(path)
    records = list(SeqIO.parse(str(path), "fasta"))
    assert aln.alphabet == alphabet
    assert list(aln.names) == [r.id for r in records]
    assert _decoded(aln) == [_as_distance_states(str(r.seq), alphabet) for r in records]


def test_nexus_agrees_with_biopython_and_fasta():
    # reference: Biopython Bio.AlignIO "nexus"; the two bundled forms hold one alignment
    nex = read_alignment(NEXUS)
    fa = read_alignment(FASTA)
    assert nex.names == fa.names
    assert np.array_equal(nex.states, fa.states)
    assert np.array_equal(nex.patterns, fa.patterns) and np.array_equal(nex.weights, fa.weights)
    bio = AlignIO.read(str(NEXUS), "nexus")
    assert [r.id for r in bio] == list(nex.names)
    assert _decoded(nex) == [_as_distance_states(str(r.seq), "dna") for r in bio]


def test_interleaved_nexus_with_comments_and_quotes(tmp_path):
    # NEXUS format (Maddison, Swofford & Maddison 1997): INTERLEAVE, quoted names, [comments], MATCHCHAR
    text = """#NEXUS
[written by hand]
BEGIN DATA;
  DIMENSIONS NTAX=3 NCHAR=12;
  FORMAT DATATYPE=DNA MISSING=? GAP=- MATCHCHAR=. INTERLEAVE;
  MATRIX
    'taxon one'  ACGTAC [six]
    two          ..A...
    three        AC-?AC

    'taxon one'  GGTTAA
    two          ......
    three        GGTTAN
  ;
END;
"""
    path = tmp_path / "x.nex"
    path.write_text(text)
    aln = read_alignment(path)
    assert aln.names == ("taxon one", "two", "three")
    assert _decoded(aln) == ["ACGTACGGTTAA", "ACATACGGTTAA", "AC-?ACGGTTA?"]
    bio = AlignIO.read(str(path), "nexus")
    assert [str(r.seq).upper() for r in bio][0] == "ACGTACGGTTAA"


def test_gzip_and_lower_case_and_u(tmp_path):
    plain = ">a\nacguacgu\n>b\nACGTACGA\n"
    path = tmp_path / "x.fasta.gz"
    path.write_bytes(gzip.compress(plain.encode()))
    aln = read_alignment(path)
    assert _decoded(aln) == ["ACGTACGT", "ACGTACGA"]
    # site patterns: distinct columns and their counts (the bootstrap's units)
    assert aln.weights.sum() == 8 and aln.n_patterns == 5


@pytest.mark.parametrize("content,fragment", [
    (b"", "empty"),
    (b"hello world\n", "does not look like an alignment"),
    (b">a\nACGT\n>b\nACG\n", "'b' has 3 sites but 'a' has 4"),
    (b">a\nACGT\n>a\nACGA\n", "line 3: sequence name 'a' was already used on line 1"),
    (b">a\nACGT\n>b\nAC1T\n", "sequence 'b', site 3: '1' is not a nucleotide"),
    (b">a\nMKLV\n>b\nMKJV\n", None),  # protein detected: J is a valid ambiguity code there
    (b">a\n\n>b\nACGT\n", "sequence 'a' is empty"),
    (b"\x00\x01\x02binary", "binary"),
    (gzip.compress(b">a\nACGT\n>b\nACGA\n")[:-6], "gzip stream is truncated"),
    (b"#NEXUS\nBEGIN DATA;\nDIMENSIONS NTAX=2 NCHAR=4;\nMATRIX\na ACGT\nb ACGA\n", "never closed"),
    (b"#NEXUS\nBEGIN TREES;\nEND;\n", "no DATA or CHARACTERS block"),
])
def test_bad_input_messages(tmp_path, content, fragment):
    path = tmp_path / "bad.fasta"
    path.write_bytes(content)
    if fragment is None:
        assert read_alignment(path).alphabet == "protein"
        return
    with pytest.raises(InputError, match=fragment) as info:
        read_alignment(path)
    assert str(path) in str(info.value) and "\n" not in str(info.value)


def test_cli_error_is_one_line_and_writes_nothing(tmp_path):
    bad = tmp_path / "bad.fasta"
    bad.write_text(">a\nACGT\n>b\nACG\n")
    out = tmp_path / "out.tsv"
    result = CliRunner().invoke(main, ["distances", str(bad), "-o", str(out)])
    assert result.exit_code == 2
    lines = result.output.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("cladewright: error:") and "Traceback" not in result.output
    assert not out.exists()


def test_cli_keeps_an_existing_output_on_failure(tmp_path):
    out = tmp_path / "out.tsv"
    out.write_text("precious\n")
    bad = tmp_path / "bad.fasta"
    bad.write_text(">a\nMKLV\n>b\nMKIV\n")
    result = CliRunner().invoke(main, ["distances", str(bad), "-o", str(out), "--model", "k2p"])
    assert result.exit_code == 2 and "is for dna but the alignment is protein" in result.output
    assert out.read_text() == "precious\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.fasta", "out.tsv"]


def test_cli_debug_shows_traceback(tmp_path):
    bad = tmp_path / "bad.fasta"
    bad.write_text("nothing")
    result = CliRunner().invoke(main, ["--debug", "distances", str(bad), "-o", str(tmp_path / "o.tsv")])
    assert result.exit_code != 0 and isinstance(result.exception, InputError)


def test_cli_refuses_output_equal_to_input(tmp_path):
    result = CliRunner().invoke(main, ["distances", str(FASTA), "-o", str(FASTA)])
    assert result.exit_code == 2 and "also an input" in result.output


def test_cli_writes_matrix_that_reads_back(tmp_path):
    from cladewright.io.readers import read_distance_matrix

    out = tmp_path / "m.tsv"
    result = CliRunner().invoke(main, ["distances", str(FASTA), "-o", str(out), "--model", "tn93"])
    assert result.exit_code == 0, result.output
    dm = read_distance_matrix(out)
    assert dm.names == read_alignment(FASTA).names
    # the TSV is the labelled form: an empty first cell, then the names (as the issue specifies)
    header = out.read_text().splitlines()[0].split("\t")
    assert header[0] == "" and header[1:] == list(dm.names)


def test_stdin_is_read():
    result = CliRunner().invoke(main, ["distances", "-", "-o", "-", "--model", "p"],
                                input=">a\nACGT\n>b\nACGA\n")
    assert result.exit_code == 0
    rows = [ln.split("\t") for ln in result.stdout.strip().splitlines()]
    assert float(rows[1][2]) == 0.25  # one difference in four sites (p-distance)
