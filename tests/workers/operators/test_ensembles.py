"""Random ensembles of workers/THEORY.md §8: validity, the documented construction, seeding."""

import numpy as np
import pytest
from scipy import stats

from workers.operators.basis import pattern_codes, to_coefficients
from workers.operators.ensembles import (SAMPLERS, comb, comb_mixture, get_sampler, valid_direction,
                               wishart)
from workers.operators.hs_volume import direction_indices, directions, subspace_dimension
from tests.workers.dense_reference import trace_replace
from workers.operators.masks import valid_mask
from workers.operators.scenario import Scenario
from workers.analysis.separability import analyse
from workers.operators.validity import check_validity, white_noise

from tests.workers.hs_samples import QUBIT_CHANNELS, TEST_STEPS, TWO_QUBIT_STATES, samples

KS_LEVEL = 0.01   # significance level of the Kolmogorov-Smirnov tests below

BI = Scenario.from_dims([2, 2, 2, 2])
WITH_PF = Scenario.from_dims([2, 2, 2, 2], d_past=2, d_future=2)


@pytest.mark.parametrize("scenario", [BI, WITH_PF, Scenario.from_dims([2, 3, 3, 2])],
                         ids=["qubits", "P-and-F", "qubit-qutrit"])
@pytest.mark.parametrize("measure", sorted(SAMPLERS))
def test_every_sample_is_a_valid_process(scenario, measure):
    """Validity conditions (a)-(c) of Araujo et al., NJP 17, 102001 (2015), checked by
    workers.operators.validity; every measure of workers/THEORY.md §8 must produce valid
    operators."""
    rng = np.random.default_rng(11)
    params = {"hs_volume": {"steps": 3}}.get(measure, {})
    for _ in range(3):
        s = get_sampler(measure)(scenario, rng, **params)
        rep = check_validity(scenario, s.matrix, tol=1e-8)
        assert rep.valid, (measure, rep.problems())


def test_valid_direction_reaches_the_psd_boundary_at_u_one():
    """Construction (module doc): u = 1 lies exactly on the PSD boundary (min eigenvalue 0),
    u < 1 strictly inside; the distance is linear in u (1° is a multiple of the identity)."""
    eigs = []
    for u in (0.0, 0.5, 1.0):
        W = valid_direction(BI, np.random.default_rng(3), u=u).matrix
        eigs.append(np.linalg.eigvalsh(W)[0])
    lam0 = 1 / BI.d_in_total
    assert eigs[0] == pytest.approx(lam0)
    assert eigs[1] == pytest.approx(lam0 / 2)
    assert abs(eigs[2]) < 1e-12


def test_valid_direction_only_uses_allowed_traceless_elements():
    """The direction has support only on allowed non-identity patterns (workers/THEORY.md §2)."""
    W = valid_direction(WITH_PF, np.random.default_rng(5), u=0.7).matrix
    c = to_coefficients(W - white_noise(WITH_PF), WITH_PF.subsystem_dims)
    assert abs(c[0]) < 1e-10
    assert np.abs(c[~valid_mask(WITH_PF)]).max() < 1e-10
    assert np.count_nonzero(np.abs(c) > 1e-12) > 10


def test_wishart_noise_is_just_enough():
    """q is the smallest white-noise weight making W PSD: the min eigenvalue is 0 when q > 0
    (module doc; 1° is proportional to the identity, so the formula is exact)."""
    rng = np.random.default_rng(2)
    seen_mixed = False
    for rank in (1, 2, 16):
        for _ in range(3):
            s = wishart(BI, rng, rank=rank)
            lam = np.linalg.eigvalsh(s.matrix)[0]
            assert lam > -1e-12
            if s.aux > 0:
                seen_mixed = True
                assert abs(lam) < 1e-12
    assert seen_mixed


def test_same_generator_state_same_operator():
    """Seeding (workers/THEORY.md §8): one seed, one operator; different seeds differ."""
    for measure in SAMPLERS:
        params = {"hs_volume": {"steps": 10}}.get(measure, {})
        a = get_sampler(measure)(BI, np.random.default_rng(9), **params).matrix
        b = get_sampler(measure)(BI, np.random.default_rng(9), **params).matrix
        c = get_sampler(measure)(BI, np.random.default_rng(10), **params).matrix
        assert np.array_equal(a, b)
        assert not np.allclose(a, c)


