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
