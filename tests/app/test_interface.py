"""One interface in the project's own words: names, one rooting form, support in percent, summaries, usage
errors, and a report that re-runs its run.

References: DendroPy (Tree.reroot_at_edge for outgroup rooting; TreeList.consensus with min_freq, a split
kept when its frequency is >= min_freq, for majority rule and the strict consensus, Margush & McMorris 1981,
Bull. Math. Biol. 43:239-244); the standard library's html.parser and shlex for the report's command line;
Python's own float parsing for the drawn seed; common practice for the one-line error form.
"""

import re
import shlex
from html.parser import HTMLParser
from pathlib import Path

import dendropy
import pytest
from click.testing import CliRunner

from cladewright.cli import main

EXAMPLE = Path(__file__).resolve().parents[2] / "example_alignments" / "glass_snails_coi.fasta"
OUTGROUP = "Lucivitra_ferrisoma_Orrindel_01"
ONE_LINE_ERROR = re.compile(r"^cladewright: error: .+$")
OUTPUT_LINE = re.compile(r"^output    (standard output|\S.*) \([A-Za-z].*\)$")


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def assert_one_line_usage_error(result, *words):
    assert result.exit_code == 2, (result.exit_code, result.stderr)
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and ONE_LINE_ERROR.match(lines[0]), result.stderr
    for word in words:
        assert word in lines[0], (word, lines[0])


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    """A tree with support, its replicate trees (21: no split at exactly one half) and a distance matrix."""
    d = tmp_path_factory.mktemp("interface")
    r = run("tree", EXAMPLE, "-o", d / "tree.nwk", "--replicates", 21, "--seed", 5, "--workers", 1,
            "--save-replicates", d / "reps.nwk")
    assert r.exit_code == 0, r.stderr
    assert run("distances", EXAMPLE, "-o", d / "m.tsv").exit_code == 0
    return d


# ---- names of our own: the old spellings are refused, in one line ------------------------------------------

@pytest.mark.parametrize("args,word", [
    (["tree", EXAMPLE, "-o", "-", "-b", "3"], "-b"),
    (["tree", EXAMPLE, "-o", "-", "--gamma", "0.5"], "--gamma"),
    (["distances", EXAMPLE, "-o", "-", "--gamma", "0.5"], "--gamma"),
    (["tree", EXAMPLE, "-o", "-", "--replicates", "2", "--support", "fbp"], "--support"),
    (["tree", EXAMPLE, "-o", "-", "--replicates", "2", "--support", "tbe"], "--support"),
    (["support", "a.nwk", "b.nwk", "-o", "-"], "support"),
    (["root", "a.nwk", "-o", "-", "--midpoint"], "--midpoint"),
    (["root", "a.nwk", "-o", "-", "--outgroup", "x"], "--outgroup"),
    (["tree", EXAMPLE, "-o", "-", "--root", "x,y"], "--root"),
    (["clusters", "a.nwk", "--within", "0.1", "-o", "-", "--root", "auto"], "--root"),
    (["consensus", "a.nwk", "-o", "-", "--threshold", "0.5"], "--threshold"),
])
def test_old_spellings_are_refused_in_one_line(args, word):
    # source: the interface as documented in docs/tools.md (common practice: an unknown option is a usage
    # error, exit status 2)
    assert_one_line_usage_error(run(*args), word)


def test_tally_and_new_words(made):
    # source: Felsenstein (1985): tallying a tree's own replicates onto it gives the support the bootstrap
    # run wrote (FBP, the same count of the same replicate trees)
    out = made / "tallied.nwk"
    r = run("tally", made / "reps.nwk", "--onto", made / "tree.nwk", "-o", out, "--support", "proportion")
    assert r.exit_code == 0, r.stderr
    assert out.read_text() == (made / "tree.nwk").read_text()
    r = run("tally", made / "reps.nwk", "--onto", made / "tree.nwk", "-o", "-", "--support", "transfer")
    assert r.exit_code == 0 and "transfer (TBE)" in r.stderr


