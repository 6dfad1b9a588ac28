"""A 50,000-leaf caterpillar through every command that reads trees: no recursion limit anywhere
(every traversal iterative: common practice for tree software; a caterpillar is the deepest tree), and
each command's answer checked against the caterpillar's known structure.

The caterpillar ((((t0:1,t1:1):1,t2:1):1,...):1,t{N-1}:1) has, by construction: N leaves and N - 1
internal nodes; t0 and t1 at depth N - 1 (the deepest); clades of every size 2..N (clade k holds
t0..tk); 2N - 2 branches of length 1; and a path of N unit branches between its two ends t0 and t{N-1}.
The checks below compute the same quantities from the trees read back with a plain walk over the parent
array written in this file, independent of the package's traversals.
"""

import math
import re

import numpy as np
import pytest
from click.testing import CliRunner

from cladewright.cli import main
from cladewright.io import read_trees

N = 50_000
END = f"t{N - 1}"


@pytest.fixture(scope="module")
def caterpillar(tmp_path_factory):
    """((((t0:1,t1:1):1,t2:1):1,...) with N leaves, as Newick text (unit lengths)."""
    path = tmp_path_factory.mktemp("deep") / "caterpillar.nwk"
    path.write_text("(" * (N - 1) + "t0:1,t1:1)" + "".join(f":1,t{i}:1)" for i in range(2, N)) + ";\n")
    return path


def _ok(args):
    result = CliRunner().invoke(main, ["--quiet"] + [str(a) for a in args])
    assert result.exit_code == 0, result.output
    return result


def _plain(tree):
    """Per node: depth in branches, root-to-node path length and the number of leaves below, by a
    memoised walk up the parent array (linear, no recursion)."""
    parent = tree.parent.tolist()
    length = [0.0 if math.isnan(x) else x for x in tree.length.tolist()]
    m = len(parent)
    depth, dist = [-1] * m, [0.0] * m
    for v in range(m):
        path, u = [], v
        while u != -1 and depth[u] < 0:
            path.append(u)
            u = parent[u]
        for w in reversed(path):
            p = parent[w]
            depth[w], dist[w] = (0, 0.0) if p == -1 else (depth[p] + 1, dist[p] + length[w])
    size = [1 if v < tree.n_leaves else 0 for v in range(m)]
    for v in sorted(range(m), key=depth.__getitem__, reverse=True):
        if parent[v] != -1:
            size[parent[v]] += size[v]
    return depth, dist, size, sum(length)


def _leaf(tree, name):
    return tree.leaf_names.index(name)


def test_reading_gives_the_whole_tree(caterpillar):
    tree = read_trees(caterpillar)[0]
    assert tree.n_leaves == N and tree.n_nodes == 2 * N - 1
    depth, dist, size, total = _plain(tree)
    deepest = [tree.leaf_names[v] for v in range(N) if depth[v] == N - 1]
    assert max(depth) == N - 1 and sorted(deepest) == ["t0", "t1"]
    # the root is where the paths from the two ends meet, so their path length is the sum
    assert dist[_leaf(tree, "t0")] + dist[_leaf(tree, END)] == N
    assert sorted(size[N:]) == list(range(2, N + 1))
    assert total == 2 * N - 2


def _args(command, caterpillar, tmp_path):
    return [a.format(t=caterpillar, d=tmp_path) for a in command]


def test_midpoint_root(caterpillar, tmp_path):
    # Midpoint rooting puts the root halfway along the longest leaf-to-leaf path (common practice), here
    # the N-branch path from t0 to t{N-1}: both ends at N/2 from the root, no leaf further.
    args = _args(["root", "{t}", "-o", "{d}/rooted.nwk", "--root", "midpoint"], caterpillar, tmp_path)
    _ok(args)
    out = read_trees(tmp_path / "rooted.nwk")[0]
    assert out.n_leaves == N
    _, dist, _, total = _plain(out)
    assert dist[_leaf(out, "t0")] == dist[_leaf(out, END)] == N / 2 == max(dist[:N])
    assert total == 2 * N - 2  # rooting moves the root, never a length


