"""The NEXUS alignment reader refuses what it would otherwise misread: one symbol with two roles, names
that differ only in case, a second alignment block, a TAXA block that disagrees with the MATRIX.

Source for every rule here: NEXUS, Maddison, Swofford & Maddison (1997) Syst. Biol. 46:590-621 (MISSING,
GAP and MATCHCHAR are distinct symbols and none of them a state symbol; names are not case-sensitive; a
TAXA block lists the taxa the MATRIX rows belong to); recalled from the paper, so "from memory" for the
wording, and each expected reading below is written out by hand from those rules.
"""

import numpy as np
import pytest
from click.testing import CliRunner

from cladewright.io.readers import read_alignment
from cladewright.cli import main
from cladewright.errors import InputError


def _decoded(aln):
    # State codes as documented in cladewright.alignment: ACGT = 0..3, then gap, then missing.
    letters = np.array(list("ACGT-?"))
    return ["".join(letters[row]) for row in aln.states]


def _read(text):
    return read_alignment("t.nex", text=text)


def _refused(text, *fragments):
    with pytest.raises(InputError) as info:
        _read(text)
    message = str(info.value)
    assert message.startswith("t.nex: line ") and "\n" not in message, message
    for fragment in fragments:
        assert fragment in message, message
    return message


def _data(fmt, rows="a ACGT\nb ACGA\n"):
    # line 1 #NEXUS, line 2 BEGIN DATA, line 3 the FORMAT command, line 4 MATRIX
    return f"#NEXUS\nBEGIN DATA;\nFORMAT {fmt};\nMATRIX\n{rows};\nEND;\n"


# ---- one symbol, two roles ------------------------------------------------------------------------

@pytest.mark.parametrize("fmt,fragments", [
    ("DATATYPE=DNA MATCHCHAR=. GAP=.", ["line 3:", "MATCHCHAR=. and GAP=.", "give each role its own symbol"]),
    ("DATATYPE=DNA MISSING=? GAP=?", ["line 3:", "MISSING=? and GAP=?", "two roles"]),
    ("DATATYPE=DNA MISSING=~ MATCHCHAR=~", ["line 3:", "MISSING=~ and MATCHCHAR=~", "two roles"]),
    # letters are one symbol in either case (NEXUS symbols are not case-sensitive without RESPECTCASE)
    ("DATATYPE=DNA GAP=e MATCHCHAR=E", ["line 3:", "GAP=e and MATCHCHAR=E", "two roles"]),
])
def test_one_symbol_for_two_roles_is_refused(fmt, fragments):
    _refused(_data(fmt), *fragments)


def test_the_clash_is_named_on_the_line_of_the_second_declaration():
    text = "#NEXUS\nBEGIN DATA;\nFORMAT DATATYPE=DNA\n  MATCHCHAR=.\n  GAP=.;\nMATRIX\na ACGT\nb ..G-\n;\nEND;\n"
    _refused(text, "line 5:", "MATCHCHAR=. and GAP=.")


@pytest.mark.parametrize("fmt,fragments", [
    ("DATATYPE=DNA GAP=A", ["GAP=A is also the DNA state A", "e.g. GAP=-"]),
    ("DATATYPE=DNA MISSING=t", ["MISSING=t is also the DNA state T", "e.g. MISSING=?"]),
    ("DATATYPE=RNA MATCHCHAR=U", ["MATCHCHAR=U is also the DNA state U"]),
    ("DATATYPE=DNA MATCHCHAR=N", ["MATCHCHAR=N is also the DNA ambiguity code N"]),
    ("DATATYPE=DNA GAP=R", ["GAP=R is also the DNA ambiguity code R"]),
    ("DATATYPE=PROTEIN MISSING=L", ["MISSING=L is also the protein state L"]),
    ("DATATYPE=PROTEIN GAP=X", ["GAP=X is also the protein ambiguity code X"]),
    # Without DATATYPE the letters could be amino acids: N is asparagine.
    ("MISSING=N", ["MISSING=N is also the protein state N", "DATATYPE=DNA or PROTEIN"]),
])
def test_a_role_symbol_that_is_a_state_is_refused(fmt, fragments):
    _refused(_data(fmt), "line 3:", *fragments)


def test_missing_may_be_an_ambiguity_code_that_already_means_missing():
    # IUPAC N is any base (NC-IUB 1985), read as missing data for distances (common practice), so
    # MISSING=N in DNA data changes no reading: N and ? both give the missing state.
    aln = _read(_data("DATATYPE=DNA MISSING=N", "a ACGT\nb AN?T\n"))
    assert _decoded(aln) == ["ACGT", "A??T"]