def test_compare_tsv_columns_explain_themselves(made):
    # source: the column names documented in docs/tools.md; a tree against itself: distance 0 (Robinson &
    # Foulds 1981), all n - 3 = 27 splits of a binary tree of 30 taxa shared
    r = run("compare", "--tsv", made / "tree.nwk", made / "tree.nwk")
    header, row = r.stdout.splitlines()
    assert header.split("\t") == ["tree_a", "tree_b", "taxa", "robinson_foulds", "robinson_foulds_max",
                                  "robinson_foulds_normalised", "splits_shared", "splits_only_in_a",
                                  "splits_only_in_b", "branch_score"]
    values = dict(zip(header.split("\t"), row.split("\t")))
    assert values["robinson_foulds"] == "0" and values["robinson_foulds_max"] == "54"
    assert values["splits_shared"] == "27"


# ---- one rooting form ------------------------------------------------------------------------------------

def _rooted_clades(path):
    """The clades of a rooted tree file as DendroPy reads it, and each leaf's distance from the root."""
    t = dendropy.Tree.get(path=str(path), schema="newick", preserve_underscores=True, rooting="force-rooted")
    clades = {frozenset(x.taxon.label for x in node.leaf_nodes()) for node in t.preorder_internal_node_iter()}
    depth = {leaf.taxon.label: leaf.distance_from_root() for leaf in t.leaf_node_iter()}
    return clades, depth


def _dendropy_outgroup_root(path, taxon, out):
    """DendroPy's rerooting: the root halfway along the outgroup's branch of the unrooted tree."""
    t = dendropy.Tree.get(path=str(path), schema="newick", preserve_underscores=True, rooting="force-unrooted")
    edge = t.find_node_with_taxon_label(taxon).edge
    half = edge.length / 2
    t.reroot_at_edge(edge, length1=half, length2=half, suppress_unifurcations=True)
    t.write(path=str(out), schema="newick", suppress_rooting=True)


def test_one_rooting_form_on_tree_root_and_clusters(tmp_path):
    # reference: DendroPy Tree.reroot_at_edge on the outgroup's branch (the same clades, the same root-to-leaf
    # path lengths); the tree command and the root command give the same file
    plain, via_tree, via_root, theirs = (tmp_path / f"{x}.nwk" for x in ("plain", "tree", "root", "dendropy"))
    assert run("tree", EXAMPLE, "-o", plain).exit_code == 0
    assert run("tree", EXAMPLE, "-o", via_tree, "--root", f"outgroup:{OUTGROUP}").exit_code == 0
    r = run("root", plain, "-o", via_root, "--root", f"outgroup:{OUTGROUP}")
    assert r.exit_code == 0, r.stderr
    assert via_tree.read_bytes() == via_root.read_bytes()
    _dendropy_outgroup_root(plain, OUTGROUP, theirs)
    ours_clades, ours_depth = _rooted_clades(via_root)
    their_clades, their_depth = _rooted_clades(theirs)
    assert ours_clades == their_clades
    assert set(ours_depth) == set(their_depth)
    for name, depth in their_depth.items():
        assert ours_depth[name] == pytest.approx(depth, rel=1e-12, abs=1e-15)
    # clusters: --root outgroup:X is the rooted tree used as stored
    a, b = tmp_path / "a.tsv", tmp_path / "b.tsv"
    assert run("clusters", plain, "--within", 0.15, "-o", a, "--root", f"outgroup:{OUTGROUP}").exit_code == 0
    assert run("clusters", via_root, "--within", 0.15, "-o", b, "--root", "stored").exit_code == 0
    assert a.read_text() == b.read_text()
    # midpoint, the same word on the three commands
    assert run("tree", EXAMPLE, "-o", tmp_path / "m1.nwk", "--root", "midpoint").exit_code == 0
    assert run("root", plain, "-o", tmp_path / "m2.nwk", "--root", "midpoint").exit_code == 0
    assert (tmp_path / "m1.nwk").read_bytes() == (tmp_path / "m2.nwk").read_bytes()
    assert run("clusters", plain, "--within", 0.15, "-o", "-", "--root", "midpoint").exit_code == 0
    # 'stored' is offered where the tree's own root can mean something, not on a tree just built
    assert_one_line_usage_error(run("tree", EXAMPLE, "-o", tmp_path / "s.nwk", "--root", "stored"), "--root")
    assert run("root", plain, "-o", tmp_path / "s.nwk", "--root", "stored").exit_code == 0
    for cmd in (["root", plain, "-o", "-"], ["clusters", plain, "--within", "1", "-o", "-"]):
        assert_one_line_usage_error(run(*cmd, "--root", "outgroup:"), "--root", "outgroup:TAXON")


