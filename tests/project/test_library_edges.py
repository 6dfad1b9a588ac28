"""The library at its edges (issue 11, items 2, 7 and 10): a checked matrix
cannot change afterwards, gamma forms stay exact for any shape, and misuse
gets the project's one-line InputError naming the parameter.

Reference values come from outside the code under test: a tree drawn by hand
(path sums), scipy's average linkage, the published closed forms written out
here (Jukes & Cantor 1969; Kimura 1980; Felsenstein 1981; Tamura & Nei 1993;
Zuckerkandl & Pauling 1965; gamma forms of Jin & Nei 1990), the same forms
evaluated to 50 digits with Python's decimal module, and scikit-bio.
"""

import math
import pickle
import tracemalloc
from decimal import Decimal, getcontext

import numpy as np
import pytest
from click.testing import CliRunner
from scipy.cluster.hierarchy import average, cophenet
from scipy.spatial.distance import squareform
from skbio import DNA, TabularMSA
from skbio.alignment import align_dists

from cladewright import Alignment, DistanceMatrix, InputError, build_tree, build_tree_with_info, distance_matrix
from cladewright.cli import main
from cladewright.io.readers import read_distance_matrix

from simulate import make_alignment, simulate_dna

# ---- item 2: a DistanceMatrix keeps its own, frozen copy --------------------

NAMES = ["a", "b", "c", "d", "e"]
# Path sums on the tree ((a:1,b:2)u:1.5, c:3, (d:0.5,e:2.5)v:1), worked by hand:
# a-b = 1+2, a-c = 1+1.5+3, a-d = 1+1.5+1+0.5, a-e = 1+1.5+1+2.5, b-c = 2+1.5+3, b-d = 2+1.5+1+0.5,
# b-e = 2+1.5+1+2.5, c-d = 3+1+0.5, c-e = 3+1+2.5, d-e = 0.5+2.5.
ADDITIVE = np.array([
    [0.0, 3.0, 5.5, 4.0, 6.0],
    [3.0, 0.0, 6.5, 5.0, 7.0],
    [5.5, 6.5, 0.0, 4.5, 6.5],
    [4.0, 5.0, 4.5, 0.0, 3.0],
    [6.0, 7.0, 6.5, 3.0, 0.0],
])


def test_changing_the_callers_array_leaves_the_matrix_as_checked():
    # common practice: the matrix holds its own copy of what was checked.
    for validate in (True, False):
        for dtype in (np.float64, np.float32):
            given = ADDITIVE.astype(dtype)  # same dtype as stored: the case that could alias
            dm = DistanceMatrix(NAMES, given, validate=validate, dtype=dtype)
            given[0, 1] = given[1, 0] = -1.0
            given[2, 3] = np.nan
            np.testing.assert_array_equal(dm.values, ADDITIVE.astype(dtype))


def test_writing_into_the_stored_matrix_raises():
    # common practice (numpy): a read-only array refuses assignment with ValueError.
    dm = DistanceMatrix(NAMES, ADDITIVE)
    with pytest.raises(ValueError):
        dm.values[0, 1] = -1.0
    with pytest.raises(ValueError):
        np.asarray(dm.values)[0, 1] = -1.0
    with pytest.raises(ValueError):
        dm.values.flags.writeable = True
    with pytest.raises(AttributeError):
        dm.values = np.zeros((5, 5))
    again = pickle.loads(pickle.dumps(dm))  # a matrix sent to a worker process stays frozen
    with pytest.raises(ValueError):
        again.values[0, 1] = -1.0
    np.testing.assert_array_equal(dm.values, ADDITIVE)


def test_tree_after_attempted_changes_is_the_tree_of_the_original_values():
    # source: NJ recovers an additive (tree) metric exactly (Saitou & Nei 1987; Atteson 1999), so the
    # patristic distances of the NJ tree are the hand-worked path sums; UPGMA's path lengths are the
    # cophenetic distances of average linkage (reference: scipy.cluster.hierarchy.average + cophenet).
    given = ADDITIVE.copy()
    dm = DistanceMatrix(NAMES, given)
    given[0, 1] = given[1, 0] = -1.0
    given[3, 4] = given[4, 3] = 50.0
    with pytest.raises(ValueError):
        dm.values[0, 2] = -1.0
    np.testing.assert_allclose(build_tree(dm, "nj").patristic(), ADDITIVE, rtol=0, atol=1e-12)
    reference = squareform(cophenet(average(squareform(ADDITIVE))))
    np.testing.assert_allclose(build_tree(dm, "upgma").patristic(), reference, rtol=0, atol=1e-12)


