"""Hostile input for every reader, and writer -> reader round trips.

The contract (common practice for a program reading user files): any text or
bytes either parse or raise cladewright.errors.InputError, never another
exception; and what the project writes, it reads back exactly.

Every hypothesis run here is seeded (derandomize=True, no example database)
and bounded by max_examples, so CI sees the same inputs each time.
"""

import gzip
import importlib.util
import math
from pathlib import Path

import numpy as np
from hypothesis import HealthCheck, given, settings, strategies as st

from cladewright.errors import InputError
from cladewright.io import read_trees
from cladewright.io.alignment_formats import parse_fasta
from cladewright.io.newick_writer import format_newick
from cladewright.io.nexus import format_nexus
from cladewright.io.nexus_alignment import parse_nexus_matrix
from cladewright.io.readers import parse_newick, parse_nexus_trees, read_alignment, read_distance_matrix
from cladewright.matrix import DistanceMatrix
from cladewright.tree import Tree

ROOT = Path(__file__).resolve().parents[2]
_spec = importlib.util.spec_from_file_location("fuzz_readers", ROOT / "fuzz" / "fuzz_readers.py")
fuzz_readers = importlib.util.module_from_spec(_spec)
_spec.loader.exec_module(fuzz_readers)

_SEEDED = settings(derandomize=True, database=None, deadline=None,
                   suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                          HealthCheck.filter_too_much])


def seeded(max_examples):
    """Seeded, bounded hypothesis settings: the same examples on every run."""
    return settings(_SEEDED, max_examples=max_examples)


def test_fuzz_target_bounded_run(tmp_path):
    # The fuzz target of fuzz/fuzz_readers.py on a fixed, seeded set of inputs: raw bytes, token soups,
    # edited valid documents, gzip (whole and truncated), byte-order marks.
    fuzz_readers.make_test(3000, derandomize=True, folder=str(tmp_path))()


def test_fuzz_seeds_are_valid_documents(tmp_path):
    # The seed corpus must reach the readers' success paths, or the edits fuzz only the first checks:
    # every seed is read by at least one reader.
    for k, data in enumerate(fuzz_readers.SEEDS):
        path = tmp_path / f"seed{k}"
        path.write_bytes(data)
        read = 0
        for reader in (read_alignment, read_distance_matrix, read_trees):
            try:
                reader(path)
                read += 1
            except InputError:
                pass
        assert read >= 1, data[:60]


def _only_input_error(fn, *args, **kwargs):
    try:
        fn(*args, **kwargs)
    except InputError as err:
        assert "\n" not in str(err), "an error message must be one line"


# Characters that carry structure in each format, plus a little of everything else.
_NEWICK_CHARS = st.sampled_from(list("(),:;'[]_&RU ab1.e-+\n\t") + ["\u00e9", "\x00", "\ufeff"])
_NEXUS_CHARS = st.sampled_from(list("#;=,'\"[](){}_- \n\tabAC?.1") + ["NEXUS", "begin ", "data", "trees",
                                                                       "taxa", "matrix", "end", "tree",
                                                                       "translate", "taxlabels", "format",
                                                                       "dimensions", "ntax", "nchar",
                                                                       "interleave", "gap", "missing",
                                                                       "matchchar"])
_TSV_CHARS = st.sampled_from(list("\t\n\r ab0123456789.eE+-_") + ["nan", "inf", "\u0661", "\x0b"])
_FASTA_CHARS = st.sampled_from(list(">\n\r \tACGTNacgtn-?.*MKLVXJBZ\u00e9\u0100\x0c"))


def _texts(chars):
    return st.one_of(st.text(max_size=80), st.lists(chars, max_size=80).map("".join))


@seeded(300)
@given(_texts(_NEWICK_CHARS))
def test_newick_reader_raises_only_input_error(text):
    # source: common practice (a reader fails with its own error type and a one-line message)
    _only_input_error(parse_newick, text, source="t.nwk")


@seeded(300)
@given(_texts(_NEXUS_CHARS))
def test_nexus_readers_raise_only_input_error(text):
    # source: common practice; NEXUS: Maddison, Swofford & Maddison (1997)
    _only_input_error(parse_nexus_trees, "#NEXUS\n" + text, source="t.nex")
    _only_input_error(parse_nexus_matrix, "#NEXUS\nbegin data;" + text, source="a.nex")
    _only_input_error(read_alignment, "a.nex", text="#NEXUS\n" + text)


