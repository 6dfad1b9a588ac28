"""Internal: a part of the command line (run it as the cladewright command).

The table that turns the library's parameter spellings into this command line's options, so
that a library message (``saturated="cap"``) reaches a command-line user as an option
(``--saturated cap``).
"""

from __future__ import annotations

import re

__all__ = ["PARAMETER_OPTIONS", "as_options"]

#: How the library spells a parameter in its messages, and the option of this command line that sets it.
#: The library names its own parameters (``saturated="cap"``); a user of the command line is shown the
#: option (``--saturated cap``). Longer spellings come first, so that none is cut by a shorter one.
PARAMETER_OPTIONS: tuple[tuple[str | re.Pattern[str], str], ...] = (
    ("save_replicates=FILE", "--save-replicates FILE"),
    ('precision="single"', "--precision single"),
    ('alphabet="protein"', "--alphabet protein"),
    ('saturated="cap"', "--saturated cap"),
    ('freqs="alignment"', "--freqs alignment"),
    ("gamma_categories=", "--gamma-categories "),
    ("gamma=ALPHA", "--gamma-shape ALPHA"),
    ('freqs="model"', "--freqs model"),
    ('gaps="pairwise"', "--gaps pairwise"),
    ('alphabet="dna"', "--alphabet dna"),
    ("scheduler needs", "--scheduler needs"),
    ('method="nj"', "--method nj"),
    ('refine="nni"', "--refine nni"),
    ('refine="spr"', "--refine spr"),
    ('criterion="bme"', "--criterion bme"),
    ('criterion="ols"', "--criterion ols"),
    ('criterion="wls"', "--criterion wls"),
    ("(resolve_polytomies(tree) gives zero-length branches)", "(write the tree with tree --binary)"),
    ("drop criterion", "drop --criterion"),
    ("set gamma=None", "drop --gamma-shape"),
    ("resume=True", "--resume"),
    (re.compile(r"\bworkers=(\d+)\b"), r"--workers \1"),
)


def as_options(text: object) -> str:
    """A library message in this command line's terms: each parameter spelling of
    :data:`PARAMETER_OPTIONS` replaced by its option."""
    text = str(text)
    for spelling, option in PARAMETER_OPTIONS:
        text = spelling.sub(option, text) if isinstance(spelling, re.Pattern) else text.replace(spelling, option)
    return text