def test_matrices_made_by_cladewright_are_frozen_too(tmp_path):
    # common practice: every DistanceMatrix, however made, refuses writes.
    path = tmp_path / "m.tsv"
    path.write_text("\ta\tb\na\t0\t0.5\nb\t0.5\t0\n")
    read = read_distance_matrix(path)
    names, seqs = simulate_dna(4, 80, seed=2)
    computed = distance_matrix(make_alignment(names, seqs), "p")
    for dm in (read, computed):
        with pytest.raises(ValueError):
            dm.values[0, 1] = -1.0
    assert read.values[0, 1] == 0.5  # source: the file written above


def test_the_distance_engine_hands_over_its_matrix_without_a_copy(monkeypatch):
    # source: docs/distances.md, "the working memory beside the n x n output is one block of counts":
    # with the block made small, the peak while computing stays near one matrix (a second copy of the
    # n x n output would double it). 1200 taxa x 1200 float32 = 5.76 MB.
    import cladewright.distances.counts as counts_module

    monkeypatch.setattr(counts_module, "BLOCK_BYTES", 2**16)
    names, seqs = simulate_dna(1200, 300, seed=3, divergence=(0.05, 0.15))
    aln = make_alignment(names, seqs)
    distance_matrix(aln, "k2p", dtype=np.float32)  # compile and warm up outside the measurement
    tracemalloc.start()
    try:
        dm = distance_matrix(aln, "k2p", dtype=np.float32)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert dm.values.nbytes == 1200 * 1200 * 4
    assert peak < 1.4 * dm.values.nbytes


# ---- item 7: gamma forms at any shape ----------------------------------------

# Three DNA sequences of 40 sites, no gaps, built so that each pair has known
# transitions (A<->G, C<->T) and transversions.
S0 = "AAAAAAAAAAAACCCCCCCCGGGGGGGGGTTTTTTTTTTT"


def _mutate(seq, changes):
    s = list(seq)
    for i, b in changes:
        s[i] = b
    return "".join(s)


S1 = _mutate(S0, [(0, "G"), (1, "G"), (2, "G"), (12, "T"), (13, "T"), (20, "T"), (29, "A")])
S2 = _mutate(S0, [(5, "G"), (14, "T"), (22, "A"), (23, "C"), (30, "G"), (31, "C"), (35, "A"), (36, "G")])
DNA_SEQS = [S0, S1, S2]
TRANSITIONS = {frozenset("AG"), frozenset("CT")}


def _pair_counts(x, y):
    """P1 (A<->G), P2 (C<->T), Q (transversions) and p, counted site by site."""
    diffs = [frozenset((a, b)) for a, b in zip(x, y) if a != b]
    p1 = sum(d == frozenset("AG") for d in diffs) / len(x)
    p2 = sum(d == frozenset("CT") for d in diffs) / len(x)
    q = sum(d not in TRANSITIONS for d in diffs) / len(x)
    return p1, p2, q, len(diffs) / len(x)


def _freqs():
    pooled = "".join(DNA_SEQS)
    return [pooled.count(b) / len(pooled) for b in "ACGT"]


def _minus_log(w, a):
    """-ln w (a = None) or its gamma form a (w^(-1/a) - 1) (Jin & Nei 1990), at a moderate shape."""
    return -math.log(w) if a is None else a * (w ** (-1.0 / a) - 1.0)


def published(model, x, y, a=None):
    """The closed forms, written out from the papers (plain: a = None)."""
    p1, p2, q, p = _pair_counts(x, y)
    if model == "jc69":  # Jukes & Cantor (1969)
        return 0.75 * _minus_log(1 - 4 * p / 3, a)
    if model == "k2p":  # Kimura (1980)
        return 0.5 * _minus_log(1 - 2 * (p1 + p2) - q, a) + 0.25 * _minus_log(1 - 2 * q, a)
    pa, pc, pg, pt = _freqs()
    if model == "f81":  # Felsenstein (1981)
        b = 1 - (pa * pa + pc * pc + pg * pg + pt * pt)
        return b * _minus_log(1 - p / b, a)
    if model == "tn93":  # Tamura & Nei (1993), eq. 7 and its gamma form
        pr, py = pa + pg, pc + pt
        w1 = 1 - pr * p1 / (2 * pa * pg) - q / (2 * pr)
        w2 = 1 - py * p2 / (2 * pc * pt) - q / (2 * py)
        w3 = 1 - q / (2 * pr * py)
        return (2 * pa * pg / pr * _minus_log(w1, a) + 2 * pc * pt / py * _minus_log(w2, a)
                + 2 * (pr * py - pa * pg * py / pr - pc * pt * pr / py) * _minus_log(w3, a))
    raise AssertionError(model)