def test_swapped_missing_and_gap_symbols_are_each_read_once():
    # The file declares '-' as missing and '?' as gap: its '-' is missing data and its '?' a gap.
    aln = _read(_data("DATATYPE=DNA MISSING=- GAP=?", "a AC-?\nb ACGT\n"))
    assert _decoded(aln) == ["AC?-", "ACGT"]


def test_a_polymorphism_is_not_taken_for_a_declared_gap():
    # {CT} is a polymorphism (uncertain state: missing for distances, common practice); the file's '?'
    # is a declared gap, the polymorphism is not.
    aln = _read(_data("DATATYPE=DNA GAP=?", "a A{CT}?T\nb ACGT\n"))
    assert _decoded(aln) == ["A?-T", "ACGT"]


def test_a_shortened_matchchar_is_read_as_matchchar():
    # MATCH written for MATCHCHAR (a start of one subcommand only: common practice, from memory); without
    # this the '.' would silently be read as a gap.
    aln = _read(_data("DATATYPE=DNA GAP=- MATCH=.", "a ACGT\nb ..T.\n"))
    assert _decoded(aln) == ["ACGT", "ACTT"]


def test_a_lower_case_matchchar_letter_matches_in_either_case():
    # NEXUS symbols are not case-sensitive unless RESPECTCASE: MATCHCHAR=e also matches 'E'.
    aln = _read(_data("DATATYPE=DNA MATCHCHAR=e", "a ACGT\nb eEtE\n"))
    assert _decoded(aln) == ["ACGT", "ACTT"]


def test_respectcase_keeps_letter_symbols_apart():
    # With RESPECTCASE, 'e' and 'E' are two symbols: here missing and gap.
    aln = _read(_data("DATATYPE=DNA RESPECTCASE MISSING=e GAP=E", "a ACGT\nb AeET\n"))
    assert _decoded(aln) == ["ACGT", "A?-T"]


# ---- names that differ only in case -----------------------------------------------------------------

def test_names_differing_only_in_case_are_refused():
    message = _refused(_data("DATATYPE=DNA", "Lucivitra ACGT\nLUCIVITRA ACGA\n"),
                       "line 6:", "'Lucivitra' (line 5)", "'LUCIVITRA'", "differ only in case", "rename one")
    assert "MATRIX" in message


def test_interleaved_names_differing_only_in_case_are_refused():
    text = ("#NEXUS\nBEGIN DATA;\nDIMENSIONS NTAX=2 NCHAR=8;\nFORMAT DATATYPE=DNA INTERLEAVE;\nMATRIX\n"
            "alpha ACGT\nbeta ACGA\n\nAlpha ACGT\nbeta ACGA\n;\nEND;\n")
    _refused(text, "line 9:", "'alpha' (line 6)", "'Alpha'", "differ only in case")


def test_taxlabels_differing_only_in_case_are_refused():
    text = "#NEXUS\nBEGIN TAXA;\nTAXLABELS a b\n A;\nEND;\n" + _data("DATATYPE=DNA", "a ACGT\nb ACGA\n")
    _refused(text, "line 4:", "TAXLABELS names 'a' (line 3) and 'A'", "differ only in case")


def test_a_taxa_block_may_spell_a_name_in_another_case():
    # One name to NEXUS, so the TAXA block and the MATRIX agree; the MATRIX spelling is kept.
    text = "#NEXUS\nBEGIN TAXA;\nDIMENSIONS NTAX=2;\nTAXLABELS ALPHA beta;\nEND;\n" + _data(
        "DATATYPE=DNA", "alpha ACGT\nBeta ACGA\n").replace("#NEXUS\n", "")
    assert _read(text).names == ("alpha", "Beta")


# ---- one alignment block; a TAXA block agrees with it ------------------------------------------------

@pytest.mark.parametrize("second", ["DATA", "CHARACTERS", "characters"])
def test_a_second_alignment_block_is_refused(second):
    text = _data("DATATYPE=DNA") + f"BEGIN {second};\nFORMAT DATATYPE=DNA;\nMATRIX\nc TTTT\n;\nEND;\n"
    _refused(text, "line 9:", f"a second {second.upper()} block", "the first, DATA, begins on line 2",
             "keep one block")


