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

    The matrix keeps its own copy of ``values``, marked read-only, so a
    checked matrix stays checked: changing the caller's array afterwards
    leaves it as it was, and writing into ``dm.values`` raises ValueError.

    Parameters
    ----------
    names : sequence of str
        Taxon names, unique, in row order.
    values : array_like of real numbers, shape (n, n)
        Distances (integers or floats; complex, boolean, text and object
        arrays are refused). Copied and stored as float64, or float32 when
        ``dtype=np.float32`` is asked for (half the memory, for very large
        runs).
    validate : bool
        Check the values (finite, non-negative, zero diagonal, symmetric);
        the shape and the names are always checked. Skip it only for a
        matrix known to be valid.
    dtype : {numpy.float64, numpy.float32}
    source : str, optional
        File name to put in error messages.
    info : dict, optional
        Facts about how the matrix was made, for summaries and reports.

    Raises
    ------
    InputError
        Naming what is wrong with ``names`` or ``values`` and the fix.

    Examples
    --------
    >>> dm = DistanceMatrix(["a", "b"], [[0, 0.1], [0.1, 0]])
    >>> float(dm.values[0, 1])
    0.1
    """

    __slots__ = ("_names", "_values", "info")

    def __init__(self, names, values, *, validate=True, dtype=np.float64, source=None, info=None):
        names = _as_names(names, source)
        dtype = _as_float_dtype(dtype, source)
        values = _as_values(values, dtype, source)
        _check_shape(names, values, source)
        if validate:
            _check_values(names, values, source)
        self._own(names, values, info)

    @classmethod
    def _adopt(cls, names, values, *, info=None):
        """Wrap an array the caller made and hands over (no copy, no check).

        For cladewright's own builders only (the distance engine, the TSV
        reader): an n = 50,000 matrix is 10-20 GB, too much to copy. The array
        is marked read-only; the caller must keep no writable reference.
        """
        self = object.__new__(cls)
        self._own(tuple(names), values, info)
        return self

    def _own(self, names, values, info):
        values.flags.writeable = False
        # Kept as a view of the frozen array: numpy refuses to make a view
        # writeable again while its base is read-only.
        self._names = names
        self._values = values.view()
        # Facts about how the matrix was made (model, sites used, warnings),
        # carried along to the summary and the report.
        self.info = dict(info or {})

    @property
    def names(self):
        """Taxon names (tuple of str), in row order."""
        return self._names

    @property
    def values(self):
        """The read-only n x n distance array."""
        return self._values

    def __reduce__(self):
        # Unpickled arrays come back writeable: freeze again on arrival.
        return _unpickle, (self._names, np.asarray(self._values), self.info)

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


def _unpickle(names, values, info):
    return DistanceMatrix._adopt(names, values, info=info)


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


_KINDS = {"c": "complex", "b": "true/false", "O": "Python objects", "U": "text", "S": "bytes", "M": "date",
          "m": "time span", "V": "structured"}


def _as_names(names, source):
    try:
        return tuple(str(x) for x in names)
    except TypeError:
        raise InputError(f"names is {type(names).__name__}, not a sequence of taxon names; give one name per row",
                         source=source) from None


def _as_float_dtype(dtype, source):
    try:
        dt = np.dtype(dtype)
    except TypeError:
        dt = None
    if dt is None or dt not in (np.dtype(np.float64), np.dtype(np.float32)):  # None == float64 to numpy
        raise InputError(f"dtype={dtype!r} is not supported; give numpy.float64 or numpy.float32", source=source)
    return dt


def _as_values(values, dtype, source):
    """A C-ordered array of ``dtype`` that no caller holds: always a copy of a
    caller's array, since the matrix must not change after it was checked."""
    if isinstance(values, np.ma.MaskedArray) and np.ma.getmaskarray(values).any():
        raise InputError("values has masked cells; fill them (every distance must be given) or remove those taxa",
                         source=source)
    try:
        arr = np.asarray(values)
    except (TypeError, ValueError):
        raise InputError("values is not a rectangular array of numbers; give an n x n array, one row and one "
                         "column per taxon", source=source) from None
    if arr.dtype.kind not in "iuf":
        # np.asarray(..., float) would drop imaginary parts with only a
        # warning and read booleans and digit strings as numbers.
        what = _KINDS.get(arr.dtype.kind, "non-numeric")
        raise InputError(f"values has dtype {arr.dtype} ({what}); distances must be real numbers: give an int or "
                         "float array", source=source)
    if isinstance(values, (list, tuple)):
        return np.ascontiguousarray(arr, dtype=dtype)  # np.asarray made it: nobody else holds it
    return np.array(arr, dtype=dtype, order="C", copy=True)


def _validate(names, values, source, where=None):
    """Check a matrix; ``where(i, j)`` gives the file position of cell (i, j)."""
    _check_shape(names, values, source)
    _check_values(names, values, source, where)


def _check_shape(names, values, source):
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


def _check_values(names, values, source, where=None):
    def at(i, j):
        return f"{where(int(i), int(j))}: " if where is not None else ""

    n = len(names)
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
    >>> print(float(read_distance_matrix("m.tsv", text="\ta\tb\na\t0\t0.5\nb\t0.5\t0\n").values[0, 1]))
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
    return DistanceMatrix._adopt(names, values)