PAIRS = [(0, 1), (0, 2), (1, 2)]


@pytest.fixture(scope="module")
def dna():
    return make_alignment(["s0", "s1", "s2"], DNA_SEQS)


@pytest.mark.parametrize("model", ["jc69", "k2p", "f81", "tn93"])
@pytest.mark.parametrize("shape", [1e12, 1e15, 1e100, 1e300])
def test_huge_gamma_shape_gives_the_plain_distance(dna, model, shape):
    # source: the plain closed forms (Jukes & Cantor 1969; Kimura 1980; Felsenstein 1981; Tamura &
    # Nei 1993) are the limit of their gamma forms as the shape grows (Jin & Nei 1990).
    d = distance_matrix(dna, model, gamma=shape).values
    for i, j in PAIRS:
        plain = published(model, DNA_SEQS[i], DNA_SEQS[j])
        assert plain > 0.05
        assert d[i, j] == pytest.approx(plain, rel=1e-9)


@pytest.mark.parametrize("model", ["jc69", "k2p", "f81", "tn93"])
def test_huge_gamma_shape_agrees_with_scikit_bio_plain(dna, model):
    # reference: skbio.alignment.align_dists without gamma (the limit of the gamma form).
    msa = TabularMSA([DNA(s) for s in DNA_SEQS], index=["s0", "s1", "s2"])
    ref = align_dists(msa, model).data
    for shape in (1e15, 1e300):
        np.testing.assert_allclose(distance_matrix(dna, model, gamma=shape).values, ref, rtol=1e-9, atol=0)


@pytest.mark.parametrize("model", ["jc69", "k2p", "f81", "tn93"])
@pytest.mark.parametrize("shape", [0.5, 1.0, 2.0])
def test_moderate_gamma_shapes_keep_the_published_values(dna, model, shape):
    # source: the gamma forms written out above (Jin & Nei 1990; Tamura & Nei 1993), and
    # skbio.alignment.align_dists with the same gamma shape.
    d = distance_matrix(dna, model, gamma=shape).values
    for i, j in PAIRS:
        assert d[i, j] == pytest.approx(published(model, DNA_SEQS[i], DNA_SEQS[j], shape), rel=1e-12)
    msa = TabularMSA([DNA(s) for s in DNA_SEQS], index=["s0", "s1", "s2"])
    np.testing.assert_allclose(d, align_dists(msa, model, gamma=shape).data, rtol=1e-9, atol=0)


@pytest.mark.parametrize("shape", [1e4, 1e8, 1e12, 1e15, 1e100])
def test_jc69_gamma_matches_50_digit_arithmetic(dna, shape):
    # source: Jin & Nei (1990) d = 3/4 a [(1 - 4p/3)^(-1/a) - 1], evaluated to 50 significant digits
    # (Python's decimal module), where double-precision powers lose the digits of a large shape.
    getcontext().prec = 50 + int(math.log10(shape))  # exp(x) - 1 keeps 50 digits for x ~ 1/shape
    d = distance_matrix(dna, "jc69", gamma=shape).values
    for i, j in PAIRS:
        p = Decimal(sum(a != b for a, b in zip(DNA_SEQS[i], DNA_SEQS[j]))) / 40
        a = Decimal(shape)
        exact = Decimal("0.75") * a * ((-(1 - 4 * p / 3).ln() / a).exp() - 1)
        assert d[i, j] == pytest.approx(float(exact), rel=1e-12)


@pytest.mark.parametrize("shape,expected", [
    # source: Zuckerkandl & Pauling (1965) -ln(1 - p) and its gamma form a [(1 - p)^(-1/a) - 1];
    # p = 3/20: -ln(0.85); a = 0.5: 0.5 (0.85^-2 - 1); a = 2: 2 (0.85^-0.5 - 1).
    (1e12, -math.log(0.85)), (1e300, -math.log(0.85)),
    (0.5, 0.5 * (0.85 ** -2 - 1)), (2.0, 2 * (0.85 ** -0.5 - 1)),
])
def test_poisson_gamma_at_any_shape(shape, expected):
    x = "ACDEFGHIKLMNPQRSTVWY"
    y = "MCDEFGHIKLANPQRSTVWK"  # 3 of 20 residues differ
    aln = make_alignment(["x", "y"], [x, y], "protein")
    assert distance_matrix(aln, "poisson", gamma=shape).values[0, 1] == pytest.approx(expected, rel=1e-9)


