"""The public API: every name in ``cladewright.__all__`` resolves, and the README's Python example runs.

Sources: the names the public API must offer are those of issue 12 ("a curated cladewright/__init__.py
re-exports every public name (rooting, clusters, tree writing and figures included)") and those the README and
the guide (docs/*.md) call as ``cw.NAME`` or ``cladewright.NAME``; the example is the README's own code block,
run as written (only the example file's path is made absolute). Its output is checked against the example
alignment as read by Biopython (a reference reader) and against Biopython's Newick reader.
"""

import io
import re
from pathlib import Path

import pytest

import cladewright


def _root():
    here = Path(__file__).resolve()
    # tests may sit one folder deeper (tests/<stage>/); the repository root holds pyproject.toml
    return next(p for p in here.parents if (p / "pyproject.toml").is_file())


ROOT = _root()
EXAMPLE = "example_alignments/glass_snails_coi.fasta"

#: The stages and their names, as issue 12's brief for the public API lists them.
EXPECTED = {
    "reading": ["read_alignment", "read_trees", "read_distance_matrix"],
    "nouns": ["Alignment", "DistanceMatrix", "Tree"],
    "distances": ["distance_matrix", "MODELS"],
    "identical sequences": ["identical_groups", "distinct_sequences"],
    "trees": ["build_tree", "build_tree_with_info", "METHODS", "fit_statistic", "tree_from_alignment",
              "collapse_zero_branches", "resolve_polytomies", "attach_identical"],
    "rooting": ["midpoint_root", "outgroup_root", "root_tree"],
    "clusters": ["clusters_within"],
    "support": ["bootstrap", "BootstrapResult", "fbp_support", "tbe_support", "apply_support",
                "majority_consensus", "robinson_foulds", "branch_score"],
    "figures": ["render_tree", "text_tree", "write_report"],
    "errors and warnings": ["CladewrightError", "InputError", "SaturationError", "CladewrightWarning"],
    "version": ["__version__"],
}


def _readme_python():
    blocks = re.findall(r"```python\n(.*?)```", (ROOT / "README.md").read_text(encoding="utf-8"), re.S)
    assert len(blocks) == 1, "the README holds one Python example"
    return blocks[0]


def test_every_name_in_all_resolves():
    missing = [name for name in cladewright.__all__ if not hasattr(cladewright, name)]
    assert not missing
    assert len(cladewright.__all__) == len(set(cladewright.__all__)), "a name is listed twice"


@pytest.mark.parametrize("stage", sorted(EXPECTED))
def test_each_stage_is_exported(stage):
    assert set(EXPECTED[stage]) <= set(cladewright.__all__)


def test_names_the_guide_calls_are_exported():
    # cw.NAME in the README and cladewright.NAME (a function or class, not a module path) in docs/*.md
    texts = [(ROOT / "README.md").read_text(encoding="utf-8")]
    texts += [p.read_text(encoding="utf-8") for p in sorted((ROOT / "docs").glob("*.md"))]
    called = set()
    for text in texts:
        called |= set(re.findall(r"\bcw\.([A-Za-z_]\w*)", text))
        called |= set(re.findall(r"\bcladewright\.([A-Za-z_]\w*)\b(?!\.)", text))
    assert {"read_alignment", "distance_matrix", "build_tree", "bootstrap"} <= called  # the README's own
    not_exported = sorted(called - set(cladewright.__all__))
    assert not not_exported, f"the guide calls these, but cladewright does not export them: {not_exported}"


def test_star_import_gives_exactly_all():
    space = {}
    exec("from cladewright import *", space)  # noqa: S102 - the documented way a user may import
    assert set(space) - {"__builtins__"} == set(cladewright.__all__)


def test_the_readme_python_example_runs(tmp_path, monkeypatch, capsys):
    from Bio import AlignIO, Phylo

    code = _readme_python()
    assert EXAMPLE in code
    code = code.replace(EXAMPLE, str(ROOT / EXAMPLE))
    monkeypatch.chdir(tmp_path)
    exec(compile(code, "README.md", "exec"), {"__name__": "readme_example"})  # noqa: S102
    printed = capsys.readouterr().out.strip()
    # Reference: Biopython reads the example alignment and both trees (the printed one, the written file)
    names = {record.id for record in AlignIO.read(ROOT / EXAMPLE, "fasta")}
    assert len(names) == 30  # the README: "30 glass snails ... 900 sites"
    shown = Phylo.read(io.StringIO(printed), "newick")
    assert {leaf.name for leaf in shown.get_terminals()} == names
    written = tmp_path / "glass_snails_coi.nwk"
    assert written.is_file()
    saved = Phylo.read(written, "newick")
    assert {leaf.name for leaf in saved.get_terminals()} == names
    # 100 replicates (the README's replicates=100): every internal branch but the root's carries a percentage
    support = [c.confidence for c in saved.get_nonterminals() if c is not saved.root]
    assert support and all(s is not None and 0 <= s <= 100 for s in support)
