"""Maximum-likelihood distances (distances/likelihood.py, distances/rate_estimates.py, _kernels/likelihood.py,
_kernels/likelihood_blocks.py).

Sources of the values checked against, named per test:
- closed forms: JC69 (Jukes & Cantor 1969), its K-state form -(K-1)/K ln(1 - K p/(K-1)) for the 20-state
  equal-rates model (the same derivation for K states, as the issue states it: -(19/20) ln(1 - 20p/19)), their
  gamma forms (Jin & Nei 1990) and K2P (Kimura 1980);
- independent numerics: scipy.linalg.expm and fractional_matrix_power for P(t) (the likelihood written out
  in numpy), scipy.optimize for a free transition/transversion ratio, scipy.optimize.brentq for the discrete
  gamma moment equation;
- pyvolve 1.1.0 (Spielman & Wilke 2015), an independent simulator, for LG+gamma and GTR data on known trees;
- Felsenstein (1985): a bootstrap replicate is the alignment with resampled columns;
- Waddell & Steel (1997): Pi^-1 F = exp(Q t) (and its gamma forms) inverted exactly on exact divergence.
"""

import itertools

import numpy as np
import pytest
import pyvolve
import scipy.linalg
import scipy.optimize
from click.testing import CliRunner

from cladewright import errors
from cladewright.alignment import Alignment, encode
from cladewright.cli import main
from cladewright.distances import MODELS, distance_matrix
from cladewright.distances import likelihood as lik
from cladewright.distances import rate_estimates as est
from cladewright.distances.counts import state_frequencies
from cladewright.distances.rate_models import discrete_gamma_rates, protein_model, rate_matrix

from simulate import make_alignment, simulate_dna

PROTEIN = "ACDEFGHIKLMNPQRSTVWY"


def tables_of(aln):
    """Each pair's (K, K) table of weighted site counts, by brute force over the sites (numpy)."""
    k = aln.n_states
    out = {}
    for i, j in itertools.combinations(range(aln.n_taxa), 2):
        x, y = aln.states[i], aln.states[j]
        ok = (x < k) & (y < k)
        t = np.zeros((k, k))
        np.add.at(t, (x[ok], y[ok]), 1.0)
        out[i, j] = t
    return out


def loglik(table, S, pi, t, gamma=None, categories=None):
    """ln L(t) = sum n_ab ln(pi_a P_ab(t)), P from scipy's matrix functions (independent of the kernels)."""
    Q = rate_matrix(S, pi)
    if gamma is None:
        P = scipy.linalg.expm(Q * t)
    elif categories is None:
        P = np.real(scipy.linalg.fractional_matrix_power(np.eye(len(pi)) - Q * t / gamma, -gamma))
    else:
        P = np.mean([scipy.linalg.expm(Q * t * r) for r in discrete_gamma_rates(gamma, categories)], axis=0)
    return float(np.sum(table * np.log(pi[:, None] * P)))


def random_tables(rng, k, m, diagonal=(50, 400), off=(0, 40)):
    t = rng.integers(*off, (m, k, k)).astype(float)
    for a in range(k):
        t[:, a, a] = rng.integers(*diagonal, m)
    return t


def gtr_matrix(rates):
    S = np.zeros((4, 4))
    S[np.triu_indices(4, 1)] = rates
    return S + S.T


@pytest.fixture(scope="module")
def lg_data():
    """8 proteins x 600 sites simulated by pyvolve under LG + gamma(1, 4 categories), with some gaps."""
    aln = pyvolve_alignment("((a:0.1,b:0.2):0.1,(c:0.05,d:0.3):0.2,((e:0.1,f:0.15):0.1,(g:0.3,h:0.02):0.05):0.1);",
                            pyvolve.Model("LG", alpha=1.0, num_categories=4), 600, seed=3, alphabet="protein")
    rng = np.random.default_rng(4)
    states = aln.states.copy()
    states[rng.random(states.shape) < 0.03] = 20  # gaps
    return Alignment(aln.names, states, "protein", source="lg")