def test_a_huge_shape_gives_the_tree_of_the_plain_distances(dna):
    # source: as above, the plain form is the gamma form's limit (Jin & Nei 1990); the NJ branch lengths
    # of three taxa are the three-point formula l_a = (d_ab + d_ac - d_bc) / 2 (Saitou & Nei 1987).
    tree = build_tree(distance_matrix(dna, "k2p", gamma=1e300), "nj", negative="keep")
    d = {(i, j): published("k2p", DNA_SEQS[i], DNA_SEQS[j]) for i, j in PAIRS}
    expected = [(d[0, 1] + d[0, 2] - d[1, 2]) / 2, (d[0, 1] + d[1, 2] - d[0, 2]) / 2,
                (d[0, 2] + d[1, 2] - d[0, 1]) / 2]
    np.testing.assert_allclose(tree.length[:3], expected, rtol=1e-9)


def test_cli_huge_gamma_writes_the_plain_distances(tmp_path):
    # source: as above (Jin & Nei 1990); the file is read back with the standard library.
    src = tmp_path / "aln.fasta"
    src.write_text("".join(f">s{i}\n{s}\n" for i, s in enumerate(DNA_SEQS)))
    out = tmp_path / "m.tsv"
    result = CliRunner().invoke(main, ["distances", str(src), "-o", str(out), "--model", "jc69", "--gamma-shape", "1e300"])
    assert result.exit_code == 0, result.output
    rows = [line.split("\t") for line in out.read_text().splitlines()]
    for i, j in PAIRS:
        assert float(rows[i + 1][j + 1]) == pytest.approx(published("jc69", DNA_SEQS[i], DNA_SEQS[j]), rel=1e-9)


@pytest.mark.parametrize("bad", [0, 0.0, -0.5, -1e300, math.nan, math.inf, -math.inf, "0.5", True, [0.5]])
def test_shapes_that_are_not_positive_finite_numbers_are_refused(dna, bad):
    # source: the gamma shape alpha is a positive real number (Jin & Nei 1990).
    with pytest.raises(InputError, match="gamma shape .* must be a positive number") as caught:
        distance_matrix(dna, "jc69", gamma=bad)
    assert "\n" not in str(caught.value)


# ---- item 10: misuse gets InputError naming the parameter --------------------
# common practice: one-line messages naming the parameter and the fix (the project's error rule).

def _one_line(caught):
    assert "\n" not in str(caught.value)


def test_build_tree_of_a_bare_array_says_to_wrap_it():
    for call in (build_tree, build_tree_with_info):
        for bad in (ADDITIVE, ADDITIVE.tolist(), None):
            with pytest.raises(InputError, match=r"not a DistanceMatrix; wrap the array as "
                                                 r"DistanceMatrix\(names, values\)") as caught:
                call(bad, "nj")
            _one_line(caught)


@pytest.mark.parametrize("kwargs,phrase", [
    ({"method": None}, "method=None"),
    ({"method": 3}, "method=3"),
    ({"negative": None}, "negative=None"),
    ({"negative": np.array(["zero"])}, "negative=array"),
])
def test_build_tree_parameters(kwargs, phrase):
    with pytest.raises(InputError, match=phrase) as caught:
        build_tree(DistanceMatrix(NAMES, ADDITIVE), **kwargs)
    _one_line(caught)


@pytest.mark.parametrize("bad", [ADDITIVE, "aln.fasta", None, [["A", "C"]]])
def test_distance_matrix_of_something_else_than_an_alignment(bad):
    with pytest.raises(InputError, match=r"not an Alignment; read one with read_alignment\(path\)") as caught:
        distance_matrix(bad)
    _one_line(caught)


@pytest.mark.parametrize("values,phrase", [
    (np.array([[0, 1 + 0j], [1 + 0j, 0]]), r"complex128 \(complex\); distances must be real numbers"),
    (np.array([[0, 1 + 2j], [1 - 2j, 0]]), r"complex128 \(complex\)"),
    ([[False, True], [True, False]], r"bool \(true/false\)"),
    ([["0", "1"], ["1", "0"]], r"\(text\)"),
    (np.array([[0, 1], [1, 0]], dtype=object), r"object \(Python objects\)"),
    ([[0, 1], [1]], "not a rectangular array of numbers"),
    (np.ma.masked_array([[0, 1], [1, 0]], mask=[[0, 1], [1, 0]]), "masked cells"),
])
def test_matrices_that_are_not_real_numbers_are_refused(values, phrase):
    # np.asarray(..., float64) would keep only the real part (with a warning) or read True as 1.
    for validate in (True, False):
        with pytest.raises(InputError, match=phrase) as caught:
            DistanceMatrix(["a", "b"], values, validate=validate)
        _one_line(caught)


