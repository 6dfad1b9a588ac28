"""Edge cases computed correctly, and failures that lose nothing.

Degenerate data (identical, constant, one-site, all-gap alignments; too few
sequences) get the values of the published formulas or a clear error; odd
but valid text (10,000-character names, every printable ASCII character,
mixed case, CRLF and CR line ends) reads back unchanged; bad files and bad
matrices give one-line errors naming the place and the fix; and a failed
command line run (exit 2, one line on stderr) creates nothing and leaves an
existing output byte-identical, even on a full disk.
"""

import contextlib
import errno
import gzip
import math
import os
import re
import string
import subprocess
import warnings
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from cladewright import build_tree, distance_matrix
from cladewright.cli import main
from cladewright.errors import InputError, SaturationError
from cladewright.io import read_trees
from cladewright.io.files import read_text
from cladewright.io.output import atomic_output
from cladewright.io.readers import parse_newick, parse_nexus_trees, read_alignment, read_distance_matrix
from cladewright.matrix import DistanceMatrix
from cladewright.tree import Tree

from simulate import make_alignment

DNA_MODELS = ["p", "jc69", "k2p", "f81", "f84", "t92", "tn93", "logdet", "paralinear"]
METHODS = ["nj", "bionj", "upgma", "wpgma", "single", "complete"]
PRINTABLE = string.printable[:95]  # the 95 printable ASCII characters, space to '~'


def _fasta(tmp_path, seqs, names=None, name="a.fasta"):
    names = names or [f"s{i}" for i in range(len(seqs))]
    path = tmp_path / name
    path.write_text("".join(f">{x}\n{s}\n" for x, s in zip(names, seqs)))
    return path


# ---- degenerate alignments ------------------------------------------------------------------------

def test_identical_sequences_have_zero_distance_under_every_model():
    # source: each model's formula at p = P = Q = 0 is a sum of c * ln(1) = 0 (JC69, K2P, F81, F84, T92,
    # TN93, paralinear; Poisson and Kimura for protein). LogDet as -1/4 ln det F - ln 4 (Lockhart et al.
    # 1994) is not 0: F = diag(pi) for identical sequences, so d = -1/4 sum(ln pi) - ln 4.
    seq = "AACGTTTAGC" * 3
    aln = make_alignment(["a", "b", "c"], [seq] * 3)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no division by zero, no invalid value on the way
        for model in DNA_MODELS:
            for freqs in ("alignment", "pair"):
                d = distance_matrix(aln, model, freqs=freqs).values
                if model == "logdet":
                    pi = np.array([seq.count(b) for b in "ACGT"]) / len(seq)
                    assert d[0, 1] == pytest.approx(-0.25 * np.log(pi).sum() - np.log(4), abs=1e-12)
                else:
                    assert np.array_equal(d, np.zeros((3, 3))) and not np.signbit(d).any(), model
        prot = make_alignment(["a", "b", "c"], ["MKLVWY"] * 3, "protein")
        for model in ("p", "poisson", "kimura"):
            assert not distance_matrix(prot, model).values.any()


@pytest.mark.parametrize("method", METHODS)
def test_identical_sequences_give_zero_length_branches(method):
    # source: Saitou & Nei (1987) and Gascuel (1997) branch lengths are sums of distances, all 0 here;
    # linkage heights (Sokal & Michener 1958; Lance & Williams 1967) are d/2 or d, all 0.
    aln = make_alignment([f"t{i}" for i in range(5)], ["ACGTACGTAA"] * 5)
    tree = build_tree(distance_matrix(aln, "k2p"), method)
    lengths = tree.length[np.arange(tree.n_nodes) != tree.root]
    assert tree.n_leaves == 5 and np.all(lengths == 0)
    assert not tree.patristic().any()