def pyvolve_alignment(newick, model, sites, seed, alphabet):
    # pyvolve draws the rate categories from numpy's global generator: seeded here, and put back after
    state = np.random.get_state()
    np.random.seed(seed)
    try:
        evolver = pyvolve.Evolver(tree=pyvolve.read_tree(tree=newick), partitions=pyvolve.Partition(models=model,
                                                                                                    size=sites))
        evolver(seqfile=None, ratefile=None, infofile=None, seed=seed)
        seqs = evolver.get_sequences()
    finally:
        np.random.set_state(state)
    names = sorted(seqs)
    return make_alignment(names, [seqs[n] for n in names], alphabet)


# ---- equal rates and frequencies: the closed forms -------------------------------------------------------

@pytest.mark.parametrize("gamma", [None, 0.3, 1.0, 5.0])
def test_four_states_equal_rates_is_jc69(gamma):
    # source: JC69 d = -3/4 ln(1 - 4p/3) (Jukes & Cantor 1969); gamma form 3/4 a [(1 - 4p/3)^(-1/a) - 1]
    # (Jin & Nei 1990)
    tables = random_tables(np.random.default_rng(1), 4, 300)
    p = 1 - np.trace(tables, axis1=1, axis2=2) / tables.sum(axis=(1, 2))
    y = 1 - 4 * p / 3
    expected = -0.75 * np.log(y) if gamma is None else 0.75 * gamma * (y ** (-1 / gamma) - 1)
    d = lik.pair_distances(tables, np.ones((4, 4)), np.full(4, 0.25), gamma)
    np.testing.assert_allclose(d, expected, rtol=1e-9, atol=0)


@pytest.mark.parametrize("gamma", [None, 0.5, 2.0])
def test_twenty_states_equal_rates_is_the_k_state_closed_form(gamma):
    # source: -(19/20) ln(1 - 20p/19) for 20 equally likely states (the JC69 derivation for K = 20, as the
    # issue gives it); gamma form 19/20 a [(1 - 20p/19)^(-1/a) - 1] (Jin & Nei 1990)
    tables = random_tables(np.random.default_rng(2), 20, 200, diagonal=(0, 30), off=(0, 3))
    p = 1 - np.trace(tables, axis1=1, axis2=2) / tables.sum(axis=(1, 2))
    y = 1 - 20 * p / 19
    expected = -0.95 * np.log(y) if gamma is None else 0.95 * gamma * (y ** (-1 / gamma) - 1)
    d = lik.pair_distances(tables, np.ones((20, 20)), np.full(20, 0.05), gamma)
    np.testing.assert_allclose(d, expected, rtol=1e-9, atol=0)


def test_discrete_gamma_equal_rates_solves_the_moment_equation():
    # source: under JC69 the proportion of differences p is sufficient, so the ML distance solves
    # p = 3/4 (1 - mean_c exp(-4/3 r_c d)) with r_c the category means of Yang (1994); solved by brentq
    tables = random_tables(np.random.default_rng(3), 4, 40)
    p = 1 - np.trace(tables, axis1=1, axis2=2) / tables.sum(axis=(1, 2))
    rates = discrete_gamma_rates(0.5, 4)
    d = lik.pair_distances(tables, np.ones((4, 4)), np.full(4, 0.25), 0.5, 4)
    for di, pi_ in zip(d, p):
        ref = scipy.optimize.brentq(lambda x: 0.75 * (1 - np.mean(np.exp(-4 / 3 * rates * x))) - pi_, 1e-9, 50,
                                    xtol=1e-15, rtol=1e-14)
        assert di == pytest.approx(ref, rel=1e-9)


def test_saturated_and_empty_tables_give_nan():
    # source: JC69 is undefined at p >= 3/4 (Jukes & Cantor 1969): the likelihood rises without end; a pair
    # without sites has no likelihood to maximise; identical sequences are at 0 (common practice)
    t = np.array([np.diag([10.0, 10, 10, 10]), np.zeros((4, 4)), np.diag([5.0, 0, 0, 0])])
    t[0] += 10 * (1 - np.eye(4))  # p = 120 / 160 = 3/4
    d = lik.pair_distances(t, np.ones((4, 4)), np.full(4, 0.25))
    assert np.isnan(d[0]) and np.isnan(d[1]) and d[2] == 0.0


