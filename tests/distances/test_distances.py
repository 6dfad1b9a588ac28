"""Distances checked against scikit-bio's independent implementation
(reference: skbio.alignment.align_dists and skbio.sequence.distance), hand-worked
values from the published formulas, and properties that follow from them."""

import math

import numpy as np
import pytest
from hypothesis import assume, given, settings, strategies as st
from skbio import DNA, Protein, TabularMSA
from skbio.alignment import align_dists

from cladewright import errors
from cladewright.distances import MAX_LISTED, distance_matrix
from cladewright.distances.counts import state_frequencies

from simulate import AMINO_ACIDS, make_alignment, mutate, random_sequence, simulate_dna

# (our model, scikit-bio metric, gamma)
SKBIO_MODELS = [
    ("p", "pdist", None), ("jc69", "jc69", None), ("k2p", "k2p", None), ("f81", "f81", None),
    ("f84", "f84", None), ("tn93", "tn93", None), ("logdet", "logdet", None), ("paralinear", "paralin", None),
    ("jc69", "jc69", 0.6), ("k2p", "k2p", 0.6), ("f81", "f81", 1.3), ("tn93", "tn93", 0.8),
]


@pytest.fixture(scope="module")
def simulated():
    names, seqs = simulate_dna(25, 400, seed=11)
    return make_alignment(names, seqs), TabularMSA([DNA(s) for s in seqs], index=names)


@pytest.mark.parametrize("gaps", ["pairwise", "complete"])
@pytest.mark.parametrize("model,metric,gamma", SKBIO_MODELS)
def test_every_model_matches_scikit_bio(simulated, model, metric, gamma, gaps):
    # reference: skbio.alignment.align_dists (scikit-bio >= 0.7.2); shared_by_all=True is complete deletion.
    aln, msa = simulated
    kwargs = {} if gamma is None else {"gamma": gamma}
    if gaps == "complete" and model in ("f81", "f84", "tn93"):
        # scikit-bio takes frequencies from all sites before deletion; ours (freqs="alignment") come
        # from the retained sites, so hand it the same frequencies.
        use = np.all(aln.patterns < 4, axis=0)
        kwargs["freqs"] = state_frequencies(aln.patterns, aln.weights, 4, use)
    ours = distance_matrix(aln, model, gamma=gamma, gaps=gaps).values
    ref = align_dists(msa, metric, shared_by_all=(gaps == "complete"), **kwargs).data
    np.testing.assert_allclose(ours, ref, rtol=0, atol=1e-9)


def test_t92_equals_f84_at_t92_frequencies(simulated):
    # source: Tamura (1992): T92 is the F84/HKY form with pi_G = pi_C = theta/2 and pi_A = pi_T = (1 - theta)/2;
    # reference: skbio f84 at those frequencies.
    aln, msa = simulated
    pi = state_frequencies(aln.patterns, aln.weights, 4)
    theta = pi[1] + pi[2]
    t92_freqs = [(1 - theta) / 2, theta / 2, theta / 2, (1 - theta) / 2]
    ref = align_dists(msa, "f84", shared_by_all=False, freqs=t92_freqs).data
    np.testing.assert_allclose(distance_matrix(aln, "t92").values, ref, atol=1e-9)


@pytest.mark.parametrize("model,metric", [("tn93", "tn93"), ("f81", "f81"), ("f84", "f84")])
def test_pair_frequencies_match_scikit_bio_per_pair(model, metric):
    # reference: skbio.sequence.distance.<metric>(seq1, seq2), which estimates frequencies from the two
    # sequences; without gaps or ambiguity both use the same sites.
    import skbio.sequence.distance as skd

    names, seqs = simulate_dna(8, 300, seed=5, gaps=0, ambiguous=0)
    ours = distance_matrix(make_alignment(names, seqs), model, freqs="pair").values
    f = getattr(skd, metric)
    for i in range(len(seqs)):
        for j in range(i + 1, len(seqs)):
            assert ours[i, j] == pytest.approx(f(DNA(seqs[i]), DNA(seqs[j])), abs=1e-9)


