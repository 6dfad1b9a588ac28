"""Internal: the TSV format behind cladewright.read_distance_matrix and DistanceMatrix.write.

The labelled TSV form of a distance matrix, as text and plain values.

The first row is an empty cell followed by the names, then one row per name,
its name first, tab-separated. Values are written with ``repr`` precision so
that a matrix round-trips exactly. The reader returns names and a float64
array; the checks on the values (finite, non-negative, zero diagonal,
symmetric) are :func:`cladewright.matrix.check_distance_matrix`'s.
"""

from __future__ import annotations

import io
import re
from collections.abc import Sequence
from typing import Protocol

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError

__all__ = ["MatrixLike", "format_distance_tsv", "parse_distance_tsv"]


class MatrixLike(Protocol):
    """What the writer reads of a distance matrix: the attributes of
    :class:`~cladewright.matrix.DistanceMatrix`, as a structural type (PEP
    544), so that this module names no matrix class."""

    @property
    def names(self) -> Sequence[str]: ...

    @property
    def values(self) -> NDArray[np.floating]: ...

# The reader splits lines at \n (after turning \r\n and \r into \n) and
# cells at tabs, and refuses NUL (binary); every other character survives a
# round trip.
_BAD_TSV_NAME = re.compile(r"[\t\n\r\x00]")
# A cell: a plain decimal number (ASCII digits only: float() would also take
# '1_000' and non-ASCII digits), or nan/inf so that the caller's check can say
# that the distance is not finite.
_NUM = r" *(?:[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?|[+-]?(?:nan|inf|infinity)) *"
_CELL = re.compile(_NUM, re.I)
_ROW_CELLS = re.compile(rf"(?:\t{_NUM})*", re.I)


def format_distance_tsv(matrix: MatrixLike) -> str:
    """The labelled TSV text of a distance matrix.

    Parameters
    ----------
    matrix : DistanceMatrix
        Or any object with ``names`` (sequence of str) and ``values`` (n x n
        array).

    Returns
    -------
    str

    Raises
    ------
    InputError
        When a name cannot stand in a TSV cell (a tab or line break, or
        spaces at its ends, which a reader strips).
    """
    for name in matrix.names:
        if _BAD_TSV_NAME.search(name) or name != name.strip() or not name:
            raise InputError(f"taxon name {name!r} cannot be written to a TSV matrix (it is empty, holds a "
                             "tab, NUL or line break, or starts or ends with a space); rename the taxon")
    buf = io.StringIO()
    buf.write("\t" + "\t".join(matrix.names) + "\n")
    for name, row in zip(matrix.names, matrix.values):
        buf.write(name + "\t" + "\t".join(map(repr, row.tolist())) + "\n")
    return buf.getvalue()


def parse_distance_tsv(text: str, source: str | None) -> tuple[list[str], NDArray[np.float64], list[int]]:
    r"""Names and values of a labelled TSV distance matrix.

    The first line is an empty cell and the taxon names, tab-separated; then
    one row per taxon, in the same order, its name first. Blank lines are
    ignored; Windows and old Mac line endings are accepted.

    Parameters
    ----------
    text : str
    source : str
        File name for messages.

    Returns
    -------
    names : list of str
    values : float64 ndarray, shape (n, n)
        As written: not yet checked for being a distance matrix.
    lines : list of int
        The line of the text each row was read from, for messages.

    Raises
    ------
    InputError
        Naming the line (and column) of the first problem and the fix.
    """
    text = text.replace("\r\n", "\n").replace("\r", "\n")
    numbered = [(k, ln) for k, ln in enumerate(text.split("\n"), start=1) if ln.strip(" ")]
    if not numbered:
        raise InputError("the file is empty; give a labelled TSV matrix (an empty cell, then the names)",
                         source=source)
    head_line, head = numbered[0]
    header = head.split("\t")
    if header[0].strip() != "":
        raise InputError(f"line {head_line} must start with an empty cell followed by the taxon names, "
                         "tab-separated", source=source)
    names = [h.strip() for h in header[1:]]
    if not names:
        raise InputError(f"line {head_line} holds no taxon names; give an empty cell, then the names, "
                         "tab-separated", source=source)
    for c, name in enumerate(names):
        if not name:
            raise InputError(f"line {head_line}, column {c + 2}: an empty taxon name; give every column a name "
                             "(and no tab at the end of the line)", source=source)
    first: dict[str, int] = {}
    for c, name in enumerate(names):
        if name in first:
            raise InputError(f"line {head_line}, columns {first[name] + 2} and {c + 2}: taxon {name!r} appears "
                             "twice; give every taxon a unique name", source=source)
        first[name] = c
    n = len(names)
    rows = numbered[1:]
    if len(rows) != n:
        raise InputError(f"{n} names on line {head_line} but {len(rows)} rows; give one row per name "
                         "(the matrix must be square)", source=source)
    values = np.empty((n, n))
    for r, (lineno, line) in enumerate(rows):
        cells = line.split("\t")
        if len(cells) != n + 1:
            raise InputError(f"line {lineno} has {len(cells) - 1} values, expected {n}; give one value per "
                             "taxon (the matrix must be square)", source=source)
        if cells[0].strip() != names[r]:
            raise InputError(f"line {lineno} is labelled {cells[0].strip()!r} but column {r + 2} is "
                             f"{names[r]!r}; rows and columns must follow the same order", source=source)
        if not _ROW_CELLS.fullmatch(line, len(cells[0])):
            c = next(k for k, x in enumerate(cells[1:]) if not _CELL.fullmatch(x))
            raise InputError(f"line {lineno}, column {c + 2}: {cells[c + 1]!r} is not a number; give a decimal "
                             "number such as 0.05", source=source)
        values[r] = list(map(float, cells[1:]))
    return names, values, [ln for ln, _ in rows]
