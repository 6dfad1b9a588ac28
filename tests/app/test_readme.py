"""The README's Quick start: exactly two commands, and CI runs the second (the project's own rule)."""

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def _quick_start_commands():
    text = (ROOT / "README.md").read_text()
    section = text.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    return [block.strip() for block in re.findall(r"```sh\n(.*?)```", section, re.S)]


def test_quick_start_has_two_commands_each_with_its_own_environment():
    commands = _quick_start_commands()
    assert len(commands) == 2
    assert all(c.startswith("python3 -m venv ") and "\n" not in c for c in commands)
    assert "example_alignments/" in commands[0] and "pytest" in commands[1]


def test_ci_runs_the_readme_test_command():
    assert _quick_start_commands()[1] in (ROOT / ".ci" / "run").read_text()


def _using_it_commands():
    text = (ROOT / "README.md").read_text()
    section = text.split("## Using it", 1)[1].split("\n## ", 1)[0]
    block = re.findall(r"```sh\n(.*?)```", section, re.S)[0]
    return [line for line in block.splitlines() if line.startswith("cladewright ")]


def test_using_it_commands_run_on_the_bundled_example(tmp_path, monkeypatch):
    # source: the README itself (each command as printed, run from the root of a clone after the quick start),
    # and example_alignments/README.md: each species is a clade of the true tree, the largest of at most six
    # leaves, so a sensible threshold gives groups of one species each, several of them real groups
    import shlex

    from click.testing import CliRunner

    from cladewright.cli import main

    (tmp_path / "example_alignments").symlink_to(ROOT / "example_alignments")
    monkeypatch.chdir(tmp_path)
    quick = "cladewright " + _quick_start_commands()[0].split(".venv/bin/cladewright ", 1)[1]
    runner = CliRunner()
    for line in [quick] + _using_it_commands():
        result = runner.invoke(main, shlex.split(line)[1:])
        assert result.exit_code == 0, (line, result.stderr)
    rows = [r.split("\t") for r in (tmp_path / "groups.tsv").read_text().splitlines()[1:]]
    species: dict[str, set[str]] = {}
    for taxon, group, _ in rows:
        species.setdefault(group, set()).add(taxon.split("_")[1])
    assert all(len(s) == 1 for s in species.values())  # no group mixes species
    sizes = [sum(1 for r in rows if r[1] == g) for g in species]
    assert sum(1 for s in sizes if s > 1) >= 5  # real groups, not singletons