def test_bootstrap_weights_equal_resampled_columns(simulated):
    # Felsenstein (1985): a replicate is the alignment with resampled columns. Reference: scikit-bio on the
    # explicitly resampled alignment; ours takes the same draw as weights over the site patterns.
    aln, msa = simulated
    rng = np.random.default_rng(3)
    cols = rng.integers(0, aln.n_sites, aln.n_sites)
    weights = np.bincount(aln.site_pattern[cols], minlength=aln.n_patterns)
    seqs = ["".join(str(s)[c] for c in cols) for s in msa]
    ref = align_dists(TabularMSA([DNA(s) for s in seqs]), "k2p", shared_by_all=False).data
    ours = distance_matrix(aln, "k2p", weights=weights).values
    np.testing.assert_allclose(ours, ref, atol=1e-9)


def _pair(p_sites, q_sites, length):
    """Two sequences differing by ``p_sites`` transitions and ``q_sites`` transversions."""
    a = ["A"] * length
    b = list(a)
    for k in range(p_sites):
        b[k] = "G"
    for k in range(p_sites, p_sites + q_sites):
        b[k] = "C"
    return make_alignment(["x", "y"], ["".join(a), "".join(b)])


@pytest.mark.parametrize("p,expected", [
    # source: Jukes & Cantor (1969), d = -3/4 ln(1 - 4p/3), worked by hand:
    (0.1, -0.75 * math.log(1 - 0.4 / 3)),   # 0.107326
    (0.5, -0.75 * math.log(1 / 3)),         # 0.823959
])
def test_jc69_hand_values(p, expected):
    aln = _pair(0, int(p * 100), 100)
    assert distance_matrix(aln, "jc69").values[0, 1] == pytest.approx(expected, rel=1e-12)
    assert expected == pytest.approx({0.1: 0.1073256, 0.5: 0.8239592}[p], abs=1e-6)


def test_k2p_hand_value():
    # source: Kimura (1980), d = -1/2 ln(1 - 2P - Q) - 1/4 ln(1 - 2Q); P = 0.1, Q = 0.05 by hand:
    # -0.5 ln 0.75 - 0.25 ln 0.9 = 0.143841 + 0.026340 = 0.170181
    aln = _pair(10, 5, 100)
    assert distance_matrix(aln, "k2p").values[0, 1] == pytest.approx(0.1701811, abs=1e-6)


def test_jc69_saturates_at_three_quarters():
    # source: Jukes & Cantor (1969): the logarithm's argument 1 - 4p/3 is <= 0 for p >= 0.75.
    names = ["x", "y", "z"]
    aln = make_alignment(names, ["ACGTACGT", "CGTACGTA", "ACGTACGA"])  # x-y differ at every site
    with pytest.raises(errors.SaturationError, match="x-y"):
        distance_matrix(aln, "jc69")
    dm = distance_matrix(aln, "jc69", saturated="cap")
    assert dm.info["saturated"] == 2  # x-y and y-z (p = 7/8); x-z (p = 1/8) is defined
    finite = -0.75 * math.log(1 - 4 / 3 * 0.125)
    assert dm.values[0, 1] == pytest.approx(max(1.0, 2 * finite))


@pytest.mark.parametrize("model,formula", [
    # source: Zuckerkandl & Pauling (1965), Poisson d = -ln(1 - p); Kimura (1983), d = -ln(1 - p - p^2/5)
    ("poisson", lambda p: -np.log(1 - p)),
    ("kimura", lambda p: -np.log(1 - p - 0.2 * p * p)),
    ("p", lambda p: p),
])
def test_protein_models_from_scikit_bio_p_distance(model, formula):
    # reference: skbio pdist on Protein sequences (canonical residues, pairwise deletion)
    rng = np.random.default_rng(8)
    root = random_sequence(rng, 200, AMINO_ACIDS)
    seqs = []
    for _ in range(6):
        s = mutate(rng, root, (0.05, 0.4), AMINO_ACIDS)  # each sequence its own rate, uniform on the range
        s[rng.random(200) < 0.03] = "X"
        s[rng.random(200) < 0.03] = "-"
        seqs.append("".join(s))
    names = [f"p{i}" for i in range(6)]
    p = align_dists(TabularMSA([Protein(s) for s in seqs]), "pdist", shared_by_all=False).data
    ours = distance_matrix(make_alignment(names, seqs, "protein"), model).values
    np.testing.assert_allclose(ours, formula(p) * (1 - np.eye(6)), atol=1e-9)


