"""Random ensembles of workers/THEORY.md §8: validity, the documented construction, seeding."""

import numpy as np
import pytest

from workers.basis import to_coefficients
from workers.ensembles import SAMPLERS, comb, comb_mixture, get_sampler, valid_direction, wishart
from workers.masks import valid_mask
from workers.scenario import Scenario
from workers.separability import analyse
from workers.validity import check_validity, white_noise

BI = Scenario.from_dims([2, 2, 2, 2])
WITH_PF = Scenario.from_dims([2, 2, 2, 2], d_past=2, d_future=2)


@pytest.mark.parametrize("scenario", [BI, WITH_PF, Scenario.from_dims([2, 3, 3, 2])],
                         ids=["qubits", "P-and-F", "qubit-qutrit"])
@pytest.mark.parametrize("measure", sorted(SAMPLERS))
def test_every_sample_is_a_valid_process(scenario, measure):
    """Validity conditions (a)-(c) of Araujo et al., NJP 17, 102001 (2015), checked by
    workers.validity; every measure of workers/THEORY.md §8 must produce valid operators."""
    rng = np.random.default_rng(11)
    for _ in range(3):
        s = get_sampler(measure)(scenario, rng)
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
        a = get_sampler(measure)(BI, np.random.default_rng(9)).matrix
        b = get_sampler(measure)(BI, np.random.default_rng(9)).matrix
        c = get_sampler(measure)(BI, np.random.default_rng(10)).matrix
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
