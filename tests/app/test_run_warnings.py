"""Warnings and the words of the library and the command line.

A run's warnings are made once (cladewright.pipeline.run_warnings, as CladewrightWarning records) and worded
once: the summary on stderr and the HTML report show each exactly once. The library's messages name its
parameters (saturated="cap"); the command line shows its options (--saturated cap). Each vocabulary (method
names, modes, precisions) has one home, cladewright.choices.
"""

import ast
import pathlib
import pickle
import re

import click
import numpy as np
import pytest
from click.testing import CliRunner
from skbio import DistanceMatrix as SkbioDistanceMatrix
from skbio.tree import nj as skbio_nj

from cladewright import choices
from cladewright.alignment import Alignment, encode
from cladewright.build import LINKAGE_METHODS as LANCE_WILLIAMS_ROWS
from cladewright.build import METHODS, build_tree
from cladewright.build.criteria import fit_lengths
from cladewright.cli import main
from cladewright.cli.app import PARAMETER_OPTIONS, as_options
from cladewright.distances import distance_matrix
from cladewright.errors import CladewrightWarning, InputError, SaturationError
from cladewright.memory import WORKING_MATRICES, check_fits
from cladewright.tree import Tree

from simulate import mutate, random_sequence

SRC = pathlib.Path(__file__).resolve().parents[2] / "src" / "cladewright"


def _sequences(seed=21, length=40):
    """Three close and three far relatives of one random sequence: under JC69 some far pairs saturate
    (p >= 3/4) and neighbour joining gives negative branch lengths."""
    rng = np.random.default_rng(seed)
    base = random_sequence(rng, length)
    return np.array([mutate(rng, base, 0.1 if k < 3 else 0.7) for k in range(6)])


def _expected(seqs):
    """Saturated pairs and negative NJ branch lengths, computed outside cladewright: JC69 is undefined at
    p >= 3/4 (Jukes & Cantor 1969); a saturated pair is set to twice the largest defined distance, at least
    1 (docs/distances.md); the tree is scikit-bio's neighbour joining (Saitou & Nei 1987), lengths kept."""
    p = (seqs[:, None, :] != seqs[None, :, :]).mean(axis=2)
    saturated = int(np.count_nonzero(np.triu(p >= 0.75, 1)))
    with np.errstate(all="ignore"):
        d = -0.75 * np.log(1 - 4 * p / 3)
    defined = np.isfinite(d)
    d[~defined] = max(1.0, 2 * d[defined].max())
    np.fill_diagonal(d, 0.0)
    tree = skbio_nj(SkbioDistanceMatrix(d, [f"s{i}" for i in range(len(seqs))]), neg_as_zero=False)
    negative = sum(1 for node in tree.traverse() if node.length is not None and node.length < 0)
    return saturated, negative


def test_each_warning_is_worded_once_in_the_summary_and_the_report(tmp_path):
    seqs = _sequences()
    saturated, negative = _expected(seqs)
    assert saturated > 0 and negative > 0  # the data exercise both warnings
    fasta = tmp_path / "far.fasta"
    fasta.write_text("".join(f">s{i}\n{''.join(s)}\n" for i, s in enumerate(seqs)))
    report = tmp_path / "run.html"
    r = CliRunner().invoke(main, ["tree", str(fasta), "-o", str(tmp_path / "t.nwk"), "-m", "jc69", "--method", "nj",
                                  "--saturated", "cap", "--negative", "keep", "--report", str(report)])
    assert r.exit_code == 0, r.output
    said_sat = f"{saturated} saturated pair(s)"
    said_neg = f"{negative} negative branch length(s) kept as computed"
    html = report.read_text(encoding="utf-8")
    for text in (r.stderr, html):
        assert text.count("saturated pair(s)") == 1 and said_sat in text, text
        assert text.count("negative branch length(s)") == 1 and said_neg in text, text
    warning_lines = [line for line in r.stderr.splitlines() if line.startswith("warning")]
    assert len(warning_lines) == 2
    # the report's warnings section lists the same two, nothing else
    section = html[html.index('<section id="warnings">'):]
    section = section[:section.index("</section>")]
    assert section.count("<li>") == 2