def test_poisson_gamma_hand_value():
    # source: gamma form a[(1 - p)^(-1/a) - 1] (Jin & Nei 1990 for the equal-input case); p = 0.2, a = 0.5:
    # 0.5 * (0.8^-2 - 1) = 0.28125
    seqs = ["A" * 10, "C" * 2 + "A" * 8]
    aln = make_alignment(["x", "y"], seqs, "protein")
    assert distance_matrix(aln, "poisson", gamma=0.5).values[0, 1] == pytest.approx(0.28125, rel=1e-12)


def test_nucleotide_model_on_protein_is_an_error():
    aln = make_alignment(["x", "y"], ["MKLV", "MKIV"], "protein")
    with pytest.raises(errors.InputError, match="is for dna but the alignment is protein"):
        distance_matrix(aln, "k2p")


def test_no_shared_site_names_the_pair():
    aln = make_alignment(["x", "y", "z"], ["AC--", "--GT", "ACGT"])
    with pytest.raises(errors.InputError, match="'x' and 'y' share no unambiguous site"):
        distance_matrix(aln, "p")


@pytest.mark.parametrize("bad", [0, -1.0, float("nan")])
def test_non_positive_gamma_is_an_error(bad):
    names, seqs = simulate_dna(3, 50, seed=1)
    with pytest.raises(errors.InputError, match="positive"):
        distance_matrix(make_alignment(names, seqs), "k2p", gamma=bad)


def test_float32_matrix_agrees_with_float64(simulated):
    aln, _ = simulated
    d64 = distance_matrix(aln, "tn93").values
    d32 = distance_matrix(aln, "tn93", dtype=np.float32).values
    assert d32.dtype == np.float32
    np.testing.assert_allclose(d32, d64, rtol=1e-6, atol=1e-7)


@st.composite
def alignments(draw):
    n = draw(st.integers(2, 7))
    length = draw(st.integers(5, 60))
    seed = draw(st.integers(0, 2**32 - 1))
    names, seqs = simulate_dna(n, length, seed, gaps=0.1, ambiguous=0.05, divergence=(0.0, 0.25))
    return make_alignment(names, seqs)


def _plain_pair_proportions(states):
    """Per pair, over the sites where both states are A, C, G or T (codes 0..3; gaps and ambiguity codes
    left out pairwise): the number of such sites, the proportion of differences p, of transitions P
    (A<->G, C<->T) and of transversions Q. A plain loop over pairs, written for this test."""
    n = states.shape[0]
    sites, p, P, Q = (np.zeros((n, n)) for _ in range(4))
    for i in range(n):
        for j in range(n):
            a, b = states[i], states[j]
            both = (a < 4) & (b < 4)
            m = both.sum()
            sites[i, j] = m
            if m:
                diff = both & (a != b)
                ts = diff & (np.abs(a.astype(int) - b.astype(int)) == 2)  # A=0<->G=2, C=1<->T=3
                p[i, j], P[i, j], Q[i, j] = diff.sum() / m, ts.sum() / m, (diff & ~ts).sum() / m
    return sites, p, P, Q