# ---- support in percent --------------------------------------------------------------------------------

def _splits(path, tns):
    t = dendropy.Tree.get(path=str(path), schema="newick", preserve_underscores=True, taxon_namespace=tns)
    names = frozenset(x.label for x in tns)
    out = set()
    for node in t.preorder_internal_node_iter():
        side = frozenset(x.taxon.label for x in node.leaf_nodes())
        if 1 < len(side) < len(names) - 1:
            out.add(frozenset({side, names - side}))
    return out


def _dendropy_consensus(reps, min_freq, out):
    tns = dendropy.TaxonNamespace()
    trees = dendropy.TreeList.get(path=str(reps), schema="newick", preserve_underscores=True, taxon_namespace=tns)
    trees.consensus(min_freq=min_freq).write(path=str(out), schema="newick")
    return tns


@pytest.mark.parametrize("percent,min_freq", [(100, 1.0), (50, 0.5)])
def test_consensus_threshold_is_a_percent(made, tmp_path, percent, min_freq):
    # reference: DendroPy TreeList.consensus(min_freq): 1.0 the strict consensus; 0.5 majority rule (21 trees,
    # so no split sits at exactly one half, where DendroPy's >= and the majority rule's > would differ)
    ours, theirs = tmp_path / "ours.nwk", tmp_path / "theirs.nwk"
    r = run("consensus", made / "reps.nwk", "-o", ours, "--threshold", percent)
    assert r.exit_code == 0, r.stderr
    tns = _dendropy_consensus(made / "reps.nwk", min_freq, theirs)
    assert _splits(ours, tns) == _splits(theirs, tns)
    if percent == 50:  # the default is the majority rule
        assert run("consensus", made / "reps.nwk", "-o", tmp_path / "d.nwk").exit_code == 0
        assert (tmp_path / "d.nwk").read_bytes() == ours.read_bytes()


# ---- summaries and options after the command -------------------------------------------------------------

def _commands(d):
    tree, reps, m = d / "tree.nwk", d / "reps.nwk", d / "m.tsv"
    return {
        "distances": (["distances", EXAMPLE, "-o", d / "o.tsv"], d / "o.tsv", "TSV"),
        "tree": (["tree", m, "-o", d / "o.nex"], d / "o.nex", "NEXUS"),
        "lengths": (["lengths", tree, m, "-o", d / "l.nwk"], d / "l.nwk", "Newick"),
        "tally": (["tally", reps, "--onto", tree, "-o", d / "s.nwk"], d / "s.nwk", "Newick"),
        "consensus": (["consensus", reps, "-o", d / "c.nwk"], d / "c.nwk", "Newick"),
        "root": (["root", tree, "-o", d / "r.nwk", "--root", "midpoint"], d / "r.nwk", "Newick"),
        "compare": (["compare", tree, reps, "-o", d / "cmp.txt"], d / "cmp.txt", "text"),
        "clusters": (["clusters", tree, "--within", "0.15", "-o", d / "g.tsv"], d / "g.tsv", "TSV"),
    }


@pytest.mark.parametrize("name", ["distances", "tree", "lengths", "tally", "consensus", "root", "compare",
                                  "clusters"])
def test_every_summary_ends_with_its_output(made, tmp_path, name):
    # source: the summary form documented in docs/tools.md: 'output    PATH (format)', standard output named
    # so; --quiet and --debug accepted after the command's name as before it
    args, path, kind = _commands(made)[name]
    r = run(*args)
    assert r.exit_code == 0, r.stderr
    last = r.stderr.strip().splitlines()[-1]
    assert OUTPUT_LINE.match(last) and last == f"output    {path} ({last.split('(', 1)[1]}"
    assert last.split("(", 1)[1].startswith(kind)
    args = [a if a != path else "-" for a in args]
    r = run(*args)
    assert r.exit_code == 0, r.stderr
    std_kind = "Newick" if kind == "NEXUS" else kind  # no suffix to tell NEXUS on standard output
    assert r.stderr.strip().splitlines()[-1].startswith(f"output    standard output ({std_kind}")
    for flag in ("--quiet", "-q"):
        quiet = run(*args, flag)
        assert quiet.exit_code == 0 and quiet.stderr == ""
    assert run("--quiet", *args).stderr == ""
    assert run(*args, "--debug").exit_code == 0