# ---- K2P: a free transition/transversion ratio per pair -------------------------------------------------

def k80_table(rng):
    same, ts, tv = rng.integers(600, 900), rng.integers(40, 150), rng.integers(20, 120)
    t = np.zeros((4, 4))
    t[np.diag_indices(4)] = same / 4
    for a, b in ((0, 2), (2, 0), (1, 3), (3, 1)):
        t[a, b] = ts / 4
    for a, b in itertools.product((0, 2), (1, 3)):
        t[a, b] = t[b, a] = tv / 8
    return t


@pytest.mark.parametrize("seed", range(4))
def test_free_kappa_per_pair_is_kimuras_formula(seed):
    # source: Kimura (1980): d = -1/2 ln(1 - 2P - Q) - 1/4 ln(1 - 2Q), the joint maximum-likelihood
    # estimate under K80; checked by a joint maximisation over (t, kappa) with scipy.optimize on the
    # likelihood written with scipy.linalg.expm, then by our search with kappa held at that maximum
    table = k80_table(np.random.default_rng(seed))
    n = table.sum()
    P = (table[0, 2] + table[2, 0] + table[1, 3] + table[3, 1]) / n
    Q = 1 - np.trace(table) / n - P
    kimura = -0.5 * np.log(1 - 2 * P - Q) - 0.25 * np.log(1 - 2 * Q)
    pi = np.full(4, 0.25)

    def minus(x):
        return -loglik(table, est.hky_exchangeabilities(np.exp(x[1])), pi, np.exp(x[0]))

    best = scipy.optimize.minimize(minus, [np.log(kimura), np.log(2.0)], method="Nelder-Mead",
                                   options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 4000})
    assert np.exp(best.x[0]) == pytest.approx(kimura, rel=1e-6)
    # with kappa at its joint maximum (Kimura 1980: alpha t and beta t from P and Q), the search over t alone
    # lands on Kimura's distance
    beta_t = -0.25 * np.log(1 - 2 * Q)
    alpha_t = -0.5 * np.log(1 - 2 * P - Q) + 0.25 * np.log(1 - 2 * Q)
    d = lik.pair_distances(table, est.hky_exchangeabilities(alpha_t / beta_t), pi)
    assert d == pytest.approx(kimura, rel=1e-9)


# ---- the returned distance is the likelihood's maximum --------------------------------------------------

@pytest.mark.parametrize("gamma,categories", [(None, None), (0.6, None), (0.6, 4)])
@pytest.mark.parametrize("model", ["lg", "jtt"])
def test_derivative_zero_and_a_maximum(lg_data, model, gamma, categories):
    # source: the likelihood written out with scipy's matrix functions (independent of our eigen form):
    # at the returned distance its central-difference slope vanishes and it is lower on both sides
    d = distance_matrix(lg_data, model, gamma=gamma, gamma_categories=categories).values
    S, pi = protein_model(model)
    for (i, j), table in list(tables_of(lg_data).items())[::4]:
        t = d[i, j]
        h = 1e-4 * t
        lo, mid, hi = (loglik(table, S, pi, x, gamma, categories) for x in (t - h, t, t + h))
        slope = (hi - lo) / (2 * h)
        curvature = (hi - 2 * mid + lo) / h ** 2
        assert curvature < 0
        assert abs(slope / curvature) < 1e-6 * t  # the Newton step left: the maximum is within 1e-6 of t
        for delta in (1e-3 * t, 0.05 * t):
            assert loglik(table, S, pi, t - delta, gamma, categories) < mid
            assert loglik(table, S, pi, t + delta, gamma, categories) < mid