def test_constant_alignment():
    # source: formulas as above; every pair identical, so 0 where the model is defined. F84 and TN93 divide
    # by pi_C pi_T (Felsenstein & Churchill 1996; Tamura & Nei 1993): undefined without C; LogDet takes
    # ln det F with det F = 0 (Lockhart et al. 1994): undefined.
    aln = make_alignment(["a", "b", "c"], ["AAAAAA"] * 3)
    for model in ("p", "jc69", "k2p", "f81", "t92", "paralinear"):
        assert not distance_matrix(aln, model).values.any(), model
    for model in ("f84", "tn93"):
        assert not distance_matrix(aln, model, freqs="pair").values.any()
        with pytest.raises(InputError, match="base C never occurs"):
            distance_matrix(aln, model)
    with pytest.raises(SaturationError, match="logdet"):
        distance_matrix(aln, "logdet")


def test_t92_without_g_or_c():
    # source: Tamura (1992): d = -h ln(1 - P/h - Q) - 1/2 (1 - h) ln(1 - 2Q); with G+C content 0, h = 0 and
    # no transition is possible (P = 0); the first term tends to 0, leaving -1/2 ln(1 - 2Q).
    aln = make_alignment(["a", "b", "c"], ["AAAATTTT", "AAAATTTA", "AAAATTTT"])
    d = distance_matrix(aln, "t92").values
    assert d[0, 1] == pytest.approx(-0.5 * math.log(1 - 2 / 8), abs=1e-12) and d[0, 2] == 0


def test_one_site_alignment():
    # source: p-distance is the proportion of differing sites (0 or 1 here); JC69's -3/4 ln(1 - 4p/3) has
    # a negative argument at p = 1 (Jukes & Cantor 1969): undefined, and the pairs are named.
    aln = make_alignment(["a", "b", "c"], ["A", "A", "G"])
    assert distance_matrix(aln, "p").values.tolist() == [[0, 0, 1], [0, 0, 1], [1, 1, 0]]
    with pytest.raises(SaturationError, match="a-c; b-c") as info:
        distance_matrix(aln, "jc69")
    assert info.value.pairs == [(0, 2), (1, 2)]


def test_all_gap_sequence_is_a_clear_error():
    # source: common practice: a pair with no shared unambiguous site has no distance
    aln = make_alignment(["a", "b", "c"], ["ACGT", "----", "ACGA"])
    with pytest.raises(InputError, match="'a' and 'b' share no unambiguous site"):
        distance_matrix(aln, "p")
    with pytest.raises(InputError, match="complete deletion leaves nothing"):
        distance_matrix(aln, "p", gaps="complete")


def test_too_few_sequences():
    # source: Saitou & Nei (1987): neighbour joining needs three taxa; a linkage tree needs two
    two = DistanceMatrix(["a", "b"], [[0, 0.4], [0.4, 0]])
    for method in ("nj", "bionj"):
        with pytest.raises(InputError, match="at least 3 taxa"):
            build_tree(two, method)
    with pytest.raises(InputError, match="at least 2 taxa"):
        build_tree(DistanceMatrix(["a"], [[0]]), "upgma")
    # UPGMA (Sokal & Michener 1958): two taxa join at height d/2
    assert build_tree(two, "upgma").length.tolist()[:2] == [0.2, 0.2]
    with pytest.raises(InputError, match="at least two"):
        distance_matrix(make_alignment(["a"], ["ACGT"]), "p")


@pytest.mark.parametrize("model,alphabet,gamma,fragment", [
    ("k2p", "protein", None, "model 'k2p' is for dna but the alignment is protein"),
    ("poisson", "dna", None, "model 'poisson' is for protein but the alignment is dna"),
    ("nope", "dna", None, "unknown model 'nope'; choose one of"),
    ("jc69", "dna", 0.0, "gamma shape 0.0 must be a positive number"),
    ("k2p", "dna", -1.0, "gamma shape -1.0 must be a positive number"),
    ("tn93", "dna", math.nan, "must be a positive number"),
    ("jc69", "dna", math.inf, "must be a positive number"),
    ("logdet", "dna", 0.5, "model logdet has no gamma form"),
])
def test_model_errors(model, alphabet, gamma, fragment):
    # source: common practice; gamma shape alpha > 0 (Jin & Nei 1990)
    seqs = ["ACGTACGT", "ACGTACGA", "ACGAACGT"] if alphabet == "dna" else ["MKLV", "MKIV", "MRLV"]
    with pytest.raises(InputError, match=fragment):
        distance_matrix(make_alignment(["a", "b", "c"], seqs, alphabet), model, gamma=gamma)