def test_the_library_returns_its_warnings_as_records():
    # source: as above (Jukes & Cantor 1969 for the saturated pairs, scikit-bio's NJ for the negative lengths)
    from cladewright.pipeline import tree_from_alignment

    seqs = _sequences()
    saturated, negative = _expected(seqs)
    names = [f"s{i}" for i in range(len(seqs))]
    aln = Alignment(names, encode(names, ["".join(s) for s in seqs], "dna", "far"), "dna")
    _, info, _ = tree_from_alignment(aln, "jc69", "nj", saturated="cap", negative="zero")
    kinds = [w.kind for w in info["warnings"]]
    assert kinds == ["saturated", "negative_lengths"]
    assert all(isinstance(w, CladewrightWarning) and isinstance(w, UserWarning) for w in info["warnings"])
    assert info["warnings"][0].message.startswith(f"{saturated} saturated pair(s)")
    assert info["warnings"][1].message == f"{negative} negative branch length(s) set to zero"
    # a record survives pickling (a result sent between processes) and can be issued as a Python warning
    assert pickle.loads(pickle.dumps(info["warnings"][0])) == info["warnings"][0]
    with pytest.warns(CladewrightWarning, match="saturated pair"):
        import warnings
        warnings.warn(info["warnings"][0])


def _library_strings():
    """Every string constant of the package outside the command line, with its file."""
    for path in sorted(SRC.rglob("*.py")):
        if "cli" in path.relative_to(SRC).parts:
            continue
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Constant) and isinstance(node.value, str):
                yield path.relative_to(SRC), node.value


def test_library_messages_name_parameters_not_options():
    # source: common practice: a library speaks of its own parameters; only the command line has options
    flags = {f"--{p.name.replace('_', '-')}" for command in main.commands.values() for p in command.params
             if isinstance(p, click.Option)}
    found = []
    for path, text in _library_strings():
        for flag in re.findall(r"(?<![\w-])--[a-z][a-z-]*", text):
            if flag in flags and "``" + flag not in text:  # a docstring may say which option calls it
                found.append(f"{path}: {text[:80]!r}")
    assert not found, "library strings that name command-line options:\n" + "\n".join(found)


def _dna(seqs, names=None):
    names = names or [f"s{i}" for i in range(len(seqs))]
    return Alignment(names, encode(names, seqs, "dna", "x.fasta"), "dna")


def _message(call):
    with pytest.raises(InputError) as err:
        call()
    return str(err.value)


def _library_messages(tmp_path):
    """Library errors that name a parameter, each raised for real (the fix each names is in docs/errors.md)."""
    from cladewright.resampling import bootstrap

    gappy = _dna(["-CGT", "A-GT", "AC-T", "ACG-"])
    near = _dna(["ACGTACGTAC", "ACGTACGTAA", "ACGTTCGTAC"])
    protein = Alignment(["a", "b"], encode(["a", "b"], ["MKVLE", "MKILE"], "protein", "x.fasta"), "protein")
    return [
        _message(lambda: distance_matrix(_dna(["".join(s) for s in _sequences()]), "jc69")),  # saturated
        _message(lambda: distance_matrix(gappy, "p", gaps="complete")),  # no complete site
        _message(lambda: distance_matrix(near, "p", gamma=0.5)),  # p has no gamma form
        _message(lambda: distance_matrix(near, "poisson")),  # a protein model on DNA
        _message(lambda: encode(["a"], ["ACEFG"], "dna", "x.fasta")),  # amino acids read as DNA
        _message(lambda: distance_matrix(protein, "k2p")),  # a DNA model on protein
        _message(lambda: distance_matrix(protein, "lg", freqs="pair")),  # frequencies a protein model refuses
        _message(lambda: distance_matrix(protein, "lg", gamma_categories=4)),  # categories without a shape
        # 5,000 taxa, BIONJ, 4 workers: about 4.2 GB; in float32, with 3 workers or with NJ under 3.5 GiB
        _message(lambda: check_fits(5_000, method="bionj", workers=4, available=int(3.5 * 2**30))),
        _message(lambda: bootstrap(near, 2, resume=True, progress=False)),  # resume without a file
        _message(lambda: (tmp_path / "reps.nwk").write_text("") and None
                 or bootstrap(near, 2, save_replicates=tmp_path / "reps.nwk", progress=False)),
        # a search on a rooted linkage tree; a criterion without a search or a bme start
        _message(lambda: build_tree(distance_matrix(near, "p"), "upgma", refine="nni")),
        _message(lambda: build_tree(distance_matrix(near, "p"), "nj", criterion="bme")),
        _message(lambda: build_tree(distance_matrix(near, "p"), "nj", criterion="ols")),
        _message(lambda: build_tree(distance_matrix(near, "p"), "nj", refine="spr", criterion="ols")),  # SPR is BME
        # a polytomy (a star of four) given to the BME fit
        _message(lambda: fit_lengths(Tree([4, 4, 4, 4, -1], [1.0] * 4 + [np.nan], list("abcd")),
                                     distance_matrix(_dna(["ACGTAC", "ACGTAA", "ACTTAC", "TCGTAC"], list("abcd")), "p"))),
    ]


