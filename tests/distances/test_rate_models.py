"""Reversible rate models, their spectral form and transition probabilities (distances/rate_models.py).

Sources of the values checked against, named per test:
- pyvolve 1.1.0 (Spielman & Wilke 2015), a general-purpose sequence simulator that carries the published
  empirical amino-acid matrices and frequencies and builds its rate matrices from them;
- scipy.linalg.expm (the matrix exponential, Al-Mohy & Higham 2009), scipy.integrate.quad/quad_vec and
  scipy.stats.gamma for the rate-heterogeneity integrals;
- the definitions of a reversible Markov process (Tavaré 1986): rows of Q sum to 0, pi Q = 0, detailed
  balance, P(0) = I, mean rate 1 by the scaling chosen;
- Yang (1994) J. Mol. Evol. 39:306-314 for the discrete gamma category means.
"""

import numpy as np
import pytest
import scipy.integrate
import scipy.linalg
import scipy.stats
from pyvolve import empirical_matrices as pyvolve_matrices
from pyvolve import genetics as pyvolve_genetics
import pyvolve

from cladewright.alignment import PROTEIN_STATES
from cladewright.distances import rate_models as rm
from cladewright.errors import InputError

# our model name -> the name pyvolve files the same published model under
PYVOLVE_NAMES = {"jtt": "jtt", "wag": "wag", "lg": "lg", "dcmut": "dayhoffdcmut"}
TIMES = (0.0, 0.01, 0.1, 0.5, 1.0, 3.0)


def random_gtr(seed, k=4):
    """A random reversible model: exchangeabilities and frequencies (invented data, for checks only)."""
    rng = np.random.default_rng(seed)
    upper = np.triu(rng.uniform(0.2, 5.0, (k, k)), 1)
    return upper + upper.T, rng.dirichlet(np.full(k, 4.0))


def pyvolve_permutation():
    # pyvolve lists its amino acids in its genetics module (source: pyvolve); map them onto ours
    theirs = "".join(pyvolve_genetics.Genetics().amino_acids)
    return np.array([theirs.index(c) for c in PROTEIN_STATES])


def all_models():
    models = [(name, *rm.protein_model(name)) for name in rm.PROTEIN_MODELS] + [("gtr", *random_gtr(1))]
    return [pytest.param(*m, id=m[0]) for m in models]


def test_models_and_citations_listed():
    assert rm.PROTEIN_MODELS == ("jtt", "wag", "lg", "dcmut")
    assert set(rm.PROTEIN_MODEL_CITATIONS) == set(rm.PROTEIN_MODELS)


@pytest.mark.parametrize("name", rm.PROTEIN_MODELS)
def test_every_entry_equals_pyvolves_copy(name):
    # source: pyvolve.empirical_matrices, <name>_matrix (symmetric exchangeabilities, zero diagonal) and
    # <name>_freqs (the published frequencies divided by their sum), both in pyvolve's amino-acid order
    order = pyvolve_permutation()
    theirs_S = np.array(getattr(pyvolve_matrices, PYVOLVE_NAMES[name] + "_matrix"))[np.ix_(order, order)]
    theirs_pi = np.array(getattr(pyvolve_matrices, PYVOLVE_NAMES[name] + "_freqs"))[order]
    S, pi = rm.protein_model(name)
    assert S.shape == (20, 20) and pi.shape == (20,)
    np.testing.assert_array_equal(S, theirs_S)  # every exchangeability, digit for digit
    np.testing.assert_allclose(pi, theirs_pi / theirs_pi.sum(), rtol=1e-14, atol=0)
    assert np.array_equal(S, S.T) and not np.any(np.diag(S))
    assert abs(pi.sum() - 1.0) < 1e-15 and np.all(pi > 0)


@pytest.mark.parametrize("name", rm.PROTEIN_MODELS)
def test_rate_matrix_equals_pyvolves(name):
    # source: pyvolve.Model(name).matrix, built as Q_ij = s_ij pi_j and scaled to mean rate 1 ("persite")
    order = pyvolve_permutation()
    theirs = pyvolve.Model(PYVOLVE_NAMES[name]).matrix[np.ix_(order, order)]
    np.testing.assert_allclose(rm.rate_matrix(*rm.protein_model(name)), theirs, rtol=1e-12, atol=1e-15)