# ---- odd but valid text ---------------------------------------------------------------------------

def test_ten_thousand_character_names_through_the_whole_pipeline(tmp_path):
    # source: common practice (names are kept whole); Newick quoting: 1986 informal specification
    names = [c * 10_000 for c in "abcd"]
    path = _fasta(tmp_path, ["ACGTACGTAC", "ACGTACGTAA", "ACGAACGTAC", "TCGTACGTAC"], names)
    aln = read_alignment(path)
    tree = build_tree(distance_matrix(aln, "jc69"), "nj")
    out = tmp_path / "t.nwk"
    tree.write(out)
    [back] = read_trees(out)
    assert sorted(back.leaf_names) == names
    assert np.allclose(back.patristic()[np.ix_(*[[back.leaf_names.index(x) for x in names]] * 2)],
                       tree.patristic())


@pytest.mark.parametrize("newline", ["\n", "\r\n", "\r"])
def test_mixed_case_and_line_endings(tmp_path, newline):
    # source: common practice: lowercase codes mean the same states (NC-IUB 1985); Windows CRLF and old
    # Mac CR line ends read as LF.
    want = read_alignment(_fasta(tmp_path, ["ACGTRN-", "ACGAACG"], name="want.fasta"))
    text = newline.join([">s0", "acGtrN", "-", ">s1", "AcgA", "acg", ""])
    (tmp_path / "odd.fasta").write_bytes(text.encode())
    got = read_alignment(tmp_path / "odd.fasta")
    assert got.names == want.names and np.array_equal(got.states, want.states)
    nexus = newline.join(["#NEXUS", "Begin Data;", "Dimensions ntax=2 nchar=7;", "Format gap=-;", "Matrix",
                          "s0 acGtrN-", "s1 AcgAacg", ";", "End;", ""])
    (tmp_path / "odd.nex").write_bytes(nexus.encode())
    got = read_alignment(tmp_path / "odd.nex")
    assert got.names == want.names and np.array_equal(got.states, want.states)


def _every_printable_name_set(space):
    chars = PRINTABLE if space else PRINTABLE.replace(" ", "")
    return [chars] + [c for c in chars]


def test_every_printable_ascii_character_in_names(tmp_path):
    # source: FASTA: the name is the header's first word (common practice), so any non-space character;
    # NEXUS (Maddison et al. 1997) and Newick (1986 informal specification): a quoted name holds any
    # character, with '' for a quote inside.
    fasta_names = _every_printable_name_set(space=False)
    seqs = ["ACGT"[i % 4] * 3 for i in range(len(fasta_names))]
    assert list(read_alignment(_fasta(tmp_path, seqs, fasta_names)).names) == fasta_names

    # NEXUS names are case-insensitive (Maddison et al. 1997), so the one-letter lower-case names get a
    # prefix: 'a' and 'A' would be one name there (tests/io/test_nexus_strict.py checks that error).
    names = [x if not (len(x) == 1 and x.islower()) else f"lower-{x}" for x in _every_printable_name_set(space=True)]
    rows = "\n".join("'" + x.replace("'", "''") + "' " + "ACGT"[i % 4] * 3 for i, x in enumerate(names))
    text = f"#NEXUS\nBEGIN DATA;\nDIMENSIONS NTAX={len(names)} NCHAR=3;\nMATRIX\n{rows}\n;\nEND;\n"
    (tmp_path / "a.nex").write_text(text)
    assert list(read_alignment(tmp_path / "a.nex").names) == names

    n = len(names)
    star = Tree(np.r_[np.full(n, n), -1], np.r_[np.arange(n) / 7, np.nan], names)
    for fmt in ("newick", "nexus"):
        star.write(tmp_path / f"t.{fmt}", format=fmt)
        [back] = read_trees(tmp_path / f"t.{fmt}")
        assert back.leaf_names == tuple(names) and np.array_equal(back.length, star.length, equal_nan=True)


