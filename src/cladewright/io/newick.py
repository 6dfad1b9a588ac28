"""Internal: the Newick parser behind cladewright.read_trees and cladewright.parse_newick.

Reading trees in Newick format into plain arrays.

Reading follows the Newick format (the trade's de facto standard, 1986
informal specification): labels may be quoted with ``'...'`` (``''`` for an
inner quote); in a Newick text an unquoted label is kept as written,
underscores included (that specification reads an unquoted ``_`` as a blank,
but most software today keeps it, and cladewright's writer leaves such labels
bare: common practice; a quoted label is exact under either rule), while in a
NEXUS TREE command an unquoted ``_`` is a blank, as NEXUS defines it
(Maddison, Swofford & Maddison 1997); comments
in square brackets are skipped, except that ``[&R]`` / ``[&U]`` before a tree
says whether it is rooted. A numeric internal label is read as a support
value (its text kept beside it, so that support a tool did not compute is
written back exactly as read), any other internal label is kept. The tokenizer and parser are
iterative, so very deep trees do not hit a recursion limit.

The parser returns each tree as a :class:`TreeRecord` of plain arrays;
:mod:`cladewright.io.readers` makes :class:`~cladewright.tree.Tree` objects
of them, and :mod:`cladewright.io.newick_writer` writes trees back.
"""

from __future__ import annotations

import math
import re
from typing import NamedTuple, NoReturn, Union, cast

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError

__all__ = ["TreeRecord", "parse_newick_records", "parse_tree_span", "text_position", "read_number"]

_TOKEN = re.compile(
    r"(?P<ws>\s+)"
    r"|(?P<comment>\[[^\]]*\])"
    r"|(?P<quoted>'(?:[^']|'')*')"
    r"|(?P<punct>[(),:;])"
    r"|(?P<word>[^\s()\[\],:;']+)"
    r"|(?P<bad>.)",
    re.S,
)

_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")


class TreeRecord(NamedTuple):
    """One tree as read from text, in plain values (the arguments of
    :class:`~cladewright.tree.Tree`).

    Attributes
    ----------
    parent : int64 ndarray, shape (m,)
        Parent of each node, ``-1`` for the root; leaves are ``0..n-1`` in
        the order they appear in the text.
    length : float64 ndarray, shape (m,)
        Branch lengths, ``nan`` where none was given.
    leaf_names : tuple of str
    support : float64 ndarray, shape (m,)
        Numeric internal labels, ``nan`` elsewhere.
    labels : list of (str or None)
        Non-numeric internal labels.
    support_text : list of (str or None)
        The text each support value was read from.
    rooted : bool
    offset : int
        Where the tree starts in the text, for messages.
    """

    parent: NDArray[np.int64]
    length: NDArray[np.float64]
    leaf_names: tuple[str, ...]
    support: NDArray[np.float64]
    labels: list[str | None]
    support_text: list[str | None]
    rooted: bool
    offset: int


# A node's label while a tree is read: a name, a (support value, its text)
# pair, or None.
_Label = Union[str, tuple[float, str], None]


def text_position(text: str, pos: int) -> str:
    """'line L, column C' of offset ``pos`` of ``text`` (both 1-based).

    Parameters
    ----------
    text : str
    pos : int

    Returns
    -------
    str
    """
    line = text.count("\n", 0, pos) + 1
    col = pos - (text.rfind("\n", 0, pos) + 1) + 1
    return f"line {line}, column {col}"


def read_number(word: str) -> float | None:
    """float of ``word`` if it is a plain, finite decimal number, else None.

    Parameters
    ----------
    word : str

    Returns
    -------
    float or None
    """
    if _NUMBER.fullmatch(word):
        x = float(word)
        if math.isfinite(x):
            return x
    return None


def parse_newick_records(text: str, source: str | None = None) -> list[TreeRecord]:
    """All trees of a Newick text, as plain values.

    Parameters
    ----------
    text : str
        One or more trees, each ending in ``;`` (one per line or several on a
        line).
    source : str, optional
        File name used in error messages.

    Returns
    -------
    list of TreeRecord

    Raises
    ------
    InputError
        On malformed text, naming the line and column and the fix.

    References
    ----------
    Newick format: the trade's de facto standard (1986 informal specification).
    """
    records = parse_tree_span(text, 0, len(text), source, blank_underscores=False)
    if not records:
        raise InputError("no tree found (the text is empty); give at least one tree ending in ';'",
                         source=source)
    return records


