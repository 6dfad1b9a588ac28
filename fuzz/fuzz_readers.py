"""Fuzz target: feed random bytes to every reader of cladewright.

The contract under test (common practice for a program that reads user
files): whatever the bytes, a reader either returns a result or raises
:class:`cladewright.errors.InputError`; it never fails with anything else
(IndexError, a ValueError that is no InputError, UnicodeError,
RecursionError, ...). A result must also survive the project's own writer:
written and read again it gives the same names, states, trees or values
("nothing lost").

Inputs come from three sources: raw random bytes, a soup of each format's
tokens, and small valid documents (FASTA, NEXUS, labelled TSV, Newick) with
random edits, some of them gzip-compressed or truncated.

Usage (a bounded run; exits 1 on the first failure, printing the input)::

    python fuzz/fuzz_readers.py --seconds 60 [--seed 0]

:func:`one_input` takes bytes and so also suits byte-level fuzzers that call
a function per input. tests/io/test_fuzz.py runs :func:`make_test` with a fixed
number of examples and ``derandomize=True`` so that CI is reproducible.
"""

from __future__ import annotations

import argparse
import gzip
import math
import os
import sys
import tempfile
import time

import numpy as np
from hypothesis import HealthCheck, given, seed as hypothesis_seed, settings, strategies as st

from cladewright.alignment import ALPHABETS
from cladewright.errors import InputError
from cladewright.io import read_trees
from cladewright.io.alignment_formats import parse_fasta
from cladewright.io.newick_writer import format_newick
from cladewright.io.nexus import format_nexus
from cladewright.io.nexus_alignment import parse_nexus_matrix
from cladewright.io.readers import parse_newick, parse_nexus_trees, read_alignment, read_distance_matrix

__all__ = ["one_input", "fuzz_bytes", "make_test", "run", "SEEDS"]

# Small valid documents of every format the readers take.
SEEDS = [
    b">a desc\nACGT-N\n>b\nACG\nTRY\n>c\nacgtnn\n",
    b">p1\nMKLV*X\n>p2\nMKJV-B\n",
    b"#NEXUS\nBEGIN DATA;\n DIMENSIONS NTAX=2 NCHAR=4;\n FORMAT DATATYPE=DNA MISSING=? GAP=- MATCHCHAR=.;\n"
    b" MATRIX\n 'a b' AC{GT}T [c]\n b_2 ..-?\n ;\nEND;\n",
    b"#NEXUS\nbegin characters; dimensions ntax=2 nchar=6; format interleave;\nmatrix\na ACG\nb ACT\n\n"
    b"a TTT\nb TTA\n;\nend;\n",
    b"\ta\tb\tc\na\t0\t0.5\t1e-3\nb\t0.5\t0\t2\nc\t1e-3\t2\t0\n",
    b"\r\n\t x \t'y'\r\n x \t 0 \t .25E+1\r\n'y'\t2.5\t-0\r\n",
    b"\tt1\tt2\tt3\tt4\nt1\t0\t1\t2\t3\nt2\t1\t0\t4\t5\nt3\t2\t4\t0\t6\nt4\t3\t5\t6\t0\n",
    b"((a:1,'b c':2.5e-1)90:0.5,[x](d,e)lab:3,f);\n[&U](a,b,(c,d));\n",
    b"#NEXUS\nBEGIN TAXA; DIMENSIONS NTAX=3; TAXLABELS x y 'z z'; END;\nBEGIN TREES;\n"
    b" TRANSLATE 1 x, 2 y, 3 'z z';\n TREE t1 = [&R] ((1:1,2:2):0.5,3:1);\n UTREE t2 = (x,y,'z z');\nEND;\n",
    b"(" * 300 + b"a" + b")" * 300 + b";\n",
]