def test_deep_and_wide_trees_do_not_recurse():
    # source: RULES (every traversal iterative): a 50,000-leaf caterpillar and 100,000 nested parentheses
    n = 50_000
    text = "(" * (n - 1) + "t0" + "".join(f",t{i}:1)" for i in range(1, n)) + ";"
    [cat] = parse_newick(text)
    assert cat.n_leaves == n and parse_newick(cat.to_newick())[0].n_nodes == cat.n_nodes
    [deep] = parse_newick("(" * 100_000 + "a" + ")" * 100_000 + ";")
    assert deep.n_nodes == 100_001


# ---- bad files ------------------------------------------------------------------------------------

BAD_FILES = [
    (b"", "empty"),
    (b"  \n\t\n", "empty"),
    (bytes(range(256)) * 4, "binary file"),
    (b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR", "binary file"),
    (gzip.compress(b">a\nACGT\n>b\nACGA\n")[:-5], "gzip stream is truncated"),
    (gzip.compress(b">a\nACGT\n")[:12], "gzip stream is truncated"),
    (">a\nACGT\n".encode("utf-16"), "UTF-16"),
    (b"BZh91AY&SY", "bzip2-compressed"),
    (b">a\nAC\xffGT\n", "line 2, byte 3: not valid UTF-8"),
]


@pytest.mark.parametrize("content,fragment", BAD_FILES)
@pytest.mark.parametrize("reader", [read_alignment, read_distance_matrix, read_trees])
def test_bad_files(tmp_path, reader, content, fragment):
    # source: common practice; gzip: RFC 1952; UTF-8/16 byte-order marks: Unicode standard
    path = tmp_path / "bad.in"
    path.write_bytes(content)
    with pytest.raises(InputError, match=fragment if fragment != "empty" else "empty|no tree") as info:
        reader(path)
    assert str(path) in str(info.value) and "\n" not in str(info.value)


def test_unreadable_paths(tmp_path):
    # source: common practice: every OSError on an input is an InputError naming the path
    (tmp_path / "f").write_text("x")
    for path, fragment in [(tmp_path / "nope", "no such file"), (tmp_path, "is a folder"),
                           (tmp_path / "f" / "child", "cannot be read"), (tmp_path / ("x" * 5000), "cannot be read")]:
        with pytest.raises(InputError, match=fragment):
            read_text(path)


@pytest.mark.parametrize("text,fragment", [
    ("\ta\tb\na\t0\t1\n", "2 names on line 1 but 1 rows"),
    ("\ta\tb\na\t0\t1\nb\t1\n", "line 3 has 1 values, expected 2"),
    ("\ta\tb\na\t0\t1\nb\t2\t0\n", "line 2, column 3: the matrix is not symmetric"),
    ("\ta\tb\na\t0\tnan\nb\tnan\t0\n", "line 2, column 3: distance 'a'-'b' is nan"),
    ("\ta\tb\na\t0\tinf\nb\tinf\t0\n", "is inf; every distance must be a finite number"),
    ("\ta\tb\na\t0\t-0.5\nb\t-0.5\t0\n", "line 2, column 3: distance 'a'-'b' is negative"),
    ("\ta\tb\na\t0\tx1\nb\t1\t0\n", "line 2, column 3: 'x1' is not a number"),
    ("\ta\tb\na\t0\t1_0\nb\t1_0\t0\n", "'1_0' is not a number"),
    ("\ta\tb\na\t0\t\u0661\nb\t\u0661\t0\n", "is not a number"),
    ("\ta\ta\na\t0\t1\na\t1\t0\n", "line 1, columns 2 and 3: taxon 'a' appears twice"),
    ("\ta\t\na\t0\t1\n\t1\t0\n", "line 1, column 3: an empty taxon name"),
    ("\ta\tb\na\t0.1\t1\nb\t1\t0\n", "line 2, column 2: the diagonal entry of 'a' is 0.1"),
    ("\ta\tb\nb\t0\t1\na\t1\t0\n", "line 2 is labelled 'b' but column 2 is 'a'"),
    ("a\tb\na\t0\n", "must start with an empty cell"),
    ("\x0b\n", "no taxon names"),
])
def test_bad_matrices(text, fragment):
    # source: a distance matrix is square, symmetric, finite, non-negative, zero on the diagonal, with
    # unique names (common practice; Fitch & Margoliash 1967 use such a matrix)
    with pytest.raises(InputError, match=fragment) as info:
        read_distance_matrix("m.tsv", text=text)
    assert str(info.value).startswith("m.tsv: ") and "\n" not in str(info.value)


def test_matrix_names_a_tsv_cannot_hold_are_refused_on_writing(tmp_path):
    # source: common practice: a tab, line break or NUL in a name would not read back
    for bad in ("a\tb", "a\nb", " a", "a\x00"):
        with pytest.raises(InputError, match="rename the taxon"):
            DistanceMatrix([bad, "c"], [[0, 1], [1, 0]]).write(tmp_path / "m.tsv")
    assert not (tmp_path / "m.tsv").exists()


@pytest.mark.parametrize("text,fragment", [
    ("FORMAT GAP=;\nMATRIX\na AC\nb AG\n;", "FORMAT GAP= has no value"),
    ("FORMAT MISSING=NN;\nMATRIX\na AC\nb AG\n;", "must be a single character"),
    ("DIMENSIONS NTAX=2 NCHAR=0;\nMATRIX\na AC\nb AG\n;", "NCHAR='0' is not a whole number >= 1"),
    ("DIMENSIONS NCHAR=\u0663;\nMATRIX\na AAA\n;", "not a whole number"),
    ("MATRIX\na AC [note\nb AG\n;", "line 4: a comment '[' is never closed"),
    ("MATRIX\n'a AC\nb AG\n;", "a quoted name (') is never closed"),
    ("MATRIX\na\nACGT\nb\nACGA\n;", "line 4: sequence 'a' has no states"),
    ("FORMAT MATCHCHAR=.;\nMATRIX\na A.\nb AG\n;", "line 5: the first row uses the MATCHCHAR '.'"),
    ("FORMAT DATATYPE=STANDARD;\nMATRIX\na 01\nb 10\n;", "DATATYPE=STANDARD is not sequence data"),
    ("FORMAT TRANSPOSE;\nMATRIX\na AC\nb AG\n;", "TRANSPOSE (one row per site) is not read"),
    ("DIMENSIONS NTAX=2 NCHAR=2;\nMATRIX\na AC\nb AG\n;", None),
])
def test_nexus_matrix_errors(text, fragment):
    # source: NEXUS (Maddison, Swofford & Maddison 1997): FORMAT symbols are single characters, NTAX and
    # NCHAR positive integers, comments in [], quoted names in ''
    text = "#NEXUS\nBEGIN DATA;\n" + text + "\nEND;\n"
    if fragment is None:
        assert read_alignment("a.nex", text=text).n_sites == 2
        return
    with pytest.raises(InputError, match=re.escape(fragment)):
        read_alignment("a.nex", text=text)


def test_nexus_matrix_symbols_and_rows_without_nchar():
    # source: NEXUS (Maddison et al. 1997): FORMAT MISSING/GAP give the file's symbols (quoted or not),
    # MATCHCHAR repeats the first row's state; without NCHAR each row is taken as one line.
    text = ("#NEXUS\nBEGIN DATA;\nFORMAT MISSING='0' GAP=~ MATCHCHAR=.;\nMATRIX\na ACGT\nb ..T.\nc 0~GT\n;\nEND;\n")
    aln = read_alignment("a.nex", text=text)
    assert aln.names == ("a", "b", "c")
    assert aln.states.tolist() == [[0, 1, 2, 3], [0, 1, 3, 3], [5, 4, 2, 3]]


def test_nexus_datatype_sets_the_alphabet():
    # source: NEXUS (Maddison et al. 1997): FORMAT DATATYPE=PROTEIN says the letters are amino acids, so
    # 'ACGT' is alanine, cysteine, glycine, threonine (states 0, 1, 5, 16 in alphabetical order of codes)
    text = "#NEXUS\nBEGIN DATA;\nFORMAT DATATYPE=PROTEIN;\nMATRIX\na ACGT\nb ACGA\n;\nEND;\n"
    aln = read_alignment("p.nex", text=text)
    assert aln.alphabet == "protein" and aln.states[0].tolist() == [0, 1, 5, 16]
    assert read_alignment("p.nex", "dna", text=text).alphabet == "dna"


def test_characters_beyond_latin1_are_reported_not_read_as_missing():
    # source: NC-IUB (1985): only the IUPAC letters are nucleotide codes
    with pytest.raises(InputError, match="sequence 'b', site 2: '\u0100' is not a nucleotide"):
        read_alignment("a.fasta", text=">a\nACGT\n>b\nA\u0100GT\n")


def test_nexus_tree_leaf_that_is_a_superscript_digit():
    # source: NEXUS (Maddison et al. 1997): only a number 1..ntax refers to TAXLABELS; '\u00b2' is a name
    [t] = parse_nexus_trees("#NEXUS\nBEGIN TAXA; TAXLABELS a b; END;\nBEGIN TREES; TREE t = (\u00b2,1); END;\n")
    assert t.leaf_names == ("\u00b2", "a")


# ---- the command line: a failed run is one line, exit 2, and loses nothing -------------------------

GOOD = ">a\nACGTACGTAC\n>b\nACGTACGTAA\n>c\nACGAACGTAC\n>d\nTCGTACGTAC\n"
CLI_FAILURES = [
    ("distances", ">a\nACGT\n>b\n----\n>c\nACGA\n", [], "share no unambiguous site"),
    ("distances", ">a\nMKLV\n>b\nMKIV\n", ["--model", "k2p"], "is for dna but the alignment is protein"),
    ("distances", GOOD, ["--model", "nope"], "unknown model 'nope'"),
    ("distances", GOOD, ["--gamma-shape", "0"], "must be a positive number"),
    ("distances", GOOD, ["--gamma-shape", "-2", "--model", "jc69"], "must be a positive number"),
    ("distances", b"", [], "empty"),
    ("distances", bytes(range(256)), [], "binary file"),
    ("distances", gzip.compress(GOOD.encode())[:-7], [], "gzip stream is truncated"),
    ("tree", ">a\nACGT\n>b\nACGA\n", [], "at least 3 taxa"),
    ("tree", ">a\nACGT\n", ["--method", "upgma"], "at least two"),
    ("tree", "\ta\tb\tc\na\t0\t1\t2\nb\t1\t0\t3\nc\t2\t4\t0\n", [], "not symmetric"),
    ("tree", "\ta\tb\tc\na\t0\t1\tnan\nb\t1\t0\t3\nc\tnan\t3\t0\n", [], "is nan"),
    ("tree", "\ta\tb\tc\na\t0\t1\t2\nb\t1\t0\t3\n", [], "one row per name"),
    ("tree", "\ta\tb\tc\na\t0\t-1\t2\nb\t-1\t0\t3\nc\t2\t3\t0\n", [], "negative"),
    ("tree", "\ta\tb\tc\na\t0\tone\t2\nb\t1\t0\t3\nc\t2\t3\t0\n", [], "'one' is not a number"),
    ("tree", "\ta\tb\ta\na\t0\t1\t2\nb\t1\t0\t3\na\t2\t3\t0\n", [], "appears twice"),
]


def _run(args):
    return CliRunner().invoke(main, [str(a) for a in args])


def _assert_one_line_error(result, fragment):
    # source: the project's CLI contract: exit status 2 and one line "cladewright: error: ..." for bad input
    assert result.exit_code == 2, result.output
    lines = result.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("cladewright: error:"), result.stderr
    assert fragment in lines[0] and "Traceback" not in result.output
    assert result.exception is None or isinstance(result.exception, SystemExit)


@pytest.mark.parametrize("command,content,options,fragment", CLI_FAILURES)
@pytest.mark.parametrize("existing", [False, True])
def test_cli_failure_creates_nothing_and_keeps_old_output(tmp_path, command, content, options, fragment,
                                                          existing):
    # source: common practice (atomic output: a failed run leaves the folder as it was)
    path = tmp_path / "input"
    path.write_bytes(content if isinstance(content, bytes) else content.encode())
    out = tmp_path / "out.txt"
    if existing:
        out.write_bytes(b"precious \x00\xff bytes\n")
    before = sorted(p.name for p in tmp_path.iterdir())
    _assert_one_line_error(_run([command, path, "-o", out, *options]), fragment)
    assert sorted(p.name for p in tmp_path.iterdir()) == before
    if existing:
        assert out.read_bytes() == b"precious \x00\xff bytes\n"


@pytest.mark.parametrize("command", ["distances", "tree"])
def test_cli_refuses_an_output_that_is_an_input(tmp_path, command):
    # source: common practice: writing over the input would lose it (also through a symbolic link)
    path = tmp_path / "a.fasta"
    path.write_text(GOOD)
    link = tmp_path / "link.fasta"
    link.symlink_to(path)
    for out in (path, link):
        _assert_one_line_error(_run([command, path, "-o", out]), "is also an input")
    assert path.read_text() == GOOD


# ---- full disk and other write failures -------------------------------------------------------------

@contextlib.contextmanager
def _tiny_disk(folder):
    """A full 64 KiB tmpfs at ``folder`` when this process may mount one (root), else None."""
    folder.mkdir()
    try:
        done = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=64k", "tmpfs", str(folder)],
                              capture_output=True).returncode == 0
    except OSError:
        done = False
    if not done:
        yield None
        return
    try:
        yield folder
    finally:
        subprocess.run(["umount", "-l", str(folder)], capture_output=True)


