"""Every docstring example in the package runs and prints what its docstring says.

Source of each checked value: the example's own expected output, as written in the documentation (Python's
doctest, common practice). The examples run from the repository root, so that a path such as
example_alignments/glass_snails_coi.fasta names the bundled example.
"""

import doctest
import importlib
import inspect
import pkgutil
from pathlib import Path

import pytest

import cladewright

ROOT = Path(__file__).resolve().parents[2]
FLAGS = doctest.NORMALIZE_WHITESPACE | doctest.ELLIPSIS


def _modules():
    names = ["cladewright"] + [m.name for m in pkgutil.walk_packages(cladewright.__path__, "cladewright.")]
    return [name for name in names if not name.endswith("__main__")]


MODULES = _modules()


def _has_examples(module):
    try:
        return ">>>" in inspect.getsource(module)
    except (OSError, TypeError):
        return False


def test_the_package_has_examples_to_run():
    # The modules that hold examples at the time of writing (read from the sources): a rename or a lost
    # walk over the package must not leave this file checking nothing.
    with_examples = {name for name in MODULES if _has_examples(importlib.import_module(name))}
    assert {"cladewright", "cladewright.alignment", "cladewright.matrix", "cladewright.draw",
            "cladewright.support.splits", "cladewright.tree"} <= with_examples


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name, monkeypatch):
    monkeypatch.chdir(ROOT)
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=FLAGS, report=True)
    assert result.failed == 0, f"{result.failed} of {result.attempted} examples in {name} failed (see above)"
    # A module whose source shows examples must run some: a skipped or unfound example checks nothing.
    assert (result.attempted > 0) == _has_examples(module), f"{name}: {result.attempted} examples ran"