@seeded(300)
@given(_texts(_TSV_CHARS))
def test_matrix_reader_raises_only_input_error(text):
    # source: common practice
    _only_input_error(read_distance_matrix, "m.tsv", text="\t" + text)
    _only_input_error(read_distance_matrix, "m.tsv", text=text)


@seeded(300)
@given(_texts(_FASTA_CHARS))
def test_fasta_reader_raises_only_input_error(text):
    # source: common practice
    _only_input_error(parse_fasta, text, "a.fasta")
    for alphabet in (None, "dna", "protein"):
        _only_input_error(read_alignment, "a.fasta", alphabet, text=">" + text)


@seeded(150)
@given(st.binary(max_size=120), st.sampled_from([b"", b"\x1f\x8b", b"\xef\xbb\xbf", b"\xff\xfe", b"BZh"]))
def test_file_readers_raise_only_input_error_on_bytes(tmp_path_factory, data, head):
    # source: common practice; gzip magic number: RFC 1952
    path = tmp_path_factory.getbasetemp() / "bytes.in"
    path.write_bytes(head + data)
    for reader in (read_alignment, read_distance_matrix, read_trees):
        _only_input_error(reader, path)


# ---- round trips: what the project writes, it reads back exactly -----------------------------------

# Labels of any characters but CR (a file's CR and CRLF are read as LF line ends) and NUL (a file holding
# it is binary); surrogates are no text.
_LABEL = st.text(st.characters(blacklist_categories=("Cs",), blacklist_characters="\r\x00"), max_size=12)


@st.composite
def random_trees(draw, max_leaves=25):
    """A random tree: unique random labels, random shape (multifurcations and one-child nodes), lengths
    finite or missing, integer support or a text label on internal nodes."""
    n = draw(st.integers(1, max_leaves))
    names = draw(st.lists(_LABEL, min_size=n, max_size=n, unique=True))
    free = list(range(n))  # roots of the subtrees made so far
    groups = []            # children of each new internal node n, n+1, ...
    for _ in range(draw(st.integers(0, 2)) if n == 1 else 0):
        groups.append([free.pop()])
        free.append(n + len(groups) - 1)
    while len(free) > 1:
        # k = 1 makes a one-child node; after 2n joins, join everything left
        k = len(free) if len(groups) > 2 * n else draw(st.integers(1, min(4, len(free))))
        picks = [free.pop(draw(st.integers(0, len(free) - 1))) for _ in range(k)]
        groups.append(picks)
        free.append(n + len(groups) - 1)
    m = n + len(groups)
    parent = np.full(m, -1, np.int64)
    for g, members in enumerate(groups):
        parent[members] = n + g
    finite = st.floats(allow_nan=False, allow_infinity=False, width=64)
    length = np.array([draw(st.one_of(st.just(math.nan), finite)) for _ in range(m)])
    support = np.full(m, np.nan)
    labels = [None] * m
    for v in range(n, m):
        kind = draw(st.integers(0, 2))
        if kind == 1:
            support[v] = draw(st.integers(0, 100))
        elif kind == 2:
            labels[v] = draw(_LABEL)
    root = int(np.flatnonzero(parent == -1)[0])
    support[root] = np.nan  # a root has no branch to support
    return Tree(parent, length, names, support=support, labels=labels, rooted=draw(st.booleans()))


def tree_key(tree):
    """The tree as values independent of node numbering: each node's leaf set, depth, exact length
    (repr), label and support."""
    n, parent = tree.n_leaves, tree.parent.tolist()
    depth, below = {}, {}
    for v in tree.preorder().tolist():
        depth[v] = depth[parent[v]] + 1 if parent[v] >= 0 else 0
    for v in tree.postorder().tolist():
        below[v] = (frozenset([tree.leaf_names[v]]) if v < n
                    else frozenset().union(*(below[c] for c in tree.children(v).tolist())))
    rows = [(tuple(sorted(below[v])), depth[v], repr(float(tree.length[v])), tree.labels[v],
             repr(float(tree.support[v]))) for v in range(tree.n_nodes)]
    return tree.rooted, tree.n_leaves, sorted(rows, key=repr)


