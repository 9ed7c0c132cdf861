"""Robustness in the commutant of a process's symmetry group: same values as the full SDP,
certificates that check exactly (workers/analysis/symmetric_robustness.py, symmetric_conic.py)."""

import numpy as np
import pytest

from tests.conftest import random_valid_process
from workers.analysis.certified import analyse_and_certify
from workers.operators.families import (lugano_process, ocb_process, quantum_switch,
                                       white_noise_mixture)
from workers.analysis.robustness import get_problem
from workers.operators.scenario import Scenario
from workers.analysis.separability import analyse, analyse_many
from workers.sdp.solvers import SolverOptions
from workers.analysis.symmetric_robustness import get_symmetric_problem
from workers.sdp.symmetry import find_local_symmetry

SQ2 = np.sqrt(2)


def _reduced(p, kind, options=SolverOptions()):
    sym = find_local_symmetry(p.scenario.subsystem_dims, p.matrix)
    return get_symmetric_problem(p.scenario, kind, "exact", options, sym)


def test_ocb_values_and_smaller_blocks():
    """R_r(OCB) = sqrt2 - 1, R_g(OCB) = 3 - 2 sqrt2 (workers/THEORY.md §5) from the reduced
    problem, whose PSD blocks are 2 x 2 instead of 8 x 8."""
    p = ocb_process()
    for kind, value in (("random", SQ2 - 1), ("generalized", 3 - 2 * SQ2)):
        prob = _reduced(p, kind)
        r = prob.solve_many([p.matrix])[0]
        assert r.status == "optimal" and r.value == pytest.approx(value, abs=1e-7)
        assert max(prob.problem.cone_dims) == 2 and "symmetry-reduced" in r.message


@pytest.mark.slow
def test_reduced_equals_full_on_lugano():
    """The Lugano process (Baumeler & Wolf 2016) is diagonal: its reduced leaves are
    diagonal (an LP).  Both robustness measures equal those of the full SDP."""
    p = lugano_process()
    opts = SolverOptions(solver="SCS", eps_abs=1e-7, eps_rel=1e-7)
    for kind in ("random", "generalized"):
        red = _reduced(p, kind, opts)
        assert max(red.problem.cone_dims) == 1
        a = red.solve_many([p.matrix])[0]
        b = get_problem(p.scenario, kind, "exact", opts).solve(p.matrix)
        assert a.value == pytest.approx(b.value, abs=2e-5)
    assert a.value > 0.4


@pytest.mark.slow
def test_switch_values():
    """Quantum switch with a qubit target (Chiribella et al. 2013; process matrix of Araujo
    et al., NJP 17, 102001 (2015)): R_r = 5.91037 and R_g = 0.6, reference values computed
    outside this project with an independent formulation (the unreduced SDP of this project
    gives 5.910369 and 0.6000000 too, see the slow test below)."""
    p = quantum_switch()
    r = _reduced(p, "random").solve_many([p.matrix], keep_certificate=True)[0]
    g = _reduced(p, "generalized").solve_many([p.matrix])[0]
    assert r.value == pytest.approx(5.91037, abs=1e-5)
    assert g.value == pytest.approx(0.6, abs=1e-6)
    assert r.witness_value == pytest.approx(-r.value, abs=1e-6)


def test_certificates_from_reduced_solves_check_exactly():
    """Both certificate kinds, issued from reduced solves, pass the exact checker: OCB
    (witness: R_r >= sqrt2 - 1 up to rounding) and OCB mixed with white noise at p = 0.5,
    separable since R_r(p) = max(0, sqrt2 p - 1) (workers/THEORY.md §5)."""
    p = ocb_process()
    res, cv = analyse_and_certify(p.scenario, p.matrix, ("random",), "exact", SolverOptions())
    assert cv.certified and cv.verdict == "nonseparable"
    assert cv.margin == pytest.approx(SQ2 - 1, abs=1e-7)
    assert "symmetry-reduced" in res.bounds["random"].upper_from.message
    W = white_noise_mixture(p.scenario, p.matrix, 0.5)
    res, cv = analyse_and_certify(p.scenario, W, ("random",), "exact", SolverOptions(),
                                  force_solve=True)
    assert cv.certified and cv.verdict == "separable"
    assert "symmetry-reduced" in res.bounds["random"].upper_from.message


def test_batches_mixing_symmetric_and_plain_processes(rng):
    """analyse_many gives each process the result it gets alone, bit for bit, whatever else
    is in the batch (symmetric ones go to their reduced problem, the rest to one batch)."""
    s = Scenario.from_dims([2, 2, 2, 2])
    p = ocb_process()
    Ws = [random_valid_process(s, rng), white_noise_mixture(s, p.matrix, 0.9),
          random_valid_process(s, rng), p.matrix]
    many = analyse_many(s, Ws, ("random", "generalized"))
    for W, r in zip(Ws, many):
        alone = analyse(s, W, ("random", "generalized"))
        for kind in ("random", "generalized"):
            assert r.bounds[kind].upper_from.upper_bound == \
                alone.bounds[kind].upper_from.upper_bound


def test_symmetry_off_solves_the_full_problem():
    p = ocb_process()
    off = analyse(p.scenario, p.matrix, ("random",), options=SolverOptions(symmetry=False))
    r = off.bounds["random"].upper_from
    assert "symmetry" not in r.message and r.value == pytest.approx(SQ2 - 1, abs=1e-7)


@pytest.mark.slow
def test_switch_reduced_equals_full():
    """The unreduced random robustness of the quantum switch (two 256 x 256 blocks, SCS)
    equals the reduced one."""
    p = quantum_switch()
    full = get_problem(p.scenario, "random", "exact",
                       SolverOptions(symmetry=False, eps_abs=1e-7, eps_rel=1e-7)).solve(p.matrix)
    red = _reduced(p, "random").solve_many([p.matrix])[0]
    assert full.value == pytest.approx(red.value, abs=1e-5)