def test_folded_spectral_form_equals_expm():
    # source: scipy.linalg.expm: the kernel's folded terms pi_a delta_ab + sum_k c_abk (exp(lambda_k t) - 1)
    # are pi_a P_ab(t), symmetric in a and b; P(t) itself to 1e-12
    S, pi = protein_model("wag")
    m = lik.fit_model(S, pi)
    Q = rate_matrix(S, pi)
    for t in (1e-6, 0.01, 0.3, 2.0):
        folded = (m.base + m.coef @ np.expm1(m.lam * t)).reshape(20, 20)
        np.testing.assert_allclose(folded, pi[:, None] * scipy.linalg.expm(Q * t), rtol=1e-10, atol=1e-15)
        np.testing.assert_allclose(folded / pi[:, None], scipy.linalg.expm(Q * t), rtol=0, atol=1e-12)


# ---- simulated data --------------------------------------------------------------------------------------

LG_TREE = "((a:0.10,b:0.25):0.12,(c:0.08,d:0.30):0.10,(e:0.20,f:0.05):0.15);"
LG_EDGES = {"a": ("ab", 0.10), "b": ("ab", 0.25), "ab": ("r", 0.12), "c": ("cd", 0.08), "d": ("cd", 0.30),
            "cd": ("r", 0.10), "e": ("ef", 0.20), "f": ("ef", 0.05), "ef": ("r", 0.15)}


def tree_distance(x, y, edges):
    """The path length between two leaves, walked up the parent map by hand."""
    def up(v):
        out, d = {v: 0.0}, 0.0
        while v in edges:
            v, length = edges[v][0], d + edges[v][1]
            d = out[v] = length
        return out
    ux, uy = up(x), up(y)
    return min(ux[v] + uy[v] for v in ux if v in uy)


def test_lg_gamma_on_pyvolve_data_is_unbiased():
    # source: pyvolve simulates 5,000 sites along a known six-leaf tree under LG with discrete gamma rates
    # (shape 1, 4 categories; Yang 1994); the estimates over the true path lengths average within 2%
    # (four independent simulations pooled, each pair's distance by our LG + the same discrete gamma)
    ratios = []
    for seed in range(4):
        aln = pyvolve_alignment(LG_TREE, pyvolve.Model("LG", alpha=1.0, num_categories=4), 5000, seed, "protein")
        d = distance_matrix(aln, "lg", gamma=1.0, gamma_categories=4).values
        for i, j in itertools.combinations(range(6), 2):
            ratios.append(d[i, j] / tree_distance(aln.names[i], aln.names[j], LG_EDGES))
    assert abs(np.mean(ratios) - 1) < 0.02


def test_gtr_rates_and_distances_on_pyvolve_data():
    # source: pyvolve simulates 8,000 sites on a star of eight equal branches (every pair at 0.3) under GTR
    # with known rates and frequencies; the pooled estimate (Waddell & Steel 1997) recovers the rates (the
    # pairs all at one distance, so pooling adds no bias) and each pair's GTR distance the true 0.3
    rates = np.array([1.0, 4.0, 0.5, 1.5, 5.0, 1.0])  # AC AG AT CG CT GT
    freqs = np.array([0.3, 0.2, 0.2, 0.3])
    mu = {a + b: r for (a, b), r in zip(("AC", "AG", "AT", "CG", "CT", "GT"), rates)}
    mu.update({b + a: r for (a, b), r in zip(("AC", "AG", "AT", "CG", "CT", "GT"), rates)})
    model = pyvolve.Model("nucleotide", {"mu": mu, "state_freqs": list(freqs)})
    aln = pyvolve_alignment("(" + ",".join(f"s{i}:0.15" for i in range(8)) + ");", model, 8000, 5, "dna")
    dm = distance_matrix(aln, "gtr")
    got = np.array(list(dm.info["rates"].values()))
    np.testing.assert_allclose(got, rates / rates.mean(), rtol=0.15)  # sampling noise of 8,000 sites
    np.testing.assert_allclose(dm.info["base_freqs"], freqs, atol=0.01)
    upper = dm.values[np.triu_indices(8, 1)]
    assert abs(upper.mean() / 0.3 - 1) < 0.02
    hky = distance_matrix(aln, "hky")
    assert hky.info["kappa"] == pytest.approx(4.5 / 1.0, rel=0.15)  # mean transition / mean transversion


