"""Verdicts with margins; the quantum switch and the Lugano process are nonseparable."""

import numpy as np
import pytest

from workers.operators.families import lugano_process, ocb_process, quantum_switch, random_comb
from workers.analysis.separability import analyse
from workers.sdp.solvers import SolverOptions
from workers.operators.validity import white_noise


def test_ocb_verdict():
    """OCB is causally nonseparable (Oreshkov, Costa, Brukner 2012)."""
    p = ocb_process()
    r = analyse(p.scenario, p.matrix)
    assert r.verdict == "nonseparable" and r.margin > 0.4
    assert r.robustness("random") == pytest.approx(np.sqrt(2) - 1, abs=1e-6)


def test_lugano_nonseparable():
    """The Lugano process is causally nonseparable (Baumeler & Wolf, NJP 18, 013036 (2016))."""
    p = lugano_process()
    r = analyse(p.scenario, p.matrix, ("random",), options=SolverOptions(eps_abs=1e-6,
                                                                          eps_rel=1e-6))
    assert r.verdict == "nonseparable" and r.margin > 1


def test_switch_nonseparable():
    """The quantum switch is causally nonseparable (Araujo et al., NJP 17, 102001 (2015))."""
    p = quantum_switch(2)
    r = analyse(p.scenario, p.matrix, ("random",), options=SolverOptions(eps_abs=1e-5,
                                                                          eps_rel=1e-5))
    assert r.verdict == "nonseparable" and r.margin > 0.1


def test_separable_verdicts(rng):
    """Combs and white noise are separable (workers/THEORY.md §6)."""
    p = ocb_process()
    for W in [white_noise(p.scenario), random_comb(p.scenario, (1, 0), rng)]:
        assert analyse(p.scenario, W).verdict == "separable"


def test_undecided_inside_accuracy():
    """At the noise threshold 1/sqrt2 with a decision tol far below what the solver can
    resolve for this W, the verdict is undecided, not rounded."""
    p = ocb_process()
    W = (p.matrix - white_noise(p.scenario)) / np.sqrt(2) + white_noise(p.scenario)
    W = W + 3e-7 * (p.matrix - white_noise(p.scenario))
    r = analyse(p.scenario, W, ("random",), options=SolverOptions(eps_abs=1e-4, eps_rel=1e-4,
                                                                   tol=1e-7))
    assert r.verdict == "undecided", r.reason


def test_bad_quantity():
    p = ocb_process()
    with pytest.raises(ValueError, match="quantities"):
        analyse(p.scenario, p.matrix, ("entropy",))


def _four_party_cases(rng):
    """OCB on A, B with two input-only parties C, D in white noise, a random valid process
    and a comb, for four parties (dims A 2->2, B 2->2 or 2->1, C 2->1, D 2->1)."""
    from tests.conftest import random_valid_process
    from workers.operators.scenario import Scenario

    s_ocb = Scenario.from_dims([2, 2, 2, 2, 2, 1, 2, 1])
    s = Scenario.from_dims([2, 2, 2, 1, 2, 1, 2, 1])
    return [(s_ocb, np.kron(ocb_process().matrix, np.eye(4) / 4)),
            (s, random_valid_process(s, rng, 0.95)), (s, random_comb(s, (3, 1, 0, 2), rng))]


def test_four_party_bounds_are_ordered(rng):
    """For N = 4 the necessary-condition robustness is <= the sufficient-condition one
    (nested sets, Wechs, Abbott, Branciard, NJP 21, 013027 (2019)); parties with trivial
    outputs added to OCB leave R_r = sqrt2 - 1 (common practice: an input-only party in white
    noise cannot change the causal structure between A and B)."""
    opts = SolverOptions(eps_abs=1e-6, eps_rel=1e-6, max_iters=20_000)
    for k, (s, W) in enumerate(_four_party_cases(rng)):
        r = analyse(s, W, ("random",), options=opts)
        b = r.bounds["random"]
        assert b.lower <= b.upper + 1e-6
        if k == 0:
            assert b.lower == pytest.approx(np.sqrt(2) - 1, abs=1e-4)
            assert b.upper == pytest.approx(np.sqrt(2) - 1, abs=1e-4)
            assert r.verdict == "nonseparable"
