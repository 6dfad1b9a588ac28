"""The command line: parse options, call the library, report. No computation here.

:mod:`.app` holds the command group :func:`main` and what every command shares (the
``--root RULE`` option, the summaries' ``output`` line, one-line usage errors, ``--quiet`` and
``--debug`` after any command); each command module registers its commands on it when imported here:
:mod:`.build` (distances, tree), :mod:`.lengths` (lengths), :mod:`.support` (tally, consensus) and
:mod:`.tools` (root, compare, clusters, draw, show). :mod:`.summary` words the summaries the
commands print, :mod:`.wording` turns the library's parameter spellings into options, and
:mod:`.record` makes the settings and the command line a report records to re-run a run.
The console script ``cladewright`` runs :func:`main`.
"""

from __future__ import annotations

from . import build, lengths, support, tools  # noqa: F401 - each registers its commands on main
from .app import main

__all__ = ["main"]