def test_outgroup_root(caterpillar, tmp_path):
    args = _args(["root", "{t}", "-o", "{d}/rooted.nwk", "--root", "outgroup:t0"], caterpillar, tmp_path)
    _ok(args)
    out = read_trees(tmp_path / "rooted.nwk")[0]
    _, dist, size, total = _plain(out)
    kids = [v for v in range(out.n_nodes) if out.parent[v] == out.root]
    # the outgroup is one side of the root, every other leaf the other side
    assert _leaf(out, "t0") in kids and sorted(size[v] for v in kids) == [1, N - 1]
    assert dist[_leaf(out, "t0")] + dist[_leaf(out, END)] == N and total == 2 * N - 2


def test_clusters(caterpillar, tmp_path):
    # Stored root: clade k (t0..tk) has diameter k + 1 for k >= 2 (t0 to tk) and 2 for k = 1, so the
    # largest clade within 3 is t0, t1, t2; every other leaf stands alone: N - 2 groups.
    _ok(_args(["clusters", "{t}", "--within", "3", "-o", "{d}/groups.tsv"], caterpillar, tmp_path))
    rows = [line.split("\t") for line in (tmp_path / "groups.tsv").read_text().splitlines()[1:]]
    group = {taxon: g for taxon, g, _ in rows}
    assert len(group) == N and len(set(group.values())) == N - 2
    assert group["t0"] == group["t1"] == group["t2"]
    assert sum(1 for g in group.values() if g == group["t0"]) == 3


def test_show(caterpillar):
    # one line per leaf, each leaf once, then the scale line
    lines = _ok(["show", caterpillar]).output.splitlines()
    leaves = [m.group(1) for m in map(re.compile(r" (t[0-9]+)$").search, lines) if m]
    assert len(lines) == N + 1 and sorted(leaves) == sorted(f"t{i}" for i in range(N))


def test_support_of_a_tree_by_itself(caterpillar, tmp_path):
    # Each split of a tree is in the one replicate, the tree itself: FBP 100% (Felsenstein 1985); a
    # rooted binary tree of N leaves has N - 3 nontrivial splits, one branch at the root repeating another.
    _ok(_args(["tally", "{t}", "--onto", "{t}", "-o", "{d}/supported.nwk"], caterpillar, tmp_path))
    out = read_trees(tmp_path / "supported.nwk")[0]
    assert out.n_leaves == N
    shown = out.support[~np.isnan(out.support)]
    assert shown.size == N - 3 and np.all(shown == 100)


def test_consensus_of_one_tree_is_the_tree(caterpillar, tmp_path):
    # Majority-rule consensus (Margush & McMorris 1981) of one tree has that tree's splits: the caterpillar's
    # split k separates t0..tk from the rest, k = 1..N-3, each in 1 of 1 trees (100%).
    _ok(_args(["consensus", "{t}", "-o", "{d}/consensus.nwk"], caterpillar, tmp_path))
    out = read_trees(tmp_path / "consensus.nwk")[0]
    assert out.n_leaves == N
    _, _, size, _ = _plain(out)
    inner = [v for v in range(N, out.n_nodes) if out.parent[v] != -1]
    sides = sorted(min(size[v], N - size[v]) for v in inner)
    assert sides == sorted(min(k + 1, N - k - 1) for k in range(1, N - 2))
    assert np.all(out.support[inner] == 100)


def test_compare_a_tree_with_itself(caterpillar):
    # Robinson & Foulds (1981): a tree is at distance 0 from itself; the largest distance for N leaves is
    # 2(N - 3), and all N - 3 nontrivial splits are shared.
    output = _ok(["compare", caterpillar, caterpillar]).output
    assert re.search(rf"^Robinson–Foulds distance\s+0 of at most {2 * (N - 3)} ", output, re.M), output
    assert re.search(rf"^splits shared\s+{N - 3}$", output, re.M), output


def test_draw(caterpillar, tmp_path):
    _ok(_args(["draw", "{t}", "-o", "{d}/tree.png"], caterpillar, tmp_path))
    data = (tmp_path / "tree.png").read_bytes()
    # PNG (ISO/IEC 15948): the 8-byte signature, then the IHDR chunk with width and height
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR"
    width, height = int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")
    assert width > 0 and height > 0
