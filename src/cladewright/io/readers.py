"""Reading files into the three nouns: alignments, distance matrices and trees.

The text formats are parsed into plain values by the modules below
(:mod:`~cladewright.io.alignment_formats`, :mod:`~cladewright.io.matrix_tsv`,
:mod:`~cladewright.io.newick`, :mod:`~cladewright.io.nexus`); this module
makes :class:`~cladewright.alignment.Alignment`,
:class:`~cladewright.matrix.DistanceMatrix` and :class:`~cladewright.tree.Tree`
objects of them.

References
----------
Newick format: the trade's de facto standard (1986 informal specification);
Maddison, Swofford & Maddison (1997) Syst. Biol. 46:590-621 (NEXUS).
"""

from __future__ import annotations

import os

import numpy as np

from ..alignment import ALPHABETS, Alignment, detect_alphabet, encode
from ..errors import InputError
from ..matrix import DistanceMatrix, check_distance_matrix
from ..tree import Tree
from .alignment_formats import parse_alignment
from .files import read_text
from .matrix_tsv import parse_distance_tsv
from .newick import TreeRecord, parse_newick_records, text_position
from .nexus import parse_nexus_records

__all__ = ["read_alignment", "read_distance_matrix", "read_trees", "parse_newick", "parse_nexus_trees", "open_store"]


def read_alignment(path: str | os.PathLike[str], alphabet: str | None = None, *,
                   text: str | None = None) -> Alignment:
    """Read an aligned FASTA or NEXUS file (plain or gzip-compressed).

    The format is detected from the content: ``>`` starts FASTA, ``#NEXUS``
    starts NEXUS (a DATA or CHARACTERS block with a MATRIX; Maddison,
    Swofford & Maddison 1997).

    Parameters
    ----------
    path : str or os.PathLike
        The file; ``-`` reads standard input.
    alphabet : {"dna", "protein"}, optional
        Detected when not given: from a NEXUS FORMAT DATATYPE, else protein
        if any letter is not a nucleotide code.
    text : str, optional
        The content, when the caller already has it (``path`` then only names it).

    Returns
    -------
    Alignment

    Examples
    --------
    >>> import tempfile, os
    >>> fd, p = tempfile.mkstemp(suffix=".fasta"); _ = os.write(fd, b">a\\nACGT\\n>b\\nACGA\\n"); os.close(fd)
    >>> read_alignment(p).states.tolist()
    [[0, 1, 2, 3], [0, 1, 2, 0]]
    """
    source = "<stdin>" if os.fspath(path) == "-" else os.fspath(path)
    if text is None:
        text = read_text(path)
    names, seqs, declared = parse_alignment(text, source)
    # FORMAT DATATYPE settles the alphabet that letters alone may not
    # (a short protein can look like DNA).
    if alphabet is None:
        alphabet = declared
    if alphabet is None:
        alphabet = detect_alphabet(seqs)
    elif alphabet not in ALPHABETS:
        raise InputError(f"unknown alphabet {alphabet!r}; choose dna or protein", source=source)
    states = encode(names, seqs, alphabet, source)
    return Alignment(names, states, alphabet, source=source)


def read_distance_matrix(path: str | os.PathLike[str], *, text: str | None = None) -> DistanceMatrix:
    r"""Read a labelled TSV distance matrix.

    The first line is an empty cell and the taxon names, tab-separated; then
    one row per taxon, in the same order, its name first. Blank lines are
    ignored; Windows and old Mac line endings are accepted.

    Parameters
    ----------
    path : str or os.PathLike
        The file (``-`` is standard input when ``text`` is given by the caller).
    text : str, optional
        The file's content, when the caller already has it.

    Returns
    -------
    DistanceMatrix

    Raises
    ------
    InputError
        Naming the line (and column) of the first problem and the fix.

    Examples
    --------
    >>> print(float(read_distance_matrix("m.tsv", text="\ta\tb\na\t0\t0.5\nb\t0.5\t0\n").values[0, 1]))
    0.5
    """
    source = os.fspath(path)
    if text is None:
        text = read_text(path)
    names, values, lines = parse_distance_tsv(text, source)
    check_distance_matrix(names, values, source, where=lambda i, j: f"line {lines[i]}, column {j + 2}")
    return DistanceMatrix._adopt(names, values)


