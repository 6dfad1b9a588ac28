"""Reading and writing trees in Newick format.

Reading follows the Newick format (the trade's de facto standard, 1986
informal specification): labels may be quoted with ``'...'`` (``''`` for an
inner quote); an unquoted label has its underscores read as spaces; comments
in square brackets are skipped, except that ``[&R]`` / ``[&U]`` before a tree
says whether it is rooted. A numeric internal label is read as a support
value (its text kept beside it, so that support a tool did not compute is
written back exactly as read), any other internal label is kept. The tokenizer and parser are
iterative, so very deep trees do not hit a recursion limit.

Writing quotes every label that would not read back exactly.
"""

from __future__ import annotations

import math
import re

import numpy as np

from ..errors import InputError

__all__ = ["parse_newick", "format_newick", "quote_label", "format_length", "format_support"]

_TOKEN = re.compile(
    r"(?P<ws>\s+)"
    r"|(?P<comment>\[[^\]]*\])"
    r"|(?P<quoted>'(?:[^']|'')*')"
    r"|(?P<punct>[(),:;])"
    r"|(?P<word>[^\s()\[\],:;']+)"
    r"|(?P<bad>.)",
    re.S,
)

# Characters that cannot stand in an unquoted label (whitespace is tested
# separately); '_' is here because a reader turns it into a space.
_NEEDS_QUOTES = re.compile(r"[\s()\[\]':;,_]|[^\x21-\x7e]")
_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")


def _where(text, pos):
    """'line L, column C' of offset ``pos`` (1-based)."""
    line = text.count("\n", 0, pos) + 1
    col = pos - (text.rfind("\n", 0, pos) + 1) + 1
    return f"line {line}, column {col}"


def _number(word):
    """float of ``word`` if it is a plain decimal number, else None."""
    if _NUMBER.fullmatch(word):
        x = float(word)
        if math.isfinite(x):
            return x
    return None


def parse_newick(text, source=None):
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
    trees = _parse_span(text, 0, len(text), source)
    if not trees:
        raise InputError("no tree found (the text is empty); give at least one tree ending in ';'",
                         source=source)
    return trees


def _parse_span(text, start, end, source, expect_one=False):
    """Trees in ``text[start:end]``; positions in errors refer to ``text``."""
    trees = []

    def fail(pos, what):
        raise InputError(f"{_where(text, pos)}: {what}", source=source)

    # per-tree state; node data indexed by creation order
    par, lab, ln, internal, npos = [], [], [], [], []
    stack = []
    state = 0  # 0 tree start, 1 expect node, 2 after node, 3 expect length, 4 after length
    rooted_flag = None
    cur = -1
    has_label = False
    tree_start = None
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
            else:
                label = tok.replace("_", " ")
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
                    value = _number(tok)
                    lab[cur] = (value, tok) if value is not None else label
                else:
                    lab[cur] = label
                has_label = True
            elif state == 3:
                value = _number(tok) if kind == "word" else None
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
            trees.append(_make_tree(text, par, lab, ln, internal, npos, rooted_flag, source))
            par, lab, ln, internal, npos = [], [], [], [], []
            state, rooted_flag, cur, tree_start = 0, None, -1, None
    if state != 0:
        if stack:
            fail(tree_start, f"unbalanced parentheses: {len(stack)} '(' not closed at the end of the text; "
                             "add the missing ')' and ';'")
        fail(last_pos, "the tree does not end with ';'; add ';' after the tree")
    return trees


def _make_tree(text, par, lab, ln, internal, npos, rooted_flag, source):
    from ..tree import Tree
    internal = np.array(internal, dtype=bool)
    total = internal.size
    leaf_tmp = np.flatnonzero(~internal)
    int_tmp = np.flatnonzero(internal)
    n = leaf_tmp.size
    new_id = np.empty(total, np.int64)
    new_id[leaf_tmp] = np.arange(n)
    new_id[int_tmp] = n + np.arange(int_tmp.size)
    names = [lab[i] for i in leaf_tmp.tolist()]
    if len(set(names)) != n:
        first = {}
        for i in leaf_tmp.tolist():
            if lab[i] in first:
                raise InputError(f"{_where(text, npos[i])}: leaf name {lab[i]!r} is used twice in one tree "
                                 f"(first at {_where(text, npos[first[lab[i]]])}); give every leaf a unique name",
                                 source=source)
            first[lab[i]] = i
    old_par = np.array(par, dtype=np.int64)
    parent = np.empty(total, np.int64)
    has_par = old_par >= 0
    parent[new_id[has_par]] = new_id[old_par[has_par]]
    parent[new_id[~has_par]] = -1
    length = np.empty(total, np.float64)
    length[new_id] = np.array(ln, dtype=np.float64)
    support = np.full(total, np.nan)
    labels = [None] * total
    texts = [None] * total
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
    try:
        return Tree(parent, length, names, support=support, labels=labels, rooted=rooted, support_text=texts)
    except ValueError as err:
        # the parser builds valid arrays; this guards a reader from ever
        # failing with anything but InputError
        raise InputError(f"{_where(text, npos[0])}: the tree is not valid ({err}); check the parentheses",
                         source=source) from None