def test_model_names_any_case_and_unknown_names():
    # common practice: names compare without case; an unknown one is an InputError naming the choices
    np.testing.assert_array_equal(rm.protein_model("LG")[0], rm.protein_model("lg")[0])
    with pytest.raises(InputError, match="jtt, wag, lg, dcmut"):
        rm.protein_model("blosum")


def test_each_call_returns_fresh_arrays():
    # the rule that nothing outlives a call (docs/architecture.md): a caller's edit does not leak
    S, pi = rm.protein_model("wag")
    S[0, 1] = pi[0] = -1.0
    S2, pi2 = rm.protein_model("wag")
    assert S2[0, 1] > 0 and pi2[0] > 0


def test_data_file_describes_itself():
    # the file's own format (its header): each model names its paper and the order of its numbers
    from importlib import resources
    text = (resources.files("cladewright.distances") / "data" / "protein_models.txt").read_text("utf-8")
    blocks = {b.split("\nmodel ", 1)[1].split("\n", 1)[0]: b for b in text.split("\nend\n") if "\nmodel " in b}
    assert sorted(blocks) == sorted(rm.PROTEIN_MODELS)
    for name, author in (("jtt", "Jones"), ("wag", "Whelan"), ("lg", "Le, S.Q."), ("dcmut", "Kosiol")):
        assert author in blocks[name] and "\norder ARNDCQEGHILKMFPSTWYV\n" in blocks[name]


@pytest.mark.parametrize("name,S,pi", all_models())
def test_rate_matrix_properties(name, S, pi):
    # source: Tavare (1986) for a reversible model: Q_ij = S_ij pi_j off the diagonal, rows sum to 0,
    # pi is stationary (pi Q = 0); the scaling gives mean rate -sum pi_i Q_ii = 1
    Q = rm.rate_matrix(S, pi)
    flows = S * pi[None, :]
    ratio = Q[flows > 0] / flows[flows > 0]
    np.testing.assert_allclose(ratio, ratio[0], rtol=1e-12)  # one scale factor for every entry
    off = ~np.eye(len(pi), dtype=bool)
    assert np.all(Q[off & (S == 0)] == 0)
    np.testing.assert_allclose(Q.sum(axis=1), 0.0, atol=1e-14)
    np.testing.assert_allclose(pi @ Q, 0.0, atol=1e-14)
    assert abs(-np.sum(pi * np.diag(Q)) - 1.0) < 1e-14
    # detailed balance of the rates: pi_i Q_ij = pi_j Q_ji
    flow = pi[:, None] * Q
    np.testing.assert_allclose(flow, flow.T, atol=1e-15)


@pytest.mark.parametrize("name,S,pi", all_models())
def test_eigen_system_reassembles_q(name, S, pi):
    # source: the definition of an eigen-decomposition; checked with plain matrix products
    eig = rm.eigen_system(S, pi)
    Q = rm.rate_matrix(S, pi)
    np.testing.assert_allclose(eig.right @ np.diag(eig.values) @ eig.left, Q, atol=1e-13)
    np.testing.assert_allclose(eig.right @ eig.left, np.eye(len(pi)), atol=1e-13)
    assert np.all(eig.values <= 0) and eig.values[-1] == 0.0
    # the eigenvalues agree with a general (non-symmetric) solver, scipy.linalg.eigvals
    np.testing.assert_allclose(np.sort(scipy.linalg.eigvals(Q).real), eig.values, atol=1e-12)
    # common practice: arrays handed on are frozen, float64 and C-contiguous (ready for compiled loops)
    for a in eig:
        assert a.dtype == np.float64 and a.flags.c_contiguous and not a.flags.writeable