# ---- the rate estimate -----------------------------------------------------------------------------------

@pytest.mark.parametrize("gamma,categories", [(None, None), (0.7, None), (0.7, 4)])
def test_waddell_steel_inversion_is_exact_on_exact_divergence(gamma, categories):
    # source: Waddell & Steel (1997): with F = Pi P(t) exactly (P from scipy.linalg.expm, or its gamma
    # forms), the inversion gives back the model's exchangeabilities (up to scale) and frequencies
    S = gtr_matrix([1.0, 4.0, 0.5, 1.5, 5.0, 0.8])
    pi = np.array([0.35, 0.15, 0.2, 0.3])
    Q = rate_matrix(S, pi)
    t = 0.4
    if gamma is None:
        P = scipy.linalg.expm(Q * t)
    elif categories is None:
        P = np.real(scipy.linalg.fractional_matrix_power(np.eye(4) - Q * t / gamma, -gamma))
    else:
        P = np.mean([scipy.linalg.expm(Q * t * r) for r in discrete_gamma_rates(gamma, categories)], axis=0)
    got_S, got_pi, fallback = est.gtr_from_divergence(1e6 * pi[:, None] * P, gamma, categories)
    assert not fallback
    upper = np.triu_indices(4, 1)
    np.testing.assert_allclose(got_S[upper], S[upper] / S[upper].mean(), rtol=1e-8)
    np.testing.assert_allclose(got_pi, pi, rtol=1e-12)


def test_pooled_divergence_is_the_sum_over_pairs():
    # source: the definition (every ordered pair's table summed), by brute force over pairs, with a row
    # standing for two identical sequences counted twice
    names, seqs = simulate_dna(7, 120, seed=2)
    aln = make_alignment(names, seqs)
    brute = sum(t + t.T for t in tables_of(aln).values())
    np.testing.assert_array_equal(est.pooled_divergence(aln.patterns, aln.weights, 4), brute)
    doubled = make_alignment(names + ["copy"], seqs + [seqs[0]])
    both = sum(t + t.T for t in tables_of(doubled).values())
    got = est.pooled_divergence(aln.patterns, aln.weights, 4, multiplicity=[2, 1, 1, 1, 1, 1, 1])
    np.testing.assert_array_equal(got, both)


def test_rates_fall_back_when_the_logarithm_is_undefined():
    # source: the fallback stated in docs/distances.md: an eigenvalue of Pi^-1/2 F Pi^-1/2 at or below 0
    # (here: every pair differs at every site, in a cycle A->C->G->T->A) gives equal exchangeabilities
    F = np.array([[0, 10, 0, 0], [0, 0, 10, 0], [0, 0, 0, 10], [10, 0, 0, 0]], dtype=float)
    S, pi, fallback = est.gtr_from_divergence(F + F.T)
    assert fallback and np.all(S[np.triu_indices(4, 1)] == 1.0)


# ---- the alignment path ------------------------------------------------------------------------------------

@pytest.mark.parametrize("freqs", ["model", "alignment"])
def test_protein_matrix_is_each_pairs_table_solved(lg_data, freqs):
    # source: each pair's table counted by brute force over the sites (numpy), solved by the same search;
    # frequencies the model's (published) or the alignment's (state_frequencies, common practice)
    dm = distance_matrix(lg_data, "lg", gamma=0.8, freqs=freqs)
    S, pi = protein_model("lg")
    if freqs == "alignment":
        pi = state_frequencies(lg_data.patterns, lg_data.weights, 20)
    assert dm.info["freqs"] == freqs
    for (i, j), table in tables_of(lg_data).items():
        assert dm.values[i, j] == pytest.approx(lik.pair_distances(table, S, pi, 0.8), rel=1e-12)