def parse_tree_span(text: str, start: int, end: int, source: str | None = None,
                    expect_one: bool = False, blank_underscores: bool = True) -> list[TreeRecord]:
    """The trees of ``text[start:end]`` as plain values; positions in errors
    refer to ``text`` (a NEXUS TREE command is such a span).

    Parameters
    ----------
    text : str
    start, end : int
        The span to read.
    source : str, optional
        File name used in error messages.
    expect_one : bool
        Refuse text after the first tree.
    blank_underscores : bool
        Read an unquoted ``_`` as a blank: the rule of NEXUS (Maddison,
        Swofford & Maddison 1997) and of the 1986 Newick specification.
        :func:`parse_newick_records` reads Newick text with False (kept).

    Returns
    -------
    list of TreeRecord
        Empty when the span holds nothing but blanks and comments.

    Raises
    ------
    InputError
        On malformed text, naming the line and column and the fix.
    """
    trees: list[TreeRecord] = []

    def fail(pos: int, what: str) -> NoReturn:
        raise InputError(f"{text_position(text, pos)}: {what}", source=source)

    # per-tree state; node data indexed by creation order
    par: list[int] = []
    lab: list[_Label] = []
    ln: list[float] = []
    internal: list[bool] = []
    npos: list[int] = []
    stack: list[int] = []
    state = 0  # 0 tree start, 1 expect node, 2 after node, 3 expect length, 4 after length
    rooted_flag: bool | None = None
    cur = -1
    has_label = False
    tree_start: int | None = None
    last_pos = start
    for mt in _TOKEN.finditer(text, start, end):
        kind = mt.lastgroup
        if kind == "ws":
            continue
        tok = mt.group()
        pos = mt.start()
        last_pos = pos
        if kind == "comment":
            if state == 0:
                body = tok[1:-1].strip().upper()
                if body == "&R":
                    rooted_flag = True
                elif body == "&U":
                    rooted_flag = False
            continue
        if kind == "bad":
            if tok == "'":
                fail(pos, "a quoted label is never closed; add the closing \"'\" (write '' for a quote inside)")
            if tok == "[":
                fail(pos, "a comment '[' is never closed; add the ']'")
            fail(pos, f"unexpected {tok!r}; remove it or quote the label that holds it")
        if kind == "quoted" or kind == "word":
            if kind == "quoted":
                label = tok[1:-1].replace("''", "'")
            else:  # see the module docstring on underscores
                label = tok.replace("_", " ") if blank_underscores else tok
            if state <= 1:
                if trees and expect_one and state == 0:
                    fail(pos, "text after the end of the tree; a TREE command holds one tree")
                if state == 0:
                    tree_start = pos
                par.append(stack[-1] if stack else -1)
                lab.append(label)
                ln.append(math.nan)
                internal.append(False)
                npos.append(pos)
                cur = len(par) - 1
                has_label = True
                state = 2
            elif state == 2 and internal[cur] and not has_label:
                if kind == "word":
                    # unquoted numbers on internal nodes are support values;
                    # their text is kept so a tool can write them back as read
                    value = read_number(tok)
                    lab[cur] = (value, tok) if value is not None else label
                else:
                    lab[cur] = label
                has_label = True
            elif state == 3:
                value = read_number(tok) if kind == "word" else None
                if value is None:
                    fail(pos, f"bad branch length {tok!r} after ':'; give a number such as 0.05")
                ln[cur] = value
                state = 4
            else:
                fail(pos, f"unexpected label {tok!r}; a node has one label (quote labels holding spaces, "
                          "or join words with '_'), or a ',' is missing")
            continue
        # punctuation
        if tok == "(":
            if state > 1:
                fail(pos, "unexpected '('; a ',' is probably missing before it")
            if state == 0:
                tree_start = pos
                if trees and expect_one:
                    fail(pos, "text after the end of the tree; a TREE command holds one tree")
            par.append(stack[-1] if stack else -1)
            lab.append(None)
            ln.append(math.nan)
            internal.append(True)
            npos.append(pos)
            stack.append(len(par) - 1)
            state = 1
        elif tok == ":":
            if state <= 1:
                fail(pos, "a branch length for a leaf with no name; give every leaf a name")
            if state != 2:
                fail(pos, "a second ':' for the same node; give one branch length per node")
            state = 3
        elif tok == "," or tok == ")":
            if state <= 1:
                if state == 0:
                    fail(pos, f"unexpected {tok!r} before any '('; check the parentheses")
                fail(pos, f"a leaf with no name before {tok!r}; give every leaf a name")
            if state == 3:
                fail(pos, f"':' not followed by a branch length before {tok!r}; give a number after ':'")
            if not stack:
                fail(pos, f"unbalanced {tok!r}: there is no open '(' for it; check the parentheses")
            if tok == ",":
                state = 1
            else:
                cur = stack.pop()
                has_label = False
                state = 2
        else:  # ';'
            if state == 0:
                fail(pos, "an empty tree (';' with nothing before it); remove the extra ';'")
            if state == 1:
                fail(pos, "a leaf with no name before ';'; give every leaf a name or close the parentheses")
            if state == 3:
                fail(pos, "':' not followed by a branch length before ';'; give a number after ':'")
            if stack:
                fail(pos, f"unbalanced parentheses: {len(stack)} '(' not closed when the tree ends; "
                          "add the missing ')'")
            trees.append(_make_record(text, par, lab, ln, internal, npos, rooted_flag, source))
            par, lab, ln, internal, npos = [], [], [], [], []
            state, rooted_flag, cur, tree_start = 0, None, -1, None
    if state != 0:
        if stack:
            assert tree_start is not None  # set where the tree's first '(' was read
            fail(tree_start, f"unbalanced parentheses: {len(stack)} '(' not closed at the end of the text; "
                             "add the missing ')' and ';'")
        fail(last_pos, "the tree does not end with ';'; add ';' after the tree")
    return trees