@pytest.mark.parametrize("name,S,pi", all_models())
def test_transition_matrix_equals_expm(name, S, pi):
    # source: scipy.linalg.expm of Q t; P(0) = I; rows sum to 1; detailed balance pi_i P_ij = pi_j P_ji
    eig = rm.eigen_system(S, pi)
    Q = rm.rate_matrix(S, pi)
    for t in TIMES:
        P = rm.transition_matrix(eig, t)
        np.testing.assert_allclose(P, scipy.linalg.expm(Q * t), rtol=0, atol=1e-12)
        np.testing.assert_allclose(P.sum(axis=1), 1.0, atol=1e-13)
        flow = pi[:, None] * P
        np.testing.assert_allclose(flow, flow.T, atol=1e-15)
    np.testing.assert_allclose(rm.transition_matrix(eig, 0.0), np.eye(len(pi)), atol=1e-14)
    # a long branch forgets its start: every row tends to pi (the stationary distribution)
    np.testing.assert_allclose(rm.transition_matrix(eig, 1e4), np.tile(pi, (len(pi), 1)), atol=1e-12)


def gamma_average_by_quadrature(Q, t, alpha):
    """E[expm(Q r t)] for r ~ Gamma(shape alpha, mean 1), by scipy.integrate.quad_vec over the quantile
    u in (0, 1) (r = F^-1(u), which is the same integral as against the gamma density and has a bounded
    integrand)."""
    def integrand(u):
        r = scipy.stats.gamma.ppf(u, alpha, scale=1.0 / alpha)
        return scipy.linalg.expm(Q * r * t)
    value, error = scipy.integrate.quad_vec(integrand, 0.0, 1.0, epsabs=1e-13, epsrel=1e-12, limit=400)
    return value


@pytest.mark.parametrize("alpha", [0.3, 1.0, 2.5])
@pytest.mark.parametrize("model", ["gtr", "lg"])
def test_continuous_gamma_equals_numerical_integration(model, alpha):
    # source: numerical integration (scipy.integrate.quad_vec, scipy.stats.gamma) of expm(Q r t) over
    # the gamma distribution of rates, shape alpha and mean 1 (Jin & Nei 1990)
    S, pi = random_gtr(7) if model == "gtr" else rm.protein_model(model)
    eig, Q = rm.eigen_system(S, pi), rm.rate_matrix(S, pi)
    for t in (0.05, 0.7):
        P = rm.transition_matrix(eig, t, gamma=alpha)
        np.testing.assert_allclose(P, gamma_average_by_quadrature(Q, t, alpha), rtol=0, atol=1e-9)
        np.testing.assert_allclose(P.sum(axis=1), 1.0, atol=1e-13)


def test_continuous_gamma_entry_by_quad():
    # source: scipy.integrate.quad of one entry, expm(Q r t)_ij times the gamma density (Jin & Nei 1990)
    S, pi = random_gtr(3)
    eig, Q = rm.eigen_system(S, pi), rm.rate_matrix(S, pi)
    alpha, t = 1.7, 0.4
    density = scipy.stats.gamma(alpha, scale=1.0 / alpha).pdf
    P = rm.transition_matrix(eig, t, gamma=alpha)
    for i, j in [(0, 0), (0, 2), (3, 1)]:
        value, _ = scipy.integrate.quad(lambda r: scipy.linalg.expm(Q * r * t)[i, j] * density(r),
                                        0.0, np.inf, epsabs=1e-13, epsrel=1e-12, limit=200)
        assert abs(P[i, j] - value) < 1e-9


@pytest.mark.parametrize("alpha,k", [(0.2, 4), (0.5, 4), (1.0, 8), (3.0, 5), (12.0, 3)])
def test_discrete_gamma_rates_are_category_means(alpha, k):
    # source: Yang (1994): k categories of equal probability cut at the gamma quantiles, each represented
    # by its mean, k * integral of r g(r) over the category; computed here with scipy.stats.gamma.ppf
    # for the cut points and scipy.integrate.quad for the means
    dist = scipy.stats.gamma(alpha, scale=1.0 / alpha)
    cuts = dist.ppf(np.arange(k + 1) / k)
    means = [k * scipy.integrate.quad(lambda r: r * dist.pdf(r), lo, hi, epsabs=1e-13, epsrel=1e-12,
                                      limit=200)[0] for lo, hi in zip(cuts[:-1], cuts[1:])]
    rates = rm.discrete_gamma_rates(alpha, k)
    np.testing.assert_allclose(rates, means, rtol=1e-8, atol=1e-10)
    assert abs(rates.mean() - 1.0) < 1e-14
    assert np.all(np.diff(rates) > 0)