def _no_space(*_args):
    raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))


def test_full_disk_gives_one_line_and_keeps_the_old_output(tmp_path, monkeypatch):
    # source: common practice: ENOSPC (POSIX) on an output is the user's to fix; the write is atomic
    path = tmp_path / "a.fasta"
    path.write_text(GOOD)
    with _tiny_disk(tmp_path / "disk") as disk:
        folder = disk or tmp_path / "disk"
        out = folder / "m.tsv"
        out.write_text("old\n")
        if disk is not None:  # fill it to the last block
            with contextlib.suppress(OSError), open(folder / "filler", "wb") as fh:
                while True:
                    fh.write(b"x" * 4096)
                    fh.flush()
        else:  # no mount allowed: the disk fills at the first sync
            monkeypatch.setattr(os, "fsync", _no_space)
            (folder / "filler").write_text("")
        result = _run(["distances", path, "-o", out])
        _assert_one_line_error(result, "cannot write the output (the disk is full)")
        assert f"free space on the disk holding {folder}" in result.stderr
        assert out.read_text() == "old\n"
        assert sorted(p.name for p in folder.iterdir()) == ["filler", "m.tsv"]


@pytest.mark.parametrize("code,fragment", [
    (errno.ENOSPC, "the disk is full"), (errno.EDQUOT, "quota"), (errno.EACCES, "permission denied"),
    (errno.EROFS, "read-only"),
])
def test_write_errors_become_input_errors(tmp_path, monkeypatch, code, fragment):
    # source: common practice; errno names: POSIX
    out = tmp_path / "t.nwk"
    out.write_text("old\n")
    monkeypatch.setattr(os, "fsync", lambda fd: (_ for _ in ()).throw(OSError(code, os.strerror(code))))
    with pytest.raises(InputError, match=fragment) as info:
        with atomic_output(out) as fh:
            fh.write("(a,b,c);\n")
    assert str(info.value).startswith(f"{out}: ") and "choose" in str(info.value)
    assert out.read_text() == "old\n" and [p.name for p in tmp_path.iterdir()] == ["t.nwk"]