def test_whole_and_small_float_numbers_are_real_distances():
    # source: the integers and float32 numbers given are exactly representable in float64.
    dm = DistanceMatrix(["a", "b"], np.array([[0, 3], [3, 0]], dtype=np.int32))
    assert dm.values.dtype == np.float64 and dm.values[0, 1] == 3.0
    dm = DistanceMatrix(["a", "b"], np.array([[0, 0.5], [0.5, 0]], dtype=np.float16))
    assert dm.values[0, 1] == 0.5


@pytest.mark.parametrize("kwargs,phrase", [
    ({"names": None}, "names is NoneType, not a sequence of taxon names"),
    ({"names": 5}, "names is int"),
    ({"dtype": np.int64}, "dtype=<class 'numpy.int64'> is not supported; give numpy.float64 or numpy.float32"),
    ({"dtype": "nonsense"}, "dtype='nonsense' is not supported"),
    ({"names": ["a"]}, "1 names for a 2 x 2 matrix"),
])
def test_matrix_parameters(kwargs, phrase):
    args = {"names": ["a", "b"], "values": [[0, 1], [1, 0]], **kwargs}
    with pytest.raises(InputError, match=phrase) as caught:
        DistanceMatrix(args.pop("names"), args.pop("values"), **args)
    _one_line(caught)


@pytest.mark.parametrize("kwargs,phrase", [
    ({"model": "nope"}, "unknown model 'nope'"),
    ({"model": 42}, "unknown model 42"),
    ({"gaps": "none"}, "unknown gap mode gaps='none'; choose gaps=\"pairwise\" or \"complete\""),
    ({"gaps": ["pairwise"]}, "gaps=\\['pairwise'\\]"),
    ({"gaps": np.array(["pairwise", "complete"])}, "gaps=array"),
    ({"freqs": "both"}, "freqs='both'"),
    ({"saturated": "drop"}, "saturated='drop'"),
    ({"saturated": None}, "saturated=None"),
    ({"dtype": np.float16}, "dtype=<class 'numpy.float16'> is not supported"),
    ({"model": "p", "gamma": 0.5}, "model p has no gamma form"),
    ({"gamma": -2.0}, "gamma shape -2.0 must be a positive number"),
])
def test_distance_matrix_parameters(dna, kwargs, phrase):
    with pytest.raises(InputError, match=phrase) as caught:
        distance_matrix(dna, **kwargs)
    _one_line(caught)


def test_pattern_weights_must_be_whole_non_negative_counts(dna):
    s = dna.n_patterns
    for bad, phrase in [(np.full(s, 1.5), f"weights must be {s} whole numbers"),
                        (np.ones(s + 1, int), f"weights must be {s} whole numbers"),
                        (np.array(["1"] * s), f"weights must be {s} whole numbers"),
                        (np.full(s, -1), "weights must be >= 0")]:
        with pytest.raises(InputError, match=phrase) as caught:
            distance_matrix(dna, "p", weights=bad)
        _one_line(caught)
    # source: doubling every weight leaves each proportion, so each distance, unchanged (from the formula).
    np.testing.assert_array_equal(distance_matrix(dna, "p", weights=2.0 * dna.weights).values,
                                  distance_matrix(dna, "p").values)


@pytest.mark.parametrize("args,phrase", [
    ((["a", "b"], np.zeros((2, 3), np.uint8), "DNA"), "unknown alphabet 'DNA'; choose dna or protein"),
    ((["a", "b"], np.zeros((2, 3), np.uint8), None), "unknown alphabet None"),
    ((["a", "b"], np.full((2, 3), 9, np.uint8), "dna"), "states holds codes outside 0..5 for dna"),
    ((["a", "b"], np.full((2, 3), 256, np.int64), "protein"), "codes outside 0..21 for protein"),
    ((["a", "b"], np.full((2, 3), -1, np.int64), "dna"), "codes outside 0..5"),
    ((["a", "b"], np.zeros((2, 3)), "dna"), "states must be a 2-D integer array"),
    ((["a", "b"], np.zeros(3, np.uint8), "dna"), "states must be a 2-D integer array"),
    ((["a"], np.zeros((2, 3), np.uint8), "dna"), "1 names for 2 rows of states"),
    ((["a", "a"], np.zeros((2, 3), np.uint8), "dna"), "sequence name 'a' appears twice"),
])
def test_alignment_parameters(args, phrase):
    # source: the state codes of the alignment module's docstring: 0..k-1 states, k gap, k+1 missing,
    # k = 4 for DNA and 20 for protein (common practice for encoded alignments).
    with pytest.raises(InputError, match=phrase) as caught:
        Alignment(*args)
    _one_line(caught)