def test_tree_names_every_file_it_writes(made, tmp_path):
    # source: the summary form documented in docs/trees.md
    out, reps, report = tmp_path / "t.nwk", tmp_path / "r.nwk", tmp_path / "run.html"
    r = run("tree", EXAMPLE, "-o", out, "--replicates", 3, "--seed", 1, "--workers", 1, "--save-replicates", reps,
            "--report", report)
    assert r.exit_code == 0, r.stderr
    assert r.stderr.strip().splitlines()[-3:] == [f"output    {out} (Newick)",
                                                  f"output    {reps} (Newick, 3 replicate trees)",
                                                  f"output    {report} (HTML, run report)"]


def test_debug_after_the_command_shows_the_traceback(tmp_path):
    # source: common practice: --debug lets the exception through (CliRunner keeps it) instead of one line
    bad = tmp_path / "bad.fasta"
    bad.write_text(">a\nACGT\n>b\nAC\n")
    plain = run("distances", bad, "-o", "-")
    assert plain.exit_code == 2 and ONE_LINE_ERROR.match(plain.stderr.strip())
    debug = run("distances", bad, "-o", "-", "--debug")
    assert debug.exception is not None and not isinstance(debug.exception, SystemExit)


@pytest.mark.parametrize("args,word", [
    (["tree"], "INPUT"),
    (["tree", EXAMPLE], "--output"),
    (["tree", EXAMPLE, "-o", "-", "--method", "nope"], "--method"),
    (["tree", EXAMPLE, "-o", "-", "--no-such-option"], "--no-such-option"),
    (["nosuchcommand"], "nosuchcommand"),
    (["--no-such-option"], "--no-such-option"),
    (["consensus", "x.nwk", "-o", "-", "--threshold", "101"], "--threshold"),
    (["root", "x.nwk", "-o", "-"], "--root"),
])
def test_usage_errors_are_one_line(args, word):
    # source: common practice: usage errors exit with status 2; the project's form is one line on stderr
    assert_one_line_usage_error(run(*args), word)


# ---- the report re-runs its run ---------------------------------------------------------------------------

class _Settings(HTMLParser):
    """The settings table's rows and the recorded command line."""

    def __init__(self):
        super().__init__()
        self.rows, self.command, self._where, self._cells, self._section = [], "", None, [], None
        self._tables = 0

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if tag == "section":
            self._section = attrs.get("id")
        if tag == "pre" and attrs.get("id") == "command-line":
            self._where = "command"
        if tag == "table" and self._section == "settings":
            self._tables += 1
        if tag in ("th", "td") and self._section == "settings" and self._tables == 1:
            self._where = "cell"
            self._cells.append("")

    def handle_endtag(self, tag):
        if tag in ("pre", "th", "td"):
            self._where = None
        if tag == "tr" and self._section == "settings" and self._tables == 1:
            self.rows.append(tuple(self._cells))
            self._cells = []

    def handle_data(self, data):
        if self._where == "command":
            self.command += data
        elif self._where == "cell":
            self._cells[-1] += data


def _report(path):
    page = _Settings()
    page.feed(path.read_text(encoding="utf-8"))
    return page