def test_unwritable_folder_and_other_os_errors(tmp_path, monkeypatch):
    # source: common practice: a fixable error (permissions) becomes an InputError, an unexpected one
    # (EIO) is not hidden; either way no temporary file is left
    import cladewright.io.output as output

    def denied(**_kw):
        raise PermissionError(errno.EACCES, "Permission denied")

    with monkeypatch.context() as m:
        m.setattr(output.tempfile, "mkstemp", denied)
        with pytest.raises(InputError, match="permission denied.*check the permissions"):
            with atomic_output(tmp_path / "x"):
                pass
    monkeypatch.setattr(os, "fsync", lambda fd: (_ for _ in ()).throw(OSError(errno.EIO, "I/O error")))
    with pytest.raises(OSError) as info:
        with atomic_output(tmp_path / "x") as fh:
            fh.write("y")
    assert info.value.errno == errno.EIO and not isinstance(info.value, InputError)
    assert list(tmp_path.iterdir()) == []
    for bad, fragment in [(tmp_path / "no" / "x", "does not exist"), (tmp_path, "is a folder")]:
        with pytest.raises(InputError, match=fragment):
            with atomic_output(bad):
                pass


def test_outputs_get_ordinary_permissions(tmp_path):
    # source: POSIX: a new file gets 0666 minus the umask; rewriting a file keeps its mode
    mask = os.umask(0o022)
    os.umask(mask)
    new = tmp_path / "new.txt"
    with atomic_output(new) as fh:
        fh.write("x")
    assert new.stat().st_mode & 0o777 == 0o666 & ~mask
    old = tmp_path / "old.txt"
    old.write_text("y")
    old.chmod(0o640)
    with atomic_output(old) as fh:
        fh.write("z")
    assert old.stat().st_mode & 0o777 == 0o640 and old.read_text() == "z"