# ---- writing -------------------------------------------------------------

def quote_label(label, numeric_quoted=False):
    """``label`` as a Newick token: bare if it reads back unchanged, else in
    single quotes with inner quotes doubled.

    Parameters
    ----------
    label : str
    numeric_quoted : bool
        Quote a label that looks like a number (internal labels, which a
        reader would take as support).
    """
    if not label or _NEEDS_QUOTES.search(label) or (numeric_quoted and _number(label) is not None):
        return "'" + label.replace("'", "''") + "'"
    return label


def format_length(x, digits=None):
    """Branch length text: ``repr`` (exact round trip) or ``digits``
    significant digits."""
    x = float(x)
    if digits is None:
        return repr(x)
    return format(x, f".{int(digits)}g")


def format_support(x, support_digits=0):
    """Support text: integer percentage, or ``support_digits`` decimals."""
    return format(float(x), f".{int(support_digits)}f")


def _kept_text(tree):
    """Per node, the text a support value was read from while it still reads
    as that value (else None): support a tool moved but did not compute is
    written back exactly as it was read."""
    texts = tree.support_text
    if texts is None:
        return [None] * tree.n_nodes
    support = tree.support.tolist()
    out = [None] * tree.n_nodes
    for v, t in enumerate(texts):
        if t is not None and _number(t) == support[v]:
            out[v] = t
    return out


def _node_texts(tree, digits, support_digits, leaf_text=None):
    """Text after each node's subtree: its label or support and ':length'."""
    n, m = tree.n_leaves, tree.n_nodes
    length, support, labels = tree.length.tolist(), tree.support.tolist(), tree.labels
    names = tree.leaf_names if leaf_text is None else leaf_text
    root = tree.root
    kept = _kept_text(tree)
    out = [""] * m
    for v in range(m):
        if v < n:
            s = quote_label(names[v]) if leaf_text is None else names[v]
        elif v != root and support[v] == support[v]:
            s = kept[v] or format_support(support[v], support_digits)
        elif labels[v] is not None:
            s = quote_label(labels[v], numeric_quoted=True)
        else:
            s = ""
        x = length[v]
        if x == x:
            s = s + ":" + format_length(x, digits)
        out[v] = s
    return out


def _root_comment(tree):
    """'[&R] '/'[&U] ' when a reader's default (rooted iff the root has two
    children) would get the rooting wrong, else ''."""
    two = tree.n_nodes > 1 and tree.children(tree.root).size == 2
    if tree.rooted and not two:
        return "[&R] "
    if not tree.rooted and two:
        return "[&U] "
    return ""


def format_newick(tree, digits=None, support_digits=0, leaf_text=None, root_comment=None):
    """One tree as a Newick line ending in ``";\\n"``.

    Parameters
    ----------
    tree : Tree
    digits : int, optional
        Significant digits of branch lengths (default: exact, ``repr``).
    support_digits : int
        Decimals of support values on internal nodes (0: integer percentages).
        A value read from a file and not replaced since is written exactly
        as it was read (:attr:`Tree.support_text`).
    leaf_text : sequence of str, optional
        Ready-made tokens to write for the leaves instead of their quoted
        names (NEXUS TRANSLATE numbers).
    root_comment : str, optional
        Text written before the tree; default ``[&R]``/``[&U]`` only when
        the shape alone would mislead a reader about the rooting.

    Returns
    -------
    str

    References
    ----------
    Newick format: the trade's de facto standard (1986 informal specification).
    """
    texts = _node_texts(tree, digits, support_digits, leaf_text)
    n = tree.n_leaves
    ptr = tree._ptr.tolist()
    kids = tree._kids.tolist()
    first = [True] * tree.n_nodes
    parent = tree.parent.tolist()
    for v in kids:
        first[v] = kids[ptr[parent[v]]] == v
    out = [_root_comment(tree) if root_comment is None else root_comment]
    emit = out.append
    stack = [tree.root]
    while stack:
        x = stack.pop()
        if x >= 0:
            if not first[x]:
                emit(",")
            if x < n:
                emit(texts[x])
            else:
                emit("(")
                stack.append(~x)
                a, b = ptr[x], ptr[x + 1]
                stack.extend(kids[b - 1:a - 1 if a else None:-1])
        else:
            emit(")")
            emit(texts[~x])
    emit(";\n")
    return "".join(out)
