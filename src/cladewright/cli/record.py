"""Internal: a part of the command line (run it as the cladewright command).

What a run records so that it can be made again: its settings in the command
line's own words (only those that apply to the run, each with the value the run
used, defaults and drawn seeds included), and the command line that re-runs it,
its options in the order the command lists them.
"""

from __future__ import annotations

import shlex
from collections.abc import Mapping
from typing import Any

import click

from ..choices import LINKAGE_METHODS

__all__ = ["explicit_command", "tree_values", "OUTPUT_OPTIONS"]

#: Options that name files the run writes: on the command line that re-runs it, not among its settings.
OUTPUT_OPTIONS: frozenset[str] = frozenset({"output", "report_path", "save_replicates"})


def explicit_command(command: click.Command, name: str, values: Mapping[str, Any]
                     ) -> tuple[str, list[tuple[str, str]]]:
    """The command line that re-runs a command with every setting explicit, and its settings.

    Parameters
    ----------
    command : click.Command
        The command; its parameters give the words and the order.
    name : str
        The command's name (``tree``).
    values : mapping
        Parameter name -> the value the run used. A parameter missing from it, or None or False,
        is left out (it does not apply, or was not given); True writes a flag.

    Returns
    -------
    command_line : str
        ``cladewright NAME ARGUMENTS --option value ...``, shell-quoted.
    settings : list of (str, str)
        ``(--option, value)`` for every option written that is not an output file.
    """
    words = ["cladewright", name]
    options: list[str] = []
    settings: list[tuple[str, str]] = []
    for param in command.params:
        value = values.get(param.name or "")
        if value is None or value is False:
            continue
        if isinstance(param, click.Argument):
            words.append(str(value))
            continue
        long = max(param.opts, key=len)
        if value is True:
            options.append(long)
            text = "yes"
        else:
            text = str(value)
            options += [long, text]
        if param.name not in OUTPUT_OPTIONS:
            settings.append((long, text))
    return shlex.join(words + options), settings


def tree_values(params: Mapping[str, Any], *, from_alignment: bool, model: Any, info: Mapping[str, Any],
                alphabet: str | None, seed: int | None, measure_word: str, output_format: str
                ) -> dict[str, Any]:
    """The values of the ``tree`` command's parameters as the run used them, those that do not apply left out.

    Parameters
    ----------
    params : mapping
        The command's parameters as given (click's ``ctx.params``).
    from_alignment : bool
        Whether the input was an alignment (else a distance matrix: no model, no bootstrap).
    model : Model
        The model used (:data:`cladewright.distances.MODELS`), when from an alignment.
    info : mapping
        The run's information (method, refine, criterion, freqs as the library used them).
    alphabet : str, optional
        The alignment's alphabet.
    seed : int, optional
        The bootstrap's seed, given or drawn.
    measure_word : str
        The support measure in the command line's word.
    output_format : str
        The tree format written.
    """
    method = params["method"]
    values: dict[str, Any] = {"input_path": params["input_path"], "output": params["output"], "method": method,
                              "precision": params["precision"], "root_rule": params.get("root_rule"),
                              "report_path": params.get("report_path"), "binary": params.get("binary"),
                              "fmt": output_format, "digits": params.get("digits")}
    unrooted = method not in LINKAGE_METHODS
    if unrooted:
        values["refine"] = params["refine"]
        values["negative"] = params["negative"]
        if method == "bme" or params["refine"] != "none":
            values["criterion"] = info.get("criterion") or params.get("criterion") or "bme"
    if from_alignment:
        gamma = params.get("gamma")
        values.update(model=model.name if model.name != "protein-p" else "p", gaps=params["gaps"],
                      saturated=params["saturated"], alphabet=alphabet, replicates=params["replicates"])
        if gamma is not None:
            values["gamma"] = repr(float(gamma))  # the shortest text that reads back as the same number
            if model.likelihood and params.get("gamma_categories"):
                values["gamma_categories"] = params["gamma_categories"]
        if model.uses_freqs:
            values["freqs"] = info.get("freqs") or params.get("freqs")
        if params["replicates"]:
            values.update(seed=seed, measure=measure_word, save_replicates=params.get("save_replicates"),
                          support_digits=params["support_digits"])
    return values