def open_store(path: str | os.PathLike[str]) -> DistanceMatrix:
    """The distance matrix of a finished tiled store (``cladewright distances ALN -o FILE.zarr``).

    The stored matrix (of the distinct sequences) is read once, tile row by
    tile row, into the returned array; identical sequences then get copies
    of their row (one more n x n array while that is done), and saturated
    pairs get the cap when the store was made with ``saturated="cap"``.

    Parameters
    ----------
    path : str or os.PathLike
        The store's directory.

    Returns
    -------
    DistanceMatrix
        The same values, bit for bit, as :func:`cladewright.distance_matrix`
        with the store's settings; its ``info`` holds them.

    Raises
    ------
    InputError
        For a directory that is not a finished store, or without Zarr installed.

    Examples
    --------
    See :func:`cladewright.distances.tiled.tiled_distances`.
    """
    from .store import matrix_info, read_store_rows, store_attributes

    attrs, group, (m, _) = store_attributes(path)
    tile = int(attrs["tile"])
    first = read_store_rows(path, 0, min(m, tile))
    values = np.empty((m, m), dtype=first.dtype)
    values[:first.shape[0]] = first
    for r0 in range(tile, m, tile):
        values[r0:r0 + tile] = read_store_rows(path, r0, r0 + tile)
    if group.size != m or np.any(group != np.arange(m)):
        values = values[np.ix_(group, group)]
    info = matrix_info(attrs)
    if info.get("saturated"):
        bad = ~np.isfinite(values)
        info["saturated"] = int(np.count_nonzero(np.triu(bad, 1)))
        values[bad] = info["cap"]
    return DistanceMatrix._adopt(tuple(attrs["names"]), values, info=info)


def read_trees(path: str | os.PathLike[str]) -> list[Tree]:
    """All trees in a Newick or NEXUS file.

    A file whose text starts with ``#NEXUS`` (case-insensitive, after any
    blank lines) is read as NEXUS, any other as Newick.

    Parameters
    ----------
    path : str or os.PathLike
        The file (gzip allowed; ``-`` for standard input).

    Returns
    -------
    list of Tree

    References
    ----------
    Newick format: the trade's de facto standard (1986 informal specification);
    Maddison, Swofford & Maddison (1997) Syst. Biol. 46:590-621.
    """
    source = os.fspath(path)
    text = read_text(path)
    if text.lstrip()[:6].upper() == "#NEXUS":
        return parse_nexus_trees(text, source=source)
    return parse_newick(text, source=source)


def parse_newick(text: str, source: str | None = None) -> list[Tree]:
    """All trees of a Newick text.

    Parameters
    ----------
    text : str
        One or more trees, each ending in ``;`` (one per line or several on a
        line).
    source : str, optional
        File name used in error messages.

    Returns
    -------
    list of Tree

    Raises
    ------
    InputError
        On malformed text, naming the line and column and the fix.

    References
    ----------
    Newick format: the trade's de facto standard (1986 informal specification).

    Examples
    --------
    >>> [t] = parse_newick("((a:1,b:2)90:0.5,c:3);")
    >>> t.leaf_names, t.rooted
    (('a', 'b', 'c'), True)
    """
    return [_tree(r, text, source) for r in parse_newick_records(text, source)]


def parse_nexus_trees(text: str, source: str | None = None) -> list[Tree]:
    """Trees of every TREES block of a NEXUS text.

    Parameters
    ----------
    text : str
        NEXUS text starting with ``#NEXUS``.
    source : str, optional
        File name used in error messages.

    Returns
    -------
    list of Tree
        Leaves carry the names given by TRANSLATE (or TAXLABELS).

    References
    ----------
    Maddison, Swofford & Maddison (1997) Syst. Biol. 46:590-621.
    """
    return [_tree(r, text, source, after_translate=True) for r in parse_nexus_records(text, source)]


def _tree(record: TreeRecord, text: str, source: str | None, after_translate: bool = False) -> Tree:
    """A Tree of a parsed record; a record the Tree refuses becomes an
    InputError at the tree's place in the text (the parsers build valid
    arrays: this guards a reader from ever failing with anything else)."""
    try:
        return Tree(record.parent, record.length, record.leaf_names, support=record.support,
                    labels=record.labels, rooted=record.rooted, support_text=record.support_text)
    except ValueError as err:
        where = text_position(text, record.offset)
        if after_translate:
            raise InputError(f"{where}: the tree is not valid after TRANSLATE ({err}); "
                             "fix the TRANSLATE table or the tree", source=source) from None
        raise InputError(f"{where}: the tree is not valid ({err}); check the parentheses",
                         source=source) from None