@seeded(150)
@given(st.lists(random_trees(), min_size=1, max_size=3))
def test_newick_and_nexus_round_trip_random_trees(trees):
    # source: Newick format (1986 informal specification): a quoted label keeps every character ('' for
    # a quote); NEXUS: Maddison et al. (1997) TRANSLATE and quoted words. Exact lengths via repr.
    want = [tree_key(t) for t in trees]
    newick = "".join(format_newick(t) for t in trees)
    assert [tree_key(t) for t in parse_newick(newick)] == want
    assert [tree_key(t) for t in parse_nexus_trees(format_nexus(trees))] == want


@seeded(40)
@given(random_trees(), st.sampled_from(["newick", "nexus"]))
def test_tree_files_round_trip(tmp_path_factory, tree, fmt):
    # source: as above, through Tree.write (atomic file output) and read_trees (format detection)
    path = tmp_path_factory.getbasetemp() / f"t.{fmt}"
    tree.write(path, format=fmt)
    [back] = read_trees(path)
    assert tree_key(back) == tree_key(tree)


# NC-IUB (1985) codes as the distance engine sees them: A C G T (U = T) are states 0-3, '-' and '.' a
# gap (4), every ambiguity code and '?' missing (5).
DNA_CODE = {**{b: i for i, b in enumerate("ACGT")}, "U": 3, **{c: 5 for c in "RYSWKMBDHVN?X"}, "-": 4, ".": 4}
AA = "ACDEFGHIKLMNPQRSTVWY"
PROTEIN_CODE = {**{a: i for i, a in enumerate(AA)}, **{c: 21 for c in "BZJXUO*?"}, "-": 20, ".": 20}
_FASTA_NAME = st.text(st.characters(min_codepoint=0x21, max_codepoint=0x7E), min_size=1, max_size=15)


@st.composite
def random_alignments(draw):
    alphabet = draw(st.sampled_from(["dna", "protein"]))
    table = DNA_CODE if alphabet == "dna" else PROTEIN_CODE
    letters = "".join(table) + "".join(table).lower()
    n = draw(st.integers(1, 8))
    length = draw(st.integers(1, 40))
    names = draw(st.lists(_FASTA_NAME, min_size=n, max_size=n, unique=True))
    seqs = [draw(st.text(st.sampled_from(letters), min_size=length, max_size=length)) for _ in range(n)]
    return alphabet, names, seqs


@seeded(120)
@given(random_alignments(), st.integers(1, 50), st.sampled_from(["\n", "\r\n", "\r"]), st.booleans())
def test_fasta_round_trip_random_alignments(tmp_path_factory, aln, width, newline, packed):
    # source: FASTA as common practice ('>' + name line, sequence lines of any width); codes: NC-IUB (1985);
    # Windows (CRLF) and old Mac (CR) line endings and gzip (RFC 1952) read as plain LF text.
    alphabet, names, seqs = aln
    text = "".join(f">{x} description{newline}" + newline.join(s[i:i + width] for i in range(0, len(s), width))
                   + newline for x, s in zip(names, seqs))
    data = text.encode("ascii")
    path = tmp_path_factory.getbasetemp() / "a.fasta"
    path.write_bytes(gzip.compress(data) if packed else data)
    got = read_alignment(path, alphabet=alphabet)
    table = DNA_CODE if alphabet == "dna" else PROTEIN_CODE
    assert list(got.names) == names
    assert got.states.tolist() == [[table[c.upper()] for c in s] for s in seqs]


_TSV_NAME = st.text(st.characters(blacklist_categories=("Cs",), blacklist_characters="\t\n\r\x00"),
                    min_size=1, max_size=12).filter(lambda x: x == x.strip())


@st.composite
def random_matrices(draw):
    n = draw(st.integers(1, 8))
    names = draw(st.lists(_TSV_NAME, min_size=n, max_size=n, unique=True))
    upper = draw(st.lists(st.floats(0, 1.7e308, allow_nan=False, allow_subnormal=True),
                          min_size=n * (n - 1) // 2, max_size=n * (n - 1) // 2))
    values = np.zeros((n, n))
    values[np.triu_indices(n, 1)] = upper
    values += values.T
    return DistanceMatrix(names, values)


@seeded(120)
@given(random_matrices())
def test_matrix_round_trip_is_exact(tmp_path_factory, dm):
    # source: Python's repr of a float reads back to the same double (IEEE 754, shortest round trip)
    path = tmp_path_factory.getbasetemp() / "m.tsv"
    dm.write(path)
    back = read_distance_matrix(path)
    assert back.names == dm.names
    assert back.values.tobytes() == dm.values.tobytes()