def test_combs_and_mixtures_are_separable():
    """Ground truth: causally ordered combs and their mixtures are causally separable
    (workers/THEORY.md §6, OCB 2012): random robustness 0 up to the solver's accuracy."""
    rng = np.random.default_rng(4)
    for sampler in (comb, comb_mixture):
        for _ in range(3):
            W = sampler(BI, rng).matrix
            r = analyse(BI, W, ("random",))
            assert r.verdict == "separable", r.reason


def test_comb_given_order_and_bad_inputs():
    """aux reports the order index; bad parameters raise one-line ValueErrors (common
    practice)."""
    assert comb(BI, np.random.default_rng(0), order=[1, 0]).aux == 1.0
    with pytest.raises(ValueError, match=r"order=\[0, 0\]"):
        comb(BI, np.random.default_rng(0), order=[0, 0])
    with pytest.raises(ValueError, match="u=1.5"):
        valid_direction(BI, np.random.default_rng(0), u=1.5)
    with pytest.raises(ValueError, match="rank=0"):
        wishart(BI, np.random.default_rng(0), rank=0)
    with pytest.raises(ValueError, match="measure='haar'"):
        get_sampler("haar")


# --- hs_volume: the Hilbert-Schmidt (Lebesgue) volume measure (workers/THEORY.md §8) --------

def _hermitian_coordinates(D: int):
    """Real HS-orthonormal coordinates of D x D Hermitian matrices, built from matrix units
    only (diagonal, sqrt2 Re and sqrt2 Im of the upper triangle): independent of
    workers.operators.basis."""
    iu, ju = np.triu_indices(D, 1)

    def coords(H: np.ndarray) -> np.ndarray:
        H = np.asarray(H)
        diag = np.diagonal(H, axis1=-2, axis2=-1).real
        up = H[..., iu, ju]
        return np.concatenate([diag, np.sqrt(2) * up.real, np.sqrt(2) * up.imag], axis=-1)

    def matrix(x: np.ndarray) -> np.ndarray:
        H = np.zeros((D, D), dtype=complex)
        H[np.arange(D), np.arange(D)] = x[:D]
        up = (x[D:D + iu.size] + 1j * x[D + iu.size:]) / np.sqrt(2)
        H[iu, ju], H[ju, iu] = up, up.conj()
        return H

    return coords, matrix


def _dense_LV(scenario: Scenario, W: np.ndarray) -> np.ndarray:
    """L_V = 1 - prod_k (1 - _{A_O^k} + _{A_I^k A_O^k}) + _{all} with dense trace-and-replace
    maps (Araujo et al., NJP 17, 102001 (2015), appendix; workers/THEORY.md §2)."""
    dims, Y = scenario.subsystem_dims, W
    for k in range(scenario.n_parties):
        i, o = scenario.input_index(k), scenario.output_index(k)
        Y = Y - trace_replace(Y, dims, [o]) + trace_replace(Y, dims, [i, o])
    return W - Y + np.trace(W) / scenario.dim * np.eye(scenario.dim)


def _isotropy_statistic(scenario: Scenario, g: np.ndarray) -> tuple[float, float]:
    """N |n S - P_V|_F^2 / (n (n - 1)) for the unit directions H(g_k), S their second-moment
    matrix and P_V the projector onto V, both in the coordinates above; its expectation is
    exactly 1 for directions uniform on the unit sphere of V (E|n S - P|^2 = n(n-1)/N).
    Also returns the largest component off V."""
    D, n, N = scenario.dim, subspace_dimension(scenario), len(g)
    coords, matrix = _hermitian_coordinates(D)
    P = np.array([coords(_dense_LV(scenario, matrix(e)) - matrix(e).trace() / D * np.eye(D))
                  for e in np.eye(D * D)]).T
    assert np.linalg.matrix_rank(P) == n and np.allclose(P @ P, P)
    x = coords(directions(scenario, g))
    x /= np.linalg.norm(x, axis=1)[:, None]
    S = x.T @ x / N
    return N * np.sum((n * S - P) ** 2) / (n * (n - 1)), float(np.abs(x - x @ P).max())


