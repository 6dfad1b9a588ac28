"""DistanceMatrix: taxon names and an n x n matrix of pairwise distances.

The file form is a labelled TSV (:mod:`cladewright.io.matrix_tsv`); values
are written with ``repr`` precision so that a matrix round-trips exactly.
:func:`cladewright.read_distance_matrix` reads one.
"""

from __future__ import annotations

import os
from html import escape
from collections.abc import Callable, Iterable, Mapping, Sequence
from typing import Any, cast

import numpy as np
from numpy.typing import ArrayLike, DTypeLike, NDArray

from .errors import InputError
from .io.matrix_tsv import format_distance_tsv
from .io.output import write_text_atomic

__all__ = ["DistanceMatrix", "check_distance_matrix", "as_float_dtype", "HTML_MAX_TAXA"]

#: Rows and columns a notebook shows of a matrix (DistanceMatrix._repr_html_).
HTML_MAX_TAXA = 20


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

    _names: tuple[str, ...]
    _values: NDArray[np.floating]
    #: Facts about how the matrix was made (model, sites used, warnings).
    info: dict[str, Any]

    def __init__(self, names: Iterable[str], values: ArrayLike, *, validate: bool = True,
                 dtype: DTypeLike = np.float64, source: str | None = None,
                 info: Mapping[str, Any] | None = None) -> None:
        names = _as_names(names, source)
        dtype = as_float_dtype(dtype, source)
        values = _as_values(values, dtype, source)
        _check_shape(names, values, source)
        if validate:
            _check_values(names, values, source)
        self._own(names, values, info)

    @classmethod
    def _adopt(cls, names: Iterable[str], values: NDArray[np.floating], *,
               info: Mapping[str, Any] | None = None) -> DistanceMatrix:
        """Wrap an array the caller made and hands over (no copy, no check).

        For cladewright's own builders only (the distance engine, the TSV
        reader in :mod:`cladewright.io.readers`): an n = 50,000 matrix is 10-20 GB, too much to copy. The array
        is marked read-only; the caller must keep no writable reference.
        """
        self = object.__new__(cls)
        self._own(tuple(names), values, info)
        return self

    def _own(self, names: tuple[str, ...], values: NDArray[np.floating], info: Mapping[str, Any] | None) -> None:
        values.flags.writeable = False
        # Kept as a view of the frozen array: numpy refuses to make a view
        # writeable again while its base is read-only.
        self._names = names
        self._values = values.view()
        # Facts about how the matrix was made (model, sites used, warnings),
        # carried along to the summary and the report.
        self.info = dict(info or {})

    @property
    def names(self) -> tuple[str, ...]:
        """Taxon names (tuple of str), in row order."""
        return self._names

    @property
    def values(self) -> NDArray[np.floating]:
        """The read-only n x n distance array."""
        return self._values

    def __reduce__(self) -> tuple[Callable[..., DistanceMatrix], tuple[Any, ...]]:
        # Unpickled arrays come back writeable: freeze again on arrival.
        return _unpickle, (self._names, np.asarray(self._values), self.info)

    def __len__(self) -> int:
        return len(self.names)

    def __repr__(self) -> str:
        return f"DistanceMatrix({len(self.names)} taxa)"

    def index(self, name: str) -> int:
        """Row of a taxon name."""
        try:
            return self.names.index(name)
        except ValueError:
            raise InputError(f"taxon {name!r} is not in the matrix") from None

    def to_tsv(self) -> str:
        """The labelled TSV text of the matrix.

        Raises
        ------
        InputError
            When a name cannot stand in a TSV cell (a tab or line break, or
            spaces at its ends, which a reader strips).
        """
        return format_distance_tsv(self)

    def write(self, path: str | os.PathLike[str]) -> None:
        """Write the labelled TSV to ``path`` (atomically: a temporary file in
        the same folder, renamed into place when complete)."""
        write_text_atomic(path, self.to_tsv())

    def condensed(self) -> NDArray[np.floating]:
        """The distances above the diagonal, row by row, as one vector: the
        condensed form of ``scipy.spatial.distance.squareform`` and
        ``scipy.cluster.hierarchy.linkage``.

        Returns
        -------
        ndarray, shape (n * (n - 1) // 2,)
            A new array of the matrix's dtype: ``d(0,1), d(0,2), ...,
            d(0,n-1), d(1,2), ...``.

        Examples
        --------
        >>> DistanceMatrix(["a", "b", "c"], [[0, 1, 2], [1, 0, 3], [2, 3, 0]]).condensed()
        array([1., 2., 3.])
        """
        v = self._values
        n = v.shape[0]
        out = np.empty(n * (n - 1) // 2, dtype=v.dtype)
        start = 0
        for i in range(n - 1):  # one slice per row: no index arrays as large as the output
            out[start:start + n - 1 - i] = v[i, i + 1:]
            start += n - 1 - i
        return out

    def to_pandas(self) -> Any:
        """The matrix as a ``pandas.DataFrame`` (a copy) with the taxon names
        as its index and columns.

        Returns
        -------
        pandas.DataFrame

        Raises
        ------
        InputError
            When pandas is not installed, naming the package to install.

        Examples
        --------
        >>> DistanceMatrix(["a", "b"], [[0, 0.5], [0.5, 0]]).to_pandas().loc["a", "b"]
        np.float64(0.5)
        """
        try:
            import pandas
        except ModuleNotFoundError:
            raise InputError("DistanceMatrix.to_pandas needs the pandas package; install it "
                             "(pip install pandas)") from None
        return pandas.DataFrame(np.array(self._values), index=list(self._names), columns=list(self._names))

    def _repr_html_(self) -> str:
        """A small HTML table of the matrix for notebooks: the first
        :data:`HTML_MAX_TAXA` rows and columns, with a note when there are
        more; names HTML-escaped."""
        n = len(self._names)
        k = min(n, HTML_MAX_TAXA)
        names = [escape(x) for x in self._names[:k]]
        cells = np.asarray(self._values[:k, :k], dtype=np.float64).tolist()
        head = "".join(f"<th>{x}</th>" for x in names)
        rows = ["<tr><th></th>" + head + "</tr>"]
        for name, row in zip(names, cells):
            rows.append(f"<tr><th>{name}</th>" + "".join(f"<td>{x:.6g}</td>" for x in row) + "</tr>")
        note = f"{n} taxa" + (f", showing the first {k}" if k < n else "")
        return (f"<table>\n<caption>DistanceMatrix: {note}</caption>\n" + "\n".join(rows) + "\n</table>")


def _unpickle(names: tuple[str, ...], values: NDArray[np.floating], info: dict[str, Any]) -> DistanceMatrix:
    return DistanceMatrix._adopt(names, values, info=info)


_KINDS = {"c": "complex", "b": "true/false", "O": "Python objects", "U": "text", "S": "bytes", "M": "date",
          "m": "time span", "V": "structured"}


def _as_names(names: Iterable[object], source: str | None) -> tuple[str, ...]:
    try:
        return tuple(str(x) for x in names)
    except TypeError:
        raise InputError(f"names is {type(names).__name__}, not a sequence of taxon names; give one name per row",
                         source=source) from None


def as_float_dtype(dtype: DTypeLike, source: str | None = None) -> np.dtype[np.floating]:
    """``dtype`` as a numpy float dtype a matrix may hold.

    Parameters
    ----------
    dtype : numpy.float64 or numpy.float32 (or their names)
    source : str, optional
        File name to put in error messages.

    Returns
    -------
    numpy.dtype

    Raises
    ------
    InputError
        For any other dtype.
    """
    try:
        dt = np.dtype(dtype)
    except TypeError:
        dt = None
    if dt is None or dt not in (np.dtype(np.float64), np.dtype(np.float32)):  # None == float64 to numpy
        raise InputError(f"dtype={dtype!r} is not supported; give numpy.float64 or numpy.float32", source=source)
    return cast("np.dtype[np.floating]", dt)  # one of the two float dtypes, checked above


def _as_values(values: ArrayLike, dtype: np.dtype[np.floating], source: str | None) -> NDArray[np.floating]:
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


def check_distance_matrix(names: Sequence[str], values: NDArray[np.floating], source: str | None = None,
                          where: Callable[[int, int], str] | None = None) -> None:
    """Check that ``values`` is a distance matrix for ``names``: square, one
    row per unique name, finite, non-negative, zero diagonal, symmetric.

    Parameters
    ----------
    names : sequence of str
    values : ndarray, shape (n, n)
    source : str, optional
        File name to put in error messages.
    where : callable, optional
        ``where(i, j)`` gives the file position of cell (i, j) for messages.

    Raises
    ------
    InputError
        Naming the first problem (and its position) and the fix.
    """
    _check_shape(names, values, source)
    _check_values(names, values, source, where)


def _check_shape(names: Sequence[str], values: NDArray[np.floating], source: str | None) -> None:
    n = len(names)
    if values.ndim != 2 or values.shape[0] != values.shape[1]:
        raise InputError(f"the matrix is {values.shape}, not square; give one row and one column per taxon",
                         source=source)
    if values.shape[0] != n:
        raise InputError(f"{n} names for a {values.shape[0]} x {values.shape[0]} matrix; give one name per row",
                         source=source)
    seen: dict[str, int] = {}
    for i, name in enumerate(names):
        if name in seen:
            raise InputError(f"taxon {name!r} appears twice (rows {seen[name] + 1} and {i + 1}); "
                             "give every taxon a unique name", source=source)
        seen[name] = i


def _check_values(names: Sequence[str], values: NDArray[np.floating], source: str | None,
                  where: Callable[[int, int], str] | None = None) -> None:
    def at(i: int, j: int) -> str:
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