TOKENS = [
    ">", "\n", "\r\n", "\r", "\t", " ", "#NEXUS", "BEGIN", "begin data;", "BEGIN TREES;", "begin taxa;",
    "END;", "MATRIX", "DIMENSIONS", "NTAX=", "NCHAR=", "FORMAT", "INTERLEAVE", "MISSING=", "GAP=",
    "MATCHCHAR=", "TAXLABELS", "TRANSLATE", "TREE", "UTREE", "=", ";", ",", "(", ")", ":", "[", "]",
    "[&R]", "[&U]", "'", "''", '"', "{", "}", "_", "-", ".", "?", "*", "A", "C", "G", "T", "N", "acgt",
    "MKLV", "a", "b", "x y", "0", "1", "2", "-1", "0.5", "1e-5", "1e999", "nan", "inf", "1_0", "\u00e9",
    "\u0100", "\u00b2", "\ufeff", "\x0b", "\x85", "\u2028",
]
_BOMS = [b"", b"\xef\xbb\xbf", b"\xff\xfe", b"\x1f\x8b"]


@st.composite
def _mutated(draw):
    """A seed document with a few random edits (insert, delete, duplicate, replace, truncate)."""
    data = bytearray(draw(st.sampled_from(SEEDS)))
    for _ in range(draw(st.sampled_from([0, 1, 1, 1, 2, 2, 3, 5]))):
        op = draw(st.integers(0, 4))
        i = draw(st.integers(0, len(data)))
        if op == 0:
            data[i:i] = draw(st.sampled_from(TOKENS)).encode("utf-8")
        elif op == 1:
            del data[i:i + draw(st.integers(1, 8))]
        elif op == 2:
            data[i:i] = data[i:i + draw(st.integers(1, 16))]
        elif op == 3 and data:
            data[min(i, len(data) - 1)] = draw(st.integers(0, 255))
        else:
            del data[i:]
    return bytes(data)


_soup = st.lists(st.sampled_from(TOKENS), max_size=40).map(lambda xs: "".join(xs).encode("utf-8"))


@st.composite
def fuzz_bytes(draw):
    """Bytes for the readers: raw, token soup or an edited seed; sometimes
    behind a byte-order mark, gzip-compressed or gzip-truncated."""
    # edited seeds twice as often: they get past the first checks to the deeper code
    data = draw(st.one_of(st.binary(max_size=200), _soup, _mutated(), _mutated()))
    wrap = draw(st.integers(0, 9))
    if wrap == 0:
        data = draw(st.sampled_from(_BOMS)) + data
    elif wrap == 1:
        data = gzip.compress(data, mtime=0)
    elif wrap == 2:
        packed = gzip.compress(data, mtime=0)
        data = packed[:draw(st.integers(0, len(packed)))]
    return data


# ---- "nothing lost": what was read, written by the project, reads back the same

def _tree_key(tree):
    """The tree as comparable values independent of node numbering: per node
    its leaf set, depth, exact length, label and (non-root) support."""
    n = tree.n_leaves
    depth = [0] * tree.n_nodes
    below = [None] * tree.n_nodes
    parent = tree.parent.tolist()
    for v in tree.preorder().tolist():
        if parent[v] >= 0:
            depth[v] = depth[parent[v]] + 1
    for v in tree.postorder().tolist():
        kids = tree.children(v).tolist()
        below[v] = frozenset([tree.leaf_names[v]]) if v < n else frozenset().union(*(below[k] for k in kids))
    out = []
    for v in range(tree.n_nodes):
        length = float(tree.length[v])
        sup = float(tree.support[v]) if v != tree.root else math.nan
        out.append((tuple(sorted(below[v])), depth[v], repr(length), tree.labels[v],
                    "none" if math.isnan(sup) else format(sup, ".0f")))
    return tree.rooted, sorted(out, key=repr)


def _same_trees(trees, again, what):
    if len(trees) != len(again) or [_tree_key(t) for t in trees] != [_tree_key(t) for t in again]:
        raise AssertionError(f"{what}: trees changed on a write/read round trip")


def _check_trees(trees):
    text = "".join(format_newick(t) for t in trees)
    _same_trees(trees, parse_newick(text, source="<rewritten>"), "Newick")
    _same_trees(trees, parse_nexus_trees(format_nexus(trees), source="<rewritten>"), "NEXUS")


def _check_alignment(aln):
    if any(not x or x != "".join(x.split()) or x.startswith(">") for x in aln.names):
        return  # a FASTA name is the first word of its header (common practice)
    letters = np.array(list(("ACGT" if aln.alphabet == "dna" else "ACDEFGHIKLMNPQRSTVWY") + "-?"))
    rows = ["".join(row) for row in letters[aln.states].tolist()]
    text = "".join(f">{x}\n{r}\n" for x, r in zip(aln.names, rows))
    again = read_alignment("<rewritten>", alphabet=aln.alphabet, text=text)
    if again.names != aln.names or again.states.tolist() != aln.states.tolist():
        raise AssertionError("FASTA: the alignment changed on a write/read round trip")