def test_full_disk_during_a_bootstrap_keeps_a_resumable_replicate_file(tmp_path, monkeypatch):
    # source: common practice: a replicate file is flushed a whole line at a time, so a full disk leaves
    # complete lines (and at most one torn line) that --resume continues (docs/support.md)
    from cladewright.resampling import replicate_file

    example = Path(__file__).resolve().parents[2] / "example_alignments" / "glass_snails_coi.fasta"
    args = ["tree", example, "--replicates", 60, "--seed", 5, "--workers", 1]
    whole, whole_reps = tmp_path / "whole.nwk", tmp_path / "whole_reps.nwk"
    assert _run(args + ["-o", whole, "--save-replicates", whole_reps]).exit_code == 0
    out = tmp_path / "out.nwk"
    with _tiny_disk(tmp_path / "disk") as disk:
        folder = disk or tmp_path / "disk"
        reps = folder / "reps.nwk"
        if disk is None:  # no mount allowed: the disk fills after twenty lines
            real_open = open

            class Filling:
                def __init__(self, *a, **k):
                    self.fh, self.lines = real_open(*a, **k), 0

                def write(self, text):
                    self.lines += 1
                    if self.lines > 20:
                        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(reps))
                    return self.fh.write(text)

                def __getattr__(self, name):
                    return getattr(self.fh, name)

            monkeypatch.setattr(replicate_file, "open", Filling, raising=False)
        result = _run(args + ["-o", out, "--save-replicates", reps])
        _assert_one_line_error(result, "disk is full")
        assert "--resume" in result.stderr and not out.exists()
        kept = tmp_path / "kept.nwk"
        kept.write_bytes(reps.read_bytes())
        (tmp_path / "kept.nwk.run.json").write_bytes((folder / "reps.nwk.run.json").read_bytes())
    monkeypatch.undo()
    assert 0 < kept.read_bytes().count(b"\n") < 60
    assert _run(args + ["-o", out, "--save-replicates", kept, "--resume"]).exit_code == 0
    assert out.read_bytes() == whole.read_bytes() and kept.read_bytes() == whole_reps.read_bytes()
