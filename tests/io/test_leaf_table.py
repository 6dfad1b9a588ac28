"""The table of facts about the taxa (cladewright.io.leaf_table), read to colour a figure's leaves.

Source: the IANA media type text/tab-separated-values (a header line of field names, fields separated by
tabs, no tab inside a field); gzip by RFC 1952; what a message must say (the file, the line, the fix) is the
project's rule for input errors (docs/errors.md), checked word by word against each table written here.
"""

import gzip

import pytest

from cladewright.errors import InputError
from cladewright.io.leaf_table import LeafGroups, read_leaf_groups

TREE = ["a", "b", "c", "d"]


def write(tmp_path, text, name="taxa.tsv"):
    path = tmp_path / name
    path.write_bytes(text.encode("utf-8"))
    return path


def test_reads_one_column_keyed_by_taxon(tmp_path):
    # source: IANA text/tab-separated-values; the values are the table's own cells
    path = write(tmp_path, "taxon\thost\tyear\nb\tfish\t2002\na\tbird\t2001\nzz\tbird\t1999\nc\t\t2003\n")
    groups = read_leaf_groups(path, "host", TREE)
    assert isinstance(groups, LeafGroups) and isinstance(groups, dict)
    assert groups == {"a": "bird", "b": "fish"}
    assert list(groups) == ["a", "b"]  # in the tree's order
    assert groups.column == "host"
    assert groups.ignored == ("zz",)  # in the table, not in the tree: ignored but counted
    assert groups.missing == ("c", "d")  # blank cell (c) and no row (d)
    assert read_leaf_groups(path, "year", TREE) == {"a": "2001", "b": "2002", "c": "2003"}


def test_line_endings_byte_order_mark_blanks_and_gzip(tmp_path):
    # source: common practice (CRLF line endings and a UTF-8 byte order mark from spreadsheet exports, cells
    # padded with blanks, trailing tabs); RFC 1952 (gzip)
    text = "\ufefftaxon \t host\t\r\n a \t bird \t\r\n\r\nb\tfish\r\n"
    path = write(tmp_path, text)
    assert read_leaf_groups(path, "host", TREE) == {"a": "bird", "b": "fish"}
    packed = tmp_path / "taxa.tsv.gz"
    packed.write_bytes(gzip.compress(text.encode("utf-8")))
    assert read_leaf_groups(packed, "host", TREE) == {"a": "bird", "b": "fish"}


def test_names_are_matched_exactly(tmp_path):
    # source: common practice (taxon names are identifiers: no case folding, underscores are not blanks)
    path = write(tmp_path, "taxon\thost\nA\tbird\nb_x\tfish\nb x\tmoss\n")
    assert read_leaf_groups(path, "host", ["a", "b x"]) == {"b x": "moss"}


@pytest.mark.parametrize("text, column, message", [
    ("", "host", r"taxa\.tsv: the table is empty; give a header row"),
    ("\n\n", "host", r"the table is empty"),
    ("taxon,host\na,bird\n", "host", r"line 1: the header has one column \(it looks comma-separated: save it "
                                     r"with tabs"),
    ("taxon\thost\tyear\na\tbird\t1\n", "colour",
     r"taxa\.tsv: no column 'colour' in the header on line 1; the columns are 'host', 'year'"),
    ("taxon\thost\na\tbird\n", "taxon", r"no column 'taxon'"),
    ("taxon\thost\thost\na\tbird\tfish\n", "host", r"line 1: column 'host' appears 2 times \(columns 2, 3\)"),
    ("taxon\thost\na\tbird\tfish\n", "host", r"line 2 has 3 cells but the header has 2; remove the extra cells"),
    ("taxon\thost\n\tbird\n", "host", r"line 2: no taxon name in the first column"),
    ("taxon\thost\na\tbird\nb\tfish\na\tmoss\n", "host", r"line 4: taxon 'a' is also on line 2; give each taxon "
                                                         r"one row"),
    ("taxon\thost\n", "host", r"the table holds a header but no rows"),
    ("taxon\thost\nx\tbird\ny\tfish\n", "host", r"names none of the tree's taxa \(2 rows, e\.g\. 'x'\); the first "
                                                r"column must hold the taxon names"),
    ("taxon\thost\ta\nb\t\tq\n", "host", r"gives no taxon of the tree a value in column 'host'"),
])
def test_errors_name_the_file_the_line_and_the_fix(tmp_path, text, column, message):
    # source: the project's rule for input errors (one line: the file, the record, the fix), each message
    # checked against the table written here
    path = write(tmp_path, text)
    with pytest.raises(InputError, match=message) as err:
        read_leaf_groups(path, column, TREE)
    assert "\n" not in str(err.value) and str(err.value).startswith(str(path))


def test_a_missing_file_is_named(tmp_path):
    # source: the project's rule for input errors
    with pytest.raises(InputError, match=r"nowhere\.tsv: no such file"):
        read_leaf_groups(tmp_path / "nowhere.tsv", "host", TREE)