@settings(max_examples=60, deadline=None)
@given(alignments(), st.floats(0.2, 5.0))
def test_properties(aln, alpha):
    # Every example checks values: p (differences over compared sites, common practice), JC69
    # d = -3/4 ln(1 - 4p/3) (Jukes & Cantor 1969), K2P d = -1/2 ln(1 - 2P - Q) - 1/4 ln(1 - 2Q)
    # (Kimura 1980) and their gamma forms 3/4 a [(1 - 4p/3)^(-1/a) - 1] and
    # a/2 [(1 - 2P - Q)^(-1/a) + 1/2 (1 - 2Q)^(-1/a) - 3/2] (Jin & Nei 1990), all computed plainly here;
    # a pair whose logarithm's argument is <= 0 is undefined and must be named in the error; and, from the
    # formulas (common practice), symmetric, zero diagonal, non-negative, JC69 and K2P never below p, a
    # gamma form never below its plain form.
    sites, p_plain, P, Q = _plain_pair_proportions(aln.states)
    off = ~np.eye(aln.n_taxa, dtype=bool)
    assume(np.all(sites[off] > 0))  # a pair without shared sites is an error, checked elsewhere
    args = {"jc69": [1 - 4 * p_plain / 3], "k2p": [1 - 2 * P - Q, 1 - 2 * Q]}
    # a logarithm's argument within rounding of 0 may fall either side of it: not a test of the formula
    assume(all(np.all(np.abs(x[off]) > 1e-9) for xs in args.values() for x in xs))
    p = distance_matrix(aln, "p").values
    np.testing.assert_allclose(p, p_plain, rtol=0, atol=1e-12)
    for model, xs in args.items():
        undefined = off & np.logical_or.reduce([x <= 0 for x in xs])
        if undefined.any():
            for gamma in (None, alpha):
                with pytest.raises(errors.SaturationError) as caught:
                    distance_matrix(aln, model, gamma=gamma)
                named = {tuple(sorted(pair)) for pair in caught.value.pairs}
                expected = {(i, j) for i, j in zip(*np.nonzero(undefined)) if i < j}
                # the message lists the first MAX_LISTED pairs and counts them all
                assert named <= expected and len(named) == min(len(expected), MAX_LISTED)
                assert f"for {len(expected)} pair(s)" in str(caught.value)
            continue
        d = distance_matrix(aln, model).values
        g = distance_matrix(aln, model, gamma=alpha).values
        with np.errstate(divide="ignore"):
            if model == "jc69":
                (x,) = xs
                want_d = -0.75 * np.log(x)
                want_g = 0.75 * alpha * (x ** (-1 / alpha) - 1)
            else:
                x1, x2 = xs
                want_d = -0.5 * np.log(x1) - 0.25 * np.log(x2)
                want_g = alpha / 2 * (x1 ** (-1 / alpha) + 0.5 * x2 ** (-1 / alpha) - 1.5)
        np.testing.assert_allclose(d[off], want_d[off], rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(g[off], want_g[off], rtol=1e-9, atol=1e-12)
        for m in (d, g):
            assert np.array_equal(m, m.T)
            assert np.all(np.diag(m) == 0)
            assert np.all(m >= 0)
        assert np.all(d >= p - 1e-12)
        assert np.all(g >= d - 1e-12)


def test_saturated_pairs_are_named_across_count_blocks(monkeypatch):
    # source: Jukes & Cantor (1969): JC69 is undefined at p >= 0.75. Sequences 'u*' are all A and
    # sequences 'v*' all C (p = 1 between the groups, 0 within), so exactly the u-v pairs are
    # undefined, whatever block of rows they are counted in.
    import cladewright.distances.counts as counts_module

    monkeypatch.setattr(counts_module, "BLOCK_BYTES", 64)  # one row per block
    names = ["u0", "v0", "u1", "u2", "v1"]
    aln = make_alignment(names, ["AAAA" if n[0] == "u" else "CCCC" for n in names])
    with pytest.raises(errors.SaturationError) as caught:
        distance_matrix(aln, "jc69")
    expected = {(a, b) for i, a in enumerate(names) for b in names[i + 1:] if a[0] != b[0]}
    assert {(names[i], names[j]) for i, j in caught.value.pairs} == expected