@pytest.mark.parametrize("model", ["gtr", "hky"])
def test_dna_matrix_is_each_pairs_table_solved(model):
    # source: as above, for the bit-parallel DNA tables, with the model the matrix reports in its info
    names, seqs = simulate_dna(12, 500, seed=8)
    aln = make_alignment(names, seqs)
    dm = distance_matrix(aln, model, gamma=0.5)
    S = gtr_matrix(list(dm.info["rates"].values())) if model == "gtr" else est.hky_exchangeabilities(
        dm.info["kappa"])
    for (i, j), table in tables_of(aln).items():
        want = lik.pair_distances(table, S, np.array(dm.info["base_freqs"]), 0.5)
        assert dm.values[i, j] == pytest.approx(want, rel=1e-12)


def test_default_frequencies_and_refusals(lg_data):
    # source: the issue: freqs="model" is the default of the amino-acid models; common practice for errors
    np.testing.assert_array_equal(distance_matrix(lg_data, "wag").values,
                                  distance_matrix(lg_data, "wag", freqs="model").values)
    assert distance_matrix(lg_data).info["model"] == "lg"  # the default follows the alphabet
    with pytest.raises(errors.InputError, match="freqs=\"model\" or freqs=\"alignment\""):
        distance_matrix(lg_data, "lg", freqs="pair")
    dna = make_alignment(["a", "b"], ["ACGTACGTAA", "ACGTACGTAC"])
    assert distance_matrix(dna).info["model"] == "k2p"
    with pytest.raises(errors.InputError, match="freqs=\"model\" is for the protein models"):
        distance_matrix(dna, "f81", freqs="model")
    with pytest.raises(errors.InputError, match="freqs=\"alignment\""):
        distance_matrix(dna, "gtr", freqs="pair")
    for kwargs, phrase in (({"gamma_categories": 4}, "needs a gamma shape"),
                           ({"gamma_categories": 0, "gamma": 1.0}, "whole number from 1 to 256"),
                           ({"gamma_categories": True, "gamma": 1.0}, "whole number"),
                           ({"model": "poisson", "gamma_categories": 4, "gamma": 1.0}, "likelihood models")):
        with pytest.raises(errors.InputError, match=phrase):
            distance_matrix(lg_data, **{"model": "lg", **kwargs})


def test_bootstrap_weights_equal_resampled_columns(lg_data):
    # source: Felsenstein (1985): a replicate is the alignment with resampled columns; ours takes the draw
    # as weights over the same patterns. Weights equal to the pattern counts give the original matrix.
    rng = np.random.default_rng(5)
    cols = rng.integers(0, lg_data.n_sites, lg_data.n_sites)
    weights = np.bincount(lg_data.site_pattern[cols], minlength=lg_data.n_patterns)
    resampled = Alignment(lg_data.names, lg_data.states[:, cols], "protein")
    for model, kwargs in (("lg", {"gamma": 0.7}), ("wag", {"freqs": "alignment", "serial": True})):
        np.testing.assert_allclose(distance_matrix(lg_data, model, weights=weights, **kwargs).values,
                                   distance_matrix(resampled, model, **kwargs).values, rtol=1e-12, atol=0)
        np.testing.assert_array_equal(distance_matrix(lg_data, model, weights=lg_data.weights, **kwargs).values,
                                      distance_matrix(lg_data, model, **kwargs).values)
    names, seqs = simulate_dna(10, 300, seed=9)
    dna = make_alignment(names, seqs)
    cols = rng.integers(0, dna.n_sites, dna.n_sites)
    w = np.bincount(dna.site_pattern[cols], minlength=dna.n_patterns)
    redrawn = Alignment(dna.names, dna.states[:, cols], "dna")
    for serial in (False, True):
        np.testing.assert_allclose(distance_matrix(dna, "gtr", weights=w, serial=serial).values,
                                   distance_matrix(redrawn, "gtr").values, rtol=1e-12, atol=0)


