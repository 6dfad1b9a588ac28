"""Internal: a part of the command line (run it as the cladewright command).

The table that turns the library's parameter spellings into this command line's options, so
that a library message (``saturated="cap"``) reaches a command-line user as an option
(``--saturated cap``).
"""

from __future__ import annotations

import re

import click

__all__ = ["PARAMETER_OPTIONS", "as_options", "ALIGNMENT_ONLY", "refuse_model_options"]

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


#: The options of :func:`model_options` (and --gamma-categories) that only say how an alignment's distances
#: are computed, by parameter name: given with a distance matrix they would be silently ignored.
ALIGNMENT_ONLY = {"model": "--model", "gamma": "--gamma-shape", "gaps": "--gaps", "freqs": "--freqs",
                  "saturated": "--saturated", "alphabet": "--alphabet", "gamma_categories": "--gamma-categories"}


def refuse_model_options(ctx: click.Context, input_path: str) -> None:
    """A usage error for an option of :data:`ALIGNMENT_ONLY` given with a distance matrix or store, whose
    distances were computed already (with settings of their own)."""
    from click.core import ParameterSource

    for name, flag in ALIGNMENT_ONLY.items():
        if name in ctx.params and ctx.get_parameter_source(name) not in (ParameterSource.DEFAULT, None):
            raise click.UsageError(f"{flag} sets how distances are computed from an alignment, but {input_path} "
                                   "holds distances already; drop it, or give the alignment")