@pytest.mark.parametrize("scenario", [BI, Scenario.from_dims([2, 3, 3, 1])],
                         ids=["qubits", "qubit-qutrit"])
def test_hs_directions_are_isotropic(scenario):
    """The walk's directions are uniform on the HS unit sphere of the traceless valid subspace
    V: in an orthonormal basis of V built from the dense L_V (not from workers.operators.basis), the
    second moments of 2,000 directions equal identity/n within sampling error (statistic 1 +-
    ~0.02; workers/THEORY.md §8).  The same statistic with the qutrit elements normalised as
    Gell-Mann matrices (Tr = 2 instead of 3) is clearly larger for qubit-qutrit: the test
    sees it."""
    n = subspace_dimension(scenario)
    g = np.random.default_rng(5).standard_normal((2000, n))
    stat, off = _isotropy_statistic(scenario, g)
    assert off < 1e-12
    assert 0.9 < stat < 1.1, stat
    qutrit = sum(1 << s for s, d in enumerate(scenario.subsystem_dims) if d == 3)
    if qutrit:
        codes = pattern_codes(scenario.subsystem_dims)[direction_indices(scenario)]
        k = np.array([bin(int(c) & qutrit).count("1") for c in codes])
        assert _isotropy_statistic(scenario, g * (2 / 3) ** (k / 2))[0] > 1.15


@pytest.mark.parametrize("dims", [TWO_QUBIT_STATES, QUBIT_CHANNELS],
                         ids=["two-qubit-states", "qubit-channels"])
def test_hs_radial_fractions_follow_r_to_the_n(dims):
    """Under the HS-uniform law the radial fraction r (aux) has P(r <= x) = x^n in every
    direction (workers/THEORY.md §8, polar coordinates); Kolmogorov-Smirnov test of 2,000
    samples (TEST_STEPS billiard steps each) at level KS_LEVEL = 0.01 (scipy.stats.kstest).
    Every sample is a valid process (Araujo et al. 2015 conditions, workers.operators.validity)."""
    scenario = Scenario.from_dims(list(dims))
    W, r = samples(dims)
    n = subspace_dimension(scenario)
    assert stats.kstest(r, lambda x: np.clip(x, 0, 1) ** n).pvalue > KS_LEVEL
    for w in W:
        assert check_validity(scenario, w, tol=1e-9).valid


@pytest.mark.slow
def test_hs_radial_fractions_two_qubit_parties_default_steps():
    """The same Kolmogorov-Smirnov test (level 0.01, 2,000 samples) for two qubit parties
    (n = 87) at the default number of steps, with every sample valid."""
    W, r = samples((2, 2, 2, 2), steps=None)
    assert stats.kstest(r, lambda x: np.clip(x, 0, 1) ** 87).pvalue > KS_LEVEL
    for w in W:
        assert check_validity(BI, w, tol=1e-9).valid


def test_polar_construction_is_not_hs_uniform():
    """Uniform direction and radius t_max U^(1/n) (valid_direction with u = U^(1/n)) is not
    the HS measure (workers/THEORY.md §8: its volume density is ~ t_max^-n): on two-qubit
    states its mean purity is ~0.380, far from the HS value 8/17 (Zyczkowski & Sommers,
    J. Phys. A 34, 7111 (2001), mean purity 2N/(N^2+1), from memory) that hs_volume gives."""
    scenario = Scenario.from_dims(list(TWO_QUBIT_STATES))
    rng = np.random.default_rng(3)
    polar = np.array([valid_direction(scenario, rng, u=rng.uniform() ** (1 / 15)).matrix
                      for _ in range(2000)])
    purity = np.einsum("kij,kji->k", polar, polar).real
    assert abs(purity.mean() - 8 / 17) > 0.05
    W, _ = samples(TWO_QUBIT_STATES)
    hs_purity = np.einsum("kij,kji->k", W, W).real
    assert abs(hs_purity.mean() - 8 / 17) < 4 * hs_purity.std() / np.sqrt(len(W))
