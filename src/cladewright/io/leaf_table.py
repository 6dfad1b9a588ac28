"""A table of facts about the taxa (host, place, year...), read to colour a figure's leaves.

The table is tab-separated text (the IANA media type ``text/tab-separated-values``): a header
row of column names, then one row per taxon, the taxon's name in the first column exactly as it
is written in the tree. Plain or gzip-compressed, ``-`` for standard input. Cells are trimmed
of surrounding blanks; blank lines are skipped; a blank cell means "no value" (the taxon is
drawn as not in the table).

References
----------
IANA media type registration ``text/tab-separated-values`` (fields separated by tabs, a
header line of field names, no tabs inside a field).
"""

from __future__ import annotations

import os
from collections.abc import Iterable

from ..errors import InputError
from .files import read_text

__all__ = ["LeafGroups", "read_leaf_groups"]


class LeafGroups(dict[str, str]):
    """Taxon name -> category, for the taxa of a tree that have a value in the chosen column.

    A plain ``dict`` with three more facts about how the table met the tree.

    Attributes
    ----------
    column : str
        The column the categories came from.
    ignored : tuple of str
        Taxa of the table that are not in the tree (their rows are not used).
    missing : tuple of str
        Taxa of the tree with no row in the table, or a blank cell in the column.
    """

    column: str
    ignored: tuple[str, ...]
    missing: tuple[str, ...]

    def __init__(self, values: dict[str, str], column: str, ignored: Iterable[str], missing: Iterable[str]) -> None:
        super().__init__(values)
        self.column = column
        self.ignored = tuple(ignored)
        self.missing = tuple(missing)


def _split(line: str) -> list[str]:
    return [cell.strip() for cell in line.split("\t")]


def read_leaf_groups(path: str | os.PathLike[str], column: str, names: Iterable[str]) -> LeafGroups:
    """The category of each taxon of a tree, from one column of a tab-separated table.

    Parameters
    ----------
    path : str or os.PathLike
        The table: a header row, then one row per taxon with its name in the
        first column (``-`` reads standard input; gzip is unpacked).
    column : str
        The header name of the column whose values are the categories.
    names : iterable of str
        The tree's taxon names; rows for other names are ignored and counted
        (:attr:`LeafGroups.ignored`).

    Returns
    -------
    LeafGroups
        A ``dict`` from taxon name to category, for the taxa of ``names``
        that have a non-blank value in ``column``.

    Raises
    ------
    InputError
        One line naming the file, the line and the fix: an empty file or one
        with a single column, a ``column`` not in the header (the message
        lists the columns), a row with more cells than the header, a row
        without a taxon name, a taxon on two rows, and a table that gives no
        taxon of the tree a value.

    References
    ----------
    IANA media type ``text/tab-separated-values``.

    Example
    -------
    >>> import tempfile
    >>> with tempfile.TemporaryDirectory() as folder:
    ...     path = os.path.join(folder, "taxa.tsv")
    ...     with open(path, "w") as fh:
    ...         _ = fh.write("taxon\\thost\\na\\tbird\\nb\\tfish\\nz\\tbird\\n")
    ...     groups = read_leaf_groups(path, "host", ["a", "b", "c"])
    >>> dict(groups), groups.ignored, groups.missing
    ({'a': 'bird', 'b': 'fish'}, ('z',), ('c',))
    """
    source = "<stdin>" if os.fspath(path) == "-" else os.fspath(path)
    wanted = list(names)
    text = read_text(path)
    rows = [(k + 1, line) for k, line in enumerate(text.split("\n")) if line.strip()]
    if not rows:
        raise InputError("the table is empty; give a header row of tab-separated column names (the taxon name "
                         "first), then one row per taxon", source=source)
    head_line, head = rows[0][0], _split(rows[0][1])
    if len(head) < 2:
        hint = " (it looks comma-separated: save it with tabs between the cells)" if "," in rows[0][1] else ""
        raise InputError(f"line {head_line}: the header has one column{hint}; give the taxon name's column, a "
                         "tab, then at least one more column", source=source)
    key = column.strip()
    places = [c for c, name in enumerate(head) if name == key]
    if not places or places == [0]:
        listed = ", ".join(repr(h) for h in head[1:] if h)
        raise InputError(f"no column {key!r} in the header on line {head_line}; the columns are {listed}",
                         source=source)
    if len(places) > 1:
        raise InputError(f"line {head_line}: column {key!r} appears {len(places)} times (columns "
                         f"{', '.join(str(c + 1) for c in places)}); give each column its own name", source=source)
    col = places[0]
    tree_names = set(wanted)
    seen: dict[str, int] = {}
    values: dict[str, str] = {}
    ignored: list[str] = []
    for lineno, line in rows[1:]:
        cells = _split(line)
        if len(cells) > len(head) and any(cells[len(head):]):
            raise InputError(f"line {lineno} has {len(cells)} cells but the header has {len(head)}; remove the "
                             "extra cells (a taxon name or value may not hold a tab)", source=source)
        name = cells[0]
        if not name:
            raise InputError(f"line {lineno}: no taxon name in the first column; give every row its taxon's "
                             "name", source=source)
        if name in seen:
            raise InputError(f"line {lineno}: taxon {name!r} is also on line {seen[name]}; give each taxon "
                             "one row", source=source)
        seen[name] = lineno
        if name not in tree_names:
            ignored.append(name)
            continue
        value = cells[col] if col < len(cells) else ""
        if value:
            values[name] = value
    if not values:
        if not seen:
            why = "holds a header but no rows"
        elif len(ignored) == len(seen):
            why = (f"names none of the tree's taxa ({len(seen)} rows, e.g. {next(iter(seen))!r}); the first "
                   "column must hold the taxon names exactly as the tree writes them")
        else:
            why = f"gives no taxon of the tree a value in column {key!r}"
        raise InputError(f"the table {why}", source=source)
    missing = [x for x in wanted if x not in values]
    ordered = {x: values[x] for x in wanted if x in values}
    return LeafGroups(ordered, key, ignored, missing)