def test_discrete_gamma_rates_published_values():
    # source: Yang (1994), the four category means for alpha = 0.5 (from memory, to 4 decimals)
    np.testing.assert_allclose(rm.discrete_gamma_rates(0.5, 4), [0.0334, 0.2519, 0.8203, 2.8944], atol=5e-5)


def test_discrete_gamma_rates_tend_to_one():
    # source: the gamma distribution of mean 1 has variance 1/alpha, so as alpha grows every category
    # mean tends to 1 (common practice); one category is the mean itself
    spreads = [np.ptp(rm.discrete_gamma_rates(a, 6)) for a in (1.0, 10.0, 1e3, 1e6)]
    assert all(a > b for a, b in zip(spreads, spreads[1:]))
    np.testing.assert_allclose(rm.discrete_gamma_rates(1e6, 6), 1.0, atol=5e-3)
    np.testing.assert_array_equal(rm.discrete_gamma_rates(0.7, 1), [1.0])


@pytest.mark.parametrize("model", ["gtr", "wag"])
def test_discrete_gamma_transition_matrix_is_mean_over_categories(model):
    # source: Yang (1994), P(t) averaged over the category rates; each term by scipy.linalg.expm
    S, pi = random_gtr(5) if model == "gtr" else rm.protein_model(model)
    eig, Q = rm.eigen_system(S, pi), rm.rate_matrix(S, pi)
    rates = rm.discrete_gamma_rates(0.8, 4)
    for t in (0.02, 0.3, 2.0):
        expected = np.mean([scipy.linalg.expm(Q * r * t) for r in rates], axis=0)
        P = rm.transition_matrix(eig, t, gamma=0.8, categories=4)
        np.testing.assert_allclose(P, expected, rtol=0, atol=1e-12)
        flow = pi[:, None] * P
        np.testing.assert_allclose(flow, flow.T, atol=1e-15)


@pytest.mark.parametrize("gamma,categories", [(None, None), (0.6, None), (0.6, 4)])
def test_spectral_factor_derivatives_by_finite_differences(gamma, categories):
    # source: numerical differentiation (central differences) of f(lambda t) in t
    values = rm.eigen_system(*random_gtr(9)).values
    t, h = 0.37, 1e-4
    f = lambda x, n=0: rm.spectral_factors(values, x, gamma, categories, derivative=n)  # noqa: E731
    np.testing.assert_allclose(f(t, 1), (f(t + h) - f(t - h)) / (2 * h), rtol=1e-7, atol=1e-10)
    np.testing.assert_allclose(f(t, 2), (f(t + h) - 2 * f(t) + f(t - h)) / h ** 2, rtol=1e-5, atol=1e-7)


def test_large_gamma_shape_approaches_equal_rates():
    # source: the gamma mean of exp(x r) tends to exp(x) as the shape grows (Jin & Nei 1990)
    eig = rm.eigen_system(*rm.protein_model("jtt"))
    np.testing.assert_allclose(rm.transition_matrix(eig, 0.5, gamma=1e9), rm.transition_matrix(eig, 0.5),
                               atol=1e-8)


@pytest.mark.parametrize("call,match", [
    (lambda: rm.rate_matrix(np.ones((3, 3)), [0.5, 0.5]), "pi must hold 3"),
    (lambda: rm.rate_matrix([[0, 1], [2, 0]], [0.5, 0.5]), "symmetric"),
    (lambda: rm.rate_matrix([[0, 1], [1, 0]], [1.0, 0.0]), "pi must be"),
    (lambda: rm.rate_matrix(np.zeros((2, 2)), [0.5, 0.5]), "no positive"),
    (lambda: rm.transition_matrix(rm.eigen_system(*random_gtr(1)), -0.1), "branch length"),
    (lambda: rm.transition_matrix(rm.eigen_system(*random_gtr(1)), 0.1, gamma=0.0), "gamma"),
    (lambda: rm.transition_matrix(rm.eigen_system(*random_gtr(1)), 0.1, categories=4), "categories needs gamma"),
    (lambda: rm.discrete_gamma_rates(0.5, 0), "categories"),
])
def test_bad_input_is_an_input_error(call, match):
    # the project's rule for bad input (cladewright.errors): one InputError naming the parameter
    with pytest.raises(InputError, match=match):
        call()