@pytest.mark.parametrize("model", ["lg", "gtr"])
def test_shuffled_sequences_and_columns_change_nothing(lg_data, model):
    # source: metamorphic (common practice): a distance depends on the pair's sites, not on the order of
    # the sequences or of the columns
    if model == "lg":
        aln = lg_data
    else:
        names, seqs = simulate_dna(9, 400, seed=10)
        aln = make_alignment(names, seqs)
    rng = np.random.default_rng(6)
    rows, cols = rng.permutation(aln.n_taxa), rng.permutation(aln.n_sites)
    base = distance_matrix(aln, model, gamma=0.9).values
    by_rows = distance_matrix(Alignment([aln.names[r] for r in rows], aln.states[rows], aln.alphabet), model,
                              gamma=0.9).values
    np.testing.assert_allclose(by_rows, base[np.ix_(rows, rows)], rtol=1e-12, atol=0)
    by_cols = distance_matrix(Alignment(aln.names, aln.states[:, cols], aln.alphabet), model, gamma=0.9).values
    np.testing.assert_allclose(by_cols, base, rtol=1e-12, atol=0)


def test_identical_sequences_computed_once_and_at_zero(lg_data):
    # source: identical sequences are at distance 0 under a reversible model (all counts on the diagonal,
    # whose likelihood falls with t); the matrix computed once per group equals the one over every row
    states = np.vstack([lg_data.states, lg_data.states[2]])
    aln = Alignment(lg_data.names + ("copy",), states, "protein")
    collapsed = distance_matrix(aln, "lg", gamma=0.5)
    full = distance_matrix(aln, "lg", gamma=0.5, weights=aln.weights)
    assert collapsed.info["identical_groups"] == 1 and collapsed.values[2, 8] == 0.0
    np.testing.assert_allclose(collapsed.values, full.values, rtol=1e-12, atol=0)
    names, seqs = simulate_dna(6, 200, seed=12, gaps=0, ambiguous=0)
    dna = make_alignment(names + ["copy"], seqs + [seqs[1]])
    np.testing.assert_allclose(distance_matrix(dna, "gtr").values, distance_matrix(dna, "gtr", weights=dna.weights)
                               .values, rtol=1e-12, atol=0)


def test_saturation_policy_and_pairs_without_shared_sites():
    # source: the saturation policy of docs/distances.md (stop naming the pairs, or cap at twice the largest
    # defined distance); a pair that differs at every site, in all twelve directions alike, is past any
    # distance under near-equal rates (its likelihood rises without end, as JC69's at p >= 3/4)
    rng = np.random.default_rng(7)
    x = rng.integers(0, 4, 600)
    near = x.copy()
    hit = rng.random(600) < 0.1
    near[hit] = (near[hit] + rng.integers(1, 4, hit.sum())) % 4
    far = (x + 1 + np.arange(600) % 3) % 4
    states = np.vstack([x, near, far]).astype(np.uint8)
    aln = Alignment(["x", "near", "far"], states, "dna")
    with pytest.raises(errors.SaturationError, match="x-far") as caught:
        distance_matrix(aln, "gtr")
    assert "likelihood still rises" in str(caught.value)
    capped = distance_matrix(aln, "gtr", saturated="cap")
    assert capped.info["saturated"] >= 1
    assert capped.values[0, 2] == capped.info["cap"] == max(1.0, 2 * capped.values[0, 1])
    gapped = Alignment(["a", "b", "c"], encode(["a", "b", "c"], ["ACGT----", "----ACGT", "ACGTACGT"], "dna", "t"),
                       "dna")
    with pytest.raises(errors.InputError, match="share no unambiguous site"):
        distance_matrix(gapped, "hky")


def test_complete_deletion_uses_the_common_sites(lg_data):
    # source: docs/distances.md: complete deletion keeps only the sites every sequence has; the same as
    # the alignment cut down to those sites
    keep = np.all(lg_data.states < 20, axis=0)
    cut = Alignment(lg_data.names, lg_data.states[:, keep], "protein")
    np.testing.assert_allclose(distance_matrix(lg_data, "dcmut", gaps="complete").values,
                               distance_matrix(cut, "dcmut").values, rtol=1e-12, atol=0)


# ---- the registry and the command line ---------------------------------------------------------------------