@pytest.mark.parametrize("extra", [
    [],
    ["--method", "upgma", "--model", "jc69"],
    ["--method", "bme", "--refine", "nni", "--model", "hky", "--gamma-shape", "0.5", "--gamma-categories", "4",
     "--support", "transfer", "--support-digits", "1", "--root", f"outgroup:{OUTGROUP}"],
])
def test_report_command_line_reruns_the_run(tmp_path, monkeypatch, extra):
    # source: the report's own promise, checked from outside: the command line it records (read with
    # html.parser, split with shlex) run again gives the same tree file, byte for byte; the seed was drawn
    monkeypatch.chdir(tmp_path)
    (tmp_path / "in.fasta").write_text(EXAMPLE.read_text())
    r = run("tree", "in.fasta", "-o", "t.nwk", "--replicates", 6, "--workers", 1, "--save-replicates", "reps.nwk",
            "--report", "run.html", *extra)
    assert r.exit_code == 0, r.stderr
    first = (tmp_path / "t.nwk").read_bytes()
    page = _report(tmp_path / "run.html")
    words = shlex.split(page.command)
    assert words[:4] == ["cladewright", "tree", "in.fasta", "--output"]
    seed = words[words.index("--seed") + 1]
    assert int(seed) >= 0 and f"seed {seed}" in r.stderr
    # settings: the command line's words, every one that applies, none that does not
    settings = dict(page.rows)
    assert all(key.startswith("--") for key in settings), settings
    assert "None" not in settings.values() and "sites_used" not in page.command
    assert not any("_" in key for key in settings)
    assert settings["--replicates"] == "6" and settings["--seed"] == seed
    method = settings["--method"]
    if method == "upgma":
        assert not {"--criterion", "--refine", "--negative"} & set(settings)
    if "--gamma-shape" not in settings:
        assert "--gamma-categories" not in settings
    if settings["--model"] in ("k2p", "jc69"):
        assert "--freqs" not in settings
    for key, value in settings.items():  # the command line holds exactly the settings shown
        assert key in words and (value == "yes" or words[words.index(key) + 1] == value)
    (tmp_path / "t.nwk").unlink()
    (tmp_path / "reps.nwk").unlink()
    again = run(*words[1:])
    assert again.exit_code == 0, again.stderr
    assert (tmp_path / "t.nwk").read_bytes() == first


def test_report_figure_uses_the_tree_files_digits(tmp_path):
    # reference: DendroPy's reading of the tree file's internal labels (the support text as written), and the
    # W3C SVG text elements of the report's tree figure
    out, report = tmp_path / "t.nwk", tmp_path / "run.html"
    r = run("tree", EXAMPLE, "-o", out, "--replicates", 6, "--seed", 3, "--workers", 1, "--support-digits", 1,
            "--report", report)
    assert r.exit_code == 0, r.stderr
    t = dendropy.Tree.get(path=str(out), schema="newick", preserve_underscores=True)
    written = {node.label for node in t.preorder_internal_node_iter() if node.label}
    assert written and all(re.fullmatch(r"\d+\.\d", x) for x in written)
    figure = report.read_text(encoding="utf-8").split('<section id="tree">', 1)[1].split("</section>", 1)[0]
    shown = set(re.findall(r"<text[^>]*>([^<]*)</text>", figure))
    assert written <= shown
    assert not [x for x in shown if re.fullmatch(r"\d+", x)]  # no label rounded to a whole percentage


def test_quoting_option_writes_names_that_strict_readers_keep(tmp_path):
    # Newick's informal standard (1986) makes an unquoted '_' a blank; DendroPy's default reader follows it and
    # keeps quoted names as written. Plain output writes 'Homo_sapiens' bare (what most software expects);
    # --quoting strict quotes it, so that DendroPy's default reader reads the names exactly.
    import dendropy
    from click.testing import CliRunner

    from cladewright.cli import main

    fasta = tmp_path / "q.fasta"
    names = ["Homo_sapiens", "Pan_troglodytes", "Gorilla_gorilla", "Pongo_abelii"]
    seqs = ["ACGTACGTACGT", "ACGTACGTAAGT", "ACGTACCTAAGT", "ACCTACCTAAGA"]
    fasta.write_text("".join(f">{a}\n{s}\n" for a, s in zip(names, seqs)))
    runner = CliRunner()
    for quoting in ("plain", "strict"):
        out = tmp_path / f"{quoting}.nwk"
        args = ["tree", str(fasta), "-o", str(out), "--report", str(tmp_path / f"{quoting}.html")]
        r = runner.invoke(main, args + (["--quoting", "strict"] if quoting == "strict" else []))
        assert r.exit_code == 0, r.output
        text = out.read_text()
        assert ("'Homo_sapiens'" in text) == (quoting == "strict")
        read = dendropy.Tree.get(data=text, schema="newick")
        labels = sorted(t.label for t in read.taxon_namespace)
        if quoting == "strict":
            assert labels == sorted(names)
        else:
            assert labels == sorted(x.replace("_", " ") for x in names)
        assert f"--quoting {quoting}" in (tmp_path / f"{quoting}.html").read_text()