def _check_matrix(dm):
    again = read_distance_matrix("<rewritten>", text=dm.to_tsv())
    if again.names != dm.names or again.values.tobytes() != dm.values.tobytes():
        raise AssertionError("TSV: the matrix changed on a write/read round trip")


def _attempt(fn, *args, **kwargs):
    """Run a reader; InputError is a good outcome, anything else escapes."""
    try:
        return fn(*args, **kwargs)
    except InputError:
        return None


def one_input(data, folder=None):
    """Feed ``data`` (bytes) to every reader, as a file and as text.

    Parameters
    ----------
    data : bytes
    folder : str, optional
        Where to write the temporary input file (default: a new temporary folder).

    Raises
    ------
    Exception
        Anything but InputError from a reader, or AssertionError when a
        result does not survive a write/read round trip.
    """
    own = folder is None
    folder = tempfile.mkdtemp(prefix="cw-fuzz-") if own else folder
    path = os.path.join(folder, "input")
    try:
        with open(path, "wb") as fh:
            fh.write(data)
        aln = _attempt(read_alignment, path)
        if aln is not None:
            _check_alignment(aln)
        for alphabet in ALPHABETS:
            _attempt(read_alignment, path, alphabet)
        dm = _attempt(read_distance_matrix, path)
        if dm is not None:
            _check_matrix(dm)
        trees = _attempt(read_trees, path)
        if trees:
            _check_trees(trees)
        # The parsers directly, past the readers' format detection.
        text = data.decode("utf-8", "replace")
        for head in ("", ">", "#NEXUS\n", "#NEXUS\nbegin data;\n", "\t"):
            _attempt(parse_fasta, head + text, "<text>")
            _attempt(parse_nexus_matrix, head + text, "<text>")
            _attempt(parse_newick, head + text, "<text>")
            _attempt(parse_nexus_trees, head + text, "<text>")
            dm = _attempt(read_distance_matrix, "<text>", text=head + text)
            if dm is not None:
                _check_matrix(dm)
            aln = _attempt(read_alignment, "<text>", None, text=head + text)
            if aln is not None:
                _check_alignment(aln)
    finally:
        if os.path.exists(path):
            os.unlink(path)
        if own:
            os.rmdir(folder)


def make_test(max_examples, derandomize=True, folder=None):
    """A hypothesis test feeding :func:`fuzz_bytes` to :func:`one_input`.

    Parameters
    ----------
    max_examples : int
    derandomize : bool
        A fixed sequence of inputs (reproducible CI); False for exploration.
    folder : str, optional
        Folder for the temporary input file.

    Returns
    -------
    callable
        Call it with no argument to run the examples.
    """
    @settings(max_examples=max_examples, derandomize=derandomize, deadline=None, database=None,
              suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                     HealthCheck.filter_too_much], print_blob=True)
    @given(fuzz_bytes())
    def fuzz_readers(data):
        one_input(data, folder)

    return fuzz_readers


def run(seconds, seed=0, batch=200):
    """Fuzz for about ``seconds`` seconds in batches of seeded random examples.

    Parameters
    ----------
    seconds : float
    seed : int
        First batch's seed; batch k uses ``seed + k``.
    batch : int
        Examples per batch.

    Returns
    -------
    int
        Number of batches run.
    """
    start = time.monotonic()
    k = 0
    with tempfile.TemporaryDirectory(prefix="cw-fuzz-") as folder:
        while time.monotonic() - start < seconds:
            hypothesis_seed(seed + k)(make_test(batch, derandomize=False, folder=folder))()
            k += 1
    return k


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--seconds", type=float, default=60.0, help="how long to fuzz (default 60)")
    parser.add_argument("--seed", type=int, default=0, help="seed of the first batch (default 0)")
    args = parser.parse_args(argv)
    batches = run(args.seconds, args.seed)
    print(f"fuzz_readers: {batches} batches without a failure", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