def _make_record(text: str, par: list[int], lab: list[_Label], ln: list[float], internal: list[bool],
                 npos: list[int], rooted_flag: bool | None, source: str | None) -> TreeRecord:
    """The tree's nodes renumbered (leaves first, in the order read) as a TreeRecord."""
    is_internal = np.array(internal, dtype=bool)
    total = is_internal.size
    leaf_tmp = np.flatnonzero(~is_internal)
    int_tmp = np.flatnonzero(is_internal)
    n = leaf_tmp.size
    new_id = np.empty(total, np.int64)
    new_id[leaf_tmp] = np.arange(n)
    new_id[int_tmp] = n + np.arange(int_tmp.size)
    names = cast("list[str]", [lab[i] for i in leaf_tmp.tolist()])  # a leaf's label is its name
    if len(set(names)) != n:
        first: dict[_Label, int] = {}
        for i in leaf_tmp.tolist():
            if lab[i] in first:
                earlier = text_position(text, npos[first[lab[i]]])
                raise InputError(f"{text_position(text, npos[i])}: leaf name {lab[i]!r} is used twice in one "
                                 f"tree (first at {earlier}); give every leaf a unique name", source=source)
            first[lab[i]] = i
    old_par = np.array(par, dtype=np.int64)
    parent = np.empty(total, np.int64)
    has_par = old_par >= 0
    parent[new_id[has_par]] = new_id[old_par[has_par]]
    parent[new_id[~has_par]] = -1
    length = np.empty(total, np.float64)
    length[new_id] = np.array(ln, dtype=np.float64)
    support = np.full(total, np.nan)
    labels: list[str | None] = [None] * total
    texts: list[str | None] = [None] * total
    base = n
    for j, i in enumerate(int_tmp.tolist()):
        x = lab[i]
        if x is None:
            continue
        if isinstance(x, tuple):
            support[base + j], texts[base + j] = x
        else:
            labels[base + j] = x
    root = int(new_id[np.flatnonzero(~has_par)[0]])
    if rooted_flag is None:
        rooted = root >= n and int(np.count_nonzero(parent == root)) == 2
    else:
        rooted = rooted_flag
    return TreeRecord(parent, length, tuple(names), support, labels, texts, bool(rooted), npos[0])