def test_every_parameter_spelling_in_the_table_is_one_the_library_uses(tmp_path):
    # source: common practice: the table rewrites words the library says (a stale entry would map nothing),
    # and a message the command line shows names no parameter
    messages = _library_messages(tmp_path)
    # the one message not raised here: the Dask import is present in the test environment
    scheduler = (SRC / "resampling" / "executors.py").read_text(encoding="utf-8")
    messages.append(re.search(r'"(scheduler needs Dask[^"]*)"', scheduler).group(1))
    used = set()
    for text in messages:
        shown = as_options(text)
        for spelling, option in PARAMETER_OPTIONS:
            hit = spelling.search(text) if isinstance(spelling, re.Pattern) else spelling in text
            if hit:
                used.add(spelling)
                assert isinstance(spelling, re.Pattern) or option in shown
        assert not re.search(r'\b[a-z_]+=(True|None|FILE|"[a-z]+"|[0-9]+)', shown), shown
    assert used == {spelling for spelling, _ in PARAMETER_OPTIONS}


def test_the_command_line_shows_its_options(tmp_path):
    # source: docs/errors.md (the messages as the command line shows them)
    assert as_options('pass saturated="cap" to set them') == "pass --saturated cap to set them"
    assert as_options("resume=True needs save_replicates=FILE, the file") == \
        "--resume needs --save-replicates FILE, the file"
    assert as_options('precision="single" or workers=3 or method="nj" would fit') == \
        "--precision single or --workers 3 or --method nj would fit"
    assert as_options("model p has no gamma form; set gamma=None or") == "model p has no gamma form; drop --gamma-shape or"
    # a saturated pair stops the run: the library names its parameter, the command line its option
    fasta = tmp_path / "far.fasta"
    seqs = _sequences()
    fasta.write_text("".join(f">s{i}\n{''.join(s)}\n" for i, s in enumerate(seqs)))
    names = [f"s{i}" for i in range(len(seqs))]
    aln = Alignment(names, encode(names, ["".join(s) for s in seqs], "dna", "far"), "dna")
    with pytest.raises(SaturationError, match='saturated="cap"'):
        distance_matrix(aln, "jc69")
    r = CliRunner().invoke(main, ["distances", str(fasta), "-o", str(tmp_path / "d.tsv"), "-m", "jc69"])
    assert r.exit_code == 2 and "--saturated cap" in r.stderr and 'saturated="cap"' not in r.stderr
    with pytest.raises(InputError, match='precision="single" would fit'):
        check_fits(100_000, method="nj", available=100 * 2**30)


def test_each_vocabulary_has_one_home():
    # source: common practice (one definition per vocabulary); Lance & Williams (1967) Table 1 for the linkage
    # family, Saitou & Nei (1987) and Gascuel (1997) for the joining methods
    assert METHODS == choices.METHODS == choices.LINKAGE_METHODS + choices.JOINING_METHODS + choices.INSERTION_METHODS
    assert set(LANCE_WILLIAMS_ROWS) == set(choices.LINKAGE_METHODS)
    assert set(WORKING_MATRICES) == set(choices.METHODS)
    assert choices.PRECISIONS == {"double": np.float64, "single": np.float32}
    options = {p.name: p for p in main.commands["tree"].params}
    assert set(options["method"].type.choices) == set(choices.METHODS)
    assert tuple(options["negative"].type.choices) == choices.NEGATIVE_RULES
    assert tuple(options["precision"].type.choices) == tuple(choices.PRECISIONS)
    assert tuple(options["gaps"].type.choices) == choices.GAP_MODES
    assert tuple(options["freqs"].type.choices) == choices.FREQ_MODES
    assert tuple(options["saturated"].type.choices) == choices.SATURATED_MODES
    assert tuple(options["alphabet"].type.choices) == choices.ALPHABETS
    # the command line's own words for the measures, each naming one of the library's
    assert tuple(options["measure"].type.choices) == tuple(choices.SUPPORT_WORDS)
    assert tuple(choices.SUPPORT_WORDS.values()) == choices.SUPPORT_MEASURES
    assert tuple({p.name: p for p in main.commands["tally"].params}["measure"].type.choices) == \
        tuple(choices.SUPPORT_WORDS)
    assert tuple(options["fmt"].type.choices) == choices.TREE_FORMATS
    assert tuple(options["refine"].type.choices) == choices.REFINEMENTS
    assert tuple(options["criterion"].type.choices) == choices.LENGTH_CRITERIA
    assert tuple({p.name: p for p in main.commands["lengths"].params}["criterion"].type.choices) == choices.CRITERIA
    # one rooting option everywhere: --root RULE, read by one parser
    for name in ("tree", "root", "clusters"):
        [root] = [p for p in main.commands[name].params if "--root" in getattr(p, "opts", ())]
        assert root.metavar == "RULE" and root.name == "root_rule"