def test_registry_lists_the_models_with_citations():
    # source: the list of models and papers
    papers = {"jtt": "Jones", "wag": "Whelan", "lg": "Le & Gascuel", "dcmut": "Kosiol", "gtr": "Tavar",
              "hky": "Hasegawa"}
    for name, author in papers.items():
        spec = MODELS[name]
        assert spec.likelihood and spec.gamma and author in spec.citation
    assert {n for n, m in MODELS.items() if m.likelihood} == set(lik.LIKELIHOOD_MODELS)


def test_command_line_default_model_follows_the_alphabet(tmp_path):
    # source: the issue: K2P for DNA, LG for protein when --model is not given; the help lists the models
    protein = tmp_path / "p.fasta"
    protein.write_text(">a\nMKLVAAGHWERTYPLKM\n>b\nMKIVAAGHWDRTYPLKL\n>c\nMRLVSAGHWERTFPLKM\n")
    dna = tmp_path / "d.fasta"
    dna.write_text(">a\nACGTACGTAAGT\n>b\nACGTTCGTAAGT\n>c\nACCTACGTATGT\n")
    runner = CliRunner()
    for path, name in ((protein, "lg"), (dna, "k2p")):
        for command in ("distances", "tree"):
            result = runner.invoke(main, [command, str(path), "-o", str(tmp_path / "out")])
            assert result.exit_code == 0, result.output
            assert f"model     {name}" in result.stderr
    ours = runner.invoke(main, ["distances", str(protein), "-o", "-", "-m", "wag", "--gamma-shape", "0.5",
                                "--gamma-categories", "4"])
    table = np.loadtxt(ours.stdout.splitlines()[1:], usecols=(1, 2, 3), dtype=str).astype(float)
    aln = make_alignment(["a", "b", "c"], ["MKLVAAGHWERTYPLKM", "MKIVAAGHWDRTYPLKL", "MRLVSAGHWERTFPLKM"], "protein")
    np.testing.assert_allclose(table, distance_matrix(aln, "wag", gamma=0.5, gamma_categories=4).values,
                               rtol=1e-15)
    assert "model     wag + gamma (alpha 0.5, 4 categories)" in ours.stderr  # the settings as given
    wrong = runner.invoke(main, ["distances", str(protein), "-o", "-", "--gamma-categories", "4"])
    assert wrong.exit_code == 2 and "--gamma-categories 4 needs a gamma shape" in wrong.stderr
    helped = runner.invoke(main, ["distances", "--help"]).output
    for name, paper in (("lg", "Le & Gascuel 2008"), ("gtr", "Tavaré 1986"), ("dcmut", "Kosiol & Goldman 2005")):
        assert any(line.split()[:1] == [name] and paper in line for line in helped.splitlines())


def test_rates_that_cannot_be_estimated_are_a_warning_not_a_silent_change(tmp_path):
    # Waddell & Steel (1997): the rates come from the logarithm of the pooled divergence matrix, undefined when
    # the sequences are unrelated (the matrix is then near pi pi^T, of rank one: a fact of linear algebra). The
    # equal rates used instead must be said, in the library's records and once in the summary.
    from cladewright.pipeline import run_warnings

    rng = np.random.default_rng(1)
    names = [f"s{i}" for i in range(6)]
    seqs = ["".join(rng.choice(list("ACGT"), 300)) for _ in names]
    dm = distance_matrix(make_alignment(names, seqs, "dna"), "gtr", saturated="cap")
    assert dm.info["rates_fallback"] is True
    kinds = [w.kind for w in run_warnings(dm.info)]
    assert "rates_fallback" in kinds
    fasta = tmp_path / "far.fasta"
    fasta.write_text("".join(f">{a}\n{s}\n" for a, s in zip(names, seqs)))
    r = CliRunner().invoke(main, ["distances", str(fasta), "-o", str(tmp_path / "d.tsv"), "-m", "gtr",
                                  "--saturated", "cap"])
    assert r.exit_code == 0, r.output
    assert r.stderr.count("rates could not be estimated") == 1
