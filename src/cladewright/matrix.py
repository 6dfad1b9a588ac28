"""DistanceMatrix: taxon names and an n x n matrix of pairwise distances.

The file form is a labelled TSV: the first row is an empty cell followed by
the names, then one row per name, its name first. Values are written with
``repr`` precision so that a matrix round-trips exactly.
"""

from __future__ import annotations

import io
import os
import re

import numpy as np

from .errors import InputError

__all__ = ["DistanceMatrix", "read_distance_matrix"]


class DistanceMatrix:
    """Names and a symmetric, zero-diagonal, finite, non-negative matrix.

    Parameters
    ----------
    names : sequence of str
        Taxon names, unique, in row order.
    values : array_like, shape (n, n)
        Distances. Stored as float64 unless ``dtype=np.float32`` is asked for
        (half the memory, for very large runs).
    validate : bool
        Check the matrix (square, symmetric, finite, non-negative, zero
        diagonal). The distance engine builds matrices that are valid by
        construction and skips the check.

    Examples
    --------
    >>> dm = DistanceMatrix(["a", "b"], [[0, 0.1], [0.1, 0]])
    >>> dm.values[0, 1]
    0.1
    """

    __slots__ = ("names", "values", "info")

    def __init__(self, names, values, *, validate=True, dtype=np.float64, source=None, info=None):
        names = tuple(str(x) for x in names)
        values = np.asarray(values, dtype=dtype)
        if validate:
            _validate(names, values, source)
        self.names = names
        self.values = values
        # Facts about how the matrix was made (model, sites used, warnings),
        # carried along to the summary and the report.
        self.info = dict(info or {})

    def __len__(self):
        return len(self.names)

    def __repr__(self):
        return f"DistanceMatrix({len(self.names)} taxa)"

    def index(self, name):
        """Row of a taxon name."""
        try:
            return self.names.index(name)
        except ValueError:
            raise InputError(f"taxon {name!r} is not in the matrix") from None

    def to_tsv(self):
        """The labelled TSV text of the matrix.

        Raises
        ------
        InputError
            When a name cannot stand in a TSV cell (a tab or line break, or
            spaces at its ends, which a reader strips).
        """
        for name in self.names:
            if _BAD_TSV_NAME.search(name) or name != name.strip() or not name:
                raise InputError(f"taxon name {name!r} cannot be written to a TSV matrix (it is empty, holds a "
                                 "tab, NUL or line break, or starts or ends with a space); rename the taxon")
        buf = io.StringIO()
        buf.write("\t" + "\t".join(self.names) + "\n")
        for name, row in zip(self.names, self.values):
            buf.write(name + "\t" + "\t".join(map(repr, row.tolist())) + "\n")
        return buf.getvalue()

    def write(self, path):
        """Write the labelled TSV to ``path`` (atomically: a temporary file in
        the same folder, renamed into place when complete)."""
        from .io.files import write_text_atomic

        write_text_atomic(path, self.to_tsv())


# The reader splits lines at \n (after turning \r\n and \r into \n) and
# cells at tabs, and refuses NUL (binary); every other character survives a
# round trip.
_BAD_TSV_NAME = re.compile(r"[\t\n\r\x00]")
# A cell: a plain decimal number (ASCII digits only: float() would also take
# '1_000' and non-ASCII digits), or nan/inf so that the check below can say
# that the distance is not finite.
_NUM = r" *(?:[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?|[+-]?(?:nan|inf|infinity)) *"
_CELL = re.compile(_NUM, re.I)
_ROW_CELLS = re.compile(rf"(?:\t{_NUM})*", re.I)


def _validate(names, values, source, where=None):
    """Check a matrix; ``where(i, j)`` gives the file position of cell (i, j)."""
    def at(i, j):
        return f"{where(int(i), int(j))}: " if where is not None else ""

    n = len(names)
    if values.ndim != 2 or values.shape[0] != values.shape[1]:
        raise InputError(f"the matrix is {values.shape}, not square; give one row and one column per taxon",
                         source=source)
    if values.shape[0] != n:
        raise InputError(f"{n} names for a {values.shape[0]} x {values.shape[0]} matrix; give one name per row",
                         source=source)
    seen = {}
    for i, name in enumerate(names):
        if name in seen:
            raise InputError(f"taxon {name!r} appears twice (rows {seen[name] + 1} and {i + 1}); "
                             "give every taxon a unique name", source=source)
        seen[name] = i
    bad = ~np.isfinite(values)
    if bad.any():
        i, j = np.argwhere(bad)[0]
        raise InputError(f"{at(i, j)}distance {names[i]!r}-{names[j]!r} is {float(values[i, j])!r}; every "
                         "distance must be a finite number: fix or remove that taxon", source=source)
    neg = values < 0
    if neg.any():
        i, j = np.argwhere(neg)[0]
        raise InputError(f"{at(i, j)}distance {names[i]!r}-{names[j]!r} is negative ({float(values[i, j])!r}); "
                         "distances must be >= 0: fix that cell", source=source)
    diag = np.diagonal(values)
    if np.any(diag != 0):
        i = int(np.flatnonzero(diag != 0)[0])
        raise InputError(f"{at(i, i)}the diagonal entry of {names[i]!r} is {float(diag[i])!r}; a taxon's "
                         "distance to itself must be 0", source=source)
    tol = 1e-12 * max(1.0, float(np.max(values)) if n else 1.0)
    asym = np.abs(values - values.T) > tol
    if asym.any():
        i, j = np.argwhere(asym)[0]
        raise InputError(f"{at(i, j)}the matrix is not symmetric: {names[i]!r}-{names[j]!r} is "
                         f"{float(values[i, j])!r} but {names[j]!r}-{names[i]!r} is {float(values[j, i])!r}; "
                         "make the two cells equal", source=source)


def read_distance_matrix(path, *, text=None):
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
    >>> read_distance_matrix("m.tsv", text="\ta\tb\na\t0\t0.5\nb\t0.5\t0\n").values[0, 1]
    0.5
    """
    source = os.fspath(path)
    if text is None:
        from .io.files import read_text

        text = read_text(path)
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
    first = {}
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
    lines = [ln for ln, _ in rows]
    _validate(names, values, source, where=lambda i, j: f"line {lines[i]}, column {j + 2}")
    return DistanceMatrix(names, values, validate=False, source=source)