def test_a_commented_out_block_is_not_a_block():
    # Text in [ ] is a comment (NEXUS), so only one DATA block is here.
    text = "#NEXUS\n[BEGIN DATA; an old draft]\n" + _data("DATATYPE=DNA").replace("#NEXUS\n", "")
    assert _decoded(_read(text)) == ["ACGT", "ACGA"]


def test_a_block_after_the_alignment_is_still_read_for_blocks():
    text = _data("DATATYPE=DNA") + "BEGIN TREES;\nTREE t = (a,b);\nEND;\n"
    assert _read(text).names == ("a", "b")


TAXA = "#NEXUS\nBEGIN TAXA;\nDIMENSIONS NTAX={ntax};\nTAXLABELS {labels};\nEND;\n"
ROWS = "BEGIN CHARACTERS;\nFORMAT DATATYPE=DNA;\nMATRIX\n{rows};\nEND;\n"


def _taxa_file(ntax, labels, rows, newtaxa=False):
    # line 3 DIMENSIONS NTAX, line 4 TAXLABELS, line 8 MATRIX, rows from line 9
    head = TAXA.format(ntax=ntax, labels=labels)
    block = ROWS.format(rows=rows)
    if newtaxa:
        block = block.replace("FORMAT", "DIMENSIONS NEWTAXA NTAX=2;\nFORMAT")
    return head + block


def test_taxa_ntax_different_from_the_matrix_rows_is_refused():
    text = TAXA.replace("TAXLABELS {labels};\n", "").format(ntax=3) + ROWS.format(rows="a ACGT\nb ACGA\n")
    _refused(text, "line 3:", "TAXA block says NTAX=3", "the MATRIX (line 7) has 2 rows", "make them agree")


def test_taxa_ntax_different_from_its_taxlabels_is_refused():
    _refused(_taxa_file(3, "a b", "a ACGT\nb ACGA\n"), "line 3:", "NTAX=3", "TAXLABELS (line 4) lists 2 names")


def test_a_taxon_with_no_row_is_refused():
    _refused(_taxa_file(2, "a c", "a ACGT\nb ACGA\n"), "line 4:", "taxon 'c' of the TAXA block has no row",
             "add its row, or remove it from TAXLABELS")


def test_a_row_not_in_taxlabels_is_refused():
    text = TAXA.replace("DIMENSIONS NTAX={ntax};\n", "").format(labels="a b") + ROWS.format(
        rows="a ACGT\nb ACGA\nc ACGG\n")
    _refused(text, "line 10:", "sequence 'c' is not in the TAXA block's TAXLABELS (line 3)")


def test_a_taxa_block_in_another_order_agrees():
    aln = _read(_taxa_file(3, "c a b", "a ACGT\nb ACGA\nc ACGG\n"))
    assert aln.names == ("a", "b", "c") and _decoded(aln) == ["ACGT", "ACGA", "ACGG"]


def test_newtaxa_gives_the_block_its_own_taxa():
    # DIMENSIONS NEWTAXA: the block's taxa are new, not the TAXA block's, so the two need not agree.
    aln = _read(_taxa_file(3, "x y z", "a ACGT\nb ACGA\n", newtaxa=True))
    assert aln.names == ("a", "b")


def test_a_block_without_matrix_is_named_by_its_line():
    _refused("#NEXUS\nBEGIN TAXA;\nTAXLABELS a b;\nEND;\nBEGIN CHARACTERS;\nFORMAT DATATYPE=DNA;\nEND;\n",
             "line 5: the CHARACTERS block has no MATRIX")


def test_dimensions_ntax_message_names_its_line():
    text = "#NEXUS\nBEGIN DATA;\nDIMENSIONS NTAX=3;\nFORMAT DATATYPE=DNA;\nMATRIX\na ACGT\nb ACGA\n;\nEND;\n"
    _refused(text, "line 3:", "DIMENSIONS says NTAX=3 but the MATRIX (line 5) has 2 rows")


def test_command_line_gives_one_line_and_writes_nothing(tmp_path):
    # common practice (the project's rule): exit 2, one line naming file and line, no output file
    src = tmp_path / "clash.nex"
    src.write_text(_data("DATATYPE=DNA MATCHCHAR=. GAP=.", "a ACGT\nb ..G.\nc AC-T\n"))
    out = tmp_path / "d.tsv"
    result = CliRunner().invoke(main, ["distances", str(src), "-o", str(out)])
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and f"{src}: line 3: FORMAT MATCHCHAR=. and GAP=." in lines[0]
    assert not out.exists()
