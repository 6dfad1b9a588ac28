"""A 50,000-leaf caterpillar through every command that reads trees: no recursion limit anywhere
(every traversal iterative: common practice for tree software; a caterpillar is the deepest tree)."""

import pytest
from click.testing import CliRunner

from cladewright.cli import main
from cladewright.io import read_trees

N = 50_000


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


def test_reading_gives_the_whole_tree(caterpillar):
    tree = read_trees(caterpillar)[0]
    assert tree.n_leaves == N


@pytest.mark.parametrize("command", [
    ["root", "{t}", "-o", "{d}/rooted.nwk", "--midpoint"],
    ["root", "{t}", "-o", "{d}/rooted.nwk", "--outgroup", "t0"],
    ["clusters", "{t}", "--within", "3", "-o", "{d}/groups.tsv"],
    ["show", "{t}"],
    ["support", "{t}", "{t}", "-o", "{d}/supported.nwk"],
    ["consensus", "{t}", "-o", "{d}/consensus.nwk"],
    ["compare", "{t}", "{t}"],
    ["draw", "{t}", "-o", "{d}/tree.png"],
])
def test_every_command_takes_a_deep_caterpillar(caterpillar, tmp_path, command):
    args = [a.format(t=caterpillar, d=tmp_path) for a in command]
    result = _ok(args)
    if command[0] in ("root", "support", "consensus"):
        out = read_trees(args[args.index("-o") + 1])[0]
        assert out.n_leaves == N
    if command[0] == "compare":
        assert "0" in result.output  # the RF distance of a tree to itself (Robinson & Foulds 1981)
