"""DistanceMatrix: taxon names and an n x n matrix of pairwise distances.

The file form is a labelled TSV: the first row is an empty cell followed by
the names, then one row per name, its name first. Values are written with
``repr`` precision so that a matrix round-trips exactly.
"""

from __future__ import annotations

import io
import os

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
        """The labelled TSV text of the matrix."""
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


def _validate(names, values, source):
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
            raise InputError(f"taxon {name!r} appears twice (rows {seen[name] + 1} and {i + 1}); names must be unique",
                             source=source)
        seen[name] = i
    bad = ~np.isfinite(values)
    if bad.any():
        i, j = np.argwhere(bad)[0]
        raise InputError(f"distance {names[i]!r}-{names[j]!r} is {values[i, j]!r}; every distance must be finite",
                         source=source)
    neg = values < 0
    if neg.any():
        i, j = np.argwhere(neg)[0]
        raise InputError(f"distance {names[i]!r}-{names[j]!r} is negative ({values[i, j]!r}); distances must be >= 0",
                         source=source)
    diag = np.diagonal(values)
    if np.any(diag != 0):
        i = int(np.flatnonzero(diag != 0)[0])
        raise InputError(f"the diagonal entry of {names[i]!r} is {diag[i]!r}; a taxon's distance to itself must be 0",
                         source=source)
    tol = 1e-12 * max(1.0, float(np.max(values)) if n else 1.0)
    asym = np.abs(values - values.T) > tol
    if asym.any():
        i, j = np.argwhere(asym)[0]
        raise InputError(f"the matrix is not symmetric: {names[i]!r}-{names[j]!r} is {values[i, j]!r} but "
                         f"{names[j]!r}-{names[i]!r} is {values[j, i]!r}", source=source)


def read_distance_matrix(path, *, text=None):
    """Read a labelled TSV distance matrix.

    Parameters
    ----------
    path : str or os.PathLike
        The file (``-`` is standard input when ``text`` is given by the caller).
    text : str, optional
        The file's content, when the caller already has it.

    Returns
    -------
    DistanceMatrix
    """
    source = os.fspath(path)
    if text is None:
        from .io.files import read_text

        text = read_text(path)
    lines = [ln for ln in text.splitlines() if ln.strip()]
    if not lines:
        raise InputError("the file is empty; give a labelled TSV matrix (an empty cell, then the names)",
                         source=source)
    header = lines[0].split("\t")
    if header[0].strip() != "":
        raise InputError("line 1 must start with an empty cell followed by the taxon names, tab-separated",
                         source=source)
    names = [h.strip() for h in header[1:]]
    n = len(names)
    if len(lines) - 1 != n:
        raise InputError(f"{n} names in line 1 but {len(lines) - 1} rows; the matrix must be square",
                         source=source)
    values = np.empty((n, n))
    for r, line in enumerate(lines[1:]):
        cells = line.split("\t")
        if len(cells) != n + 1:
            raise InputError(f"line {r + 2} has {len(cells) - 1} values, expected {n}; the matrix must be square",
                             source=source)
        if cells[0].strip() != names[r]:
            raise InputError(f"line {r + 2} is labelled {cells[0].strip()!r} but column {r + 1} is {names[r]!r}; "
                             "rows and columns must follow the same order", source=source)
        try:
            values[r] = [float(c) for c in cells[1:]]
        except ValueError:
            bad = next(c for c in cells[1:] if not _is_float(c))
            raise InputError(f"line {r + 2}: {bad!r} is not a number", source=source) from None
    return DistanceMatrix(names, values, source=source)


def _is_float(text):
    try:
        float(text)
    except ValueError:
        return False
    return True
