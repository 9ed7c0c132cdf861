"""The batched splitting solver (workers/sdp/splitting.py, splitting_data.py, stack_transforms.py):
transforms, agreement with SCS, chained N >= 4 bounds, and certified four-party verdicts."""

import numpy as np
import pytest

from tests.conftest import random_valid_process
from workers.operators.basis import to_coefficients_stack
from workers.analysis.certified import analyse_and_certify_many
from workers.analysis.robustness import RobustnessProblem
from workers.operators.scenario import Scenario
from workers.sdp.solvers import SolverOptions
from workers.sdp.stack_transforms import space_transform

EPS = dict(eps_abs=1e-6, eps_rel=1e-6, symmetry=False)


@pytest.mark.parametrize("dims", [(2, 2, 2, 1, 2), (3, 2), (2, 1, 3), (4, 2, 1)])
def test_transforms_match_the_basis_module(dims, rng):
    """Coefficients in pattern order equal workers.operators.basis's (reordered), the inverse is the
    inverse, and one matrix's result does not depend on the rest of its stack."""
    tr = space_transform(dims)
    n = tr.n
    G = rng.standard_normal((5, n, n)) + 1j * rng.standard_normal((5, n, n))
    X = G + np.swapaxes(G, 1, 2).conj()
    c = tr.to_coefficients(X)
    assert np.allclose(c, to_coefficients_stack(X, dims)[:, tr.order], atol=1e-12)
    assert np.allclose(tr.to_matrices(c), X, atol=1e-12)
    assert np.array_equal(tr.to_coefficients(X[2:3])[0], c[2])
    assert np.array_equal(tr.to_matrices(c[1:2])[0], tr.to_matrices(c)[1])
    codes = tr.codes
    assert np.all(np.diff(codes) >= 0)  # pattern order


@pytest.mark.slow
@pytest.mark.parametrize("kind", ["random", "generalized"])
def test_four_party_bounds_agree_with_scs(kind, rng):
    """Mixed four-party scenario (B, C, D with trivial outputs): both bounds from the
    splitting solver equal SCS's on the compiled conic problem (Wechs, Abbott, Branciard
    2019 structures), and the chained sufficient solve (started from the necessary one's
    iterate) needs fewer iterations than a cold one and lands on the same value."""
    s = Scenario.from_dims([2, 2, 2, 1, 2, 1, 2, 1])
    W = random_valid_process(s, rng, 0.95)
    admm = {m: RobustnessProblem(s, kind, m, SolverOptions(solver="ADMM", **EPS))
            for m in ("necessary", "sufficient")}
    scs = {m: RobustnessProblem(s, kind, m, SolverOptions(solver="SCS", **EPS))
           for m in ("necessary", "sufficient")}
    lo = admm["necessary"].solve(W)
    cold = admm["sufficient"].solve(W)
    warm = admm["sufficient"].solve(W, warm_start=lo)
    assert lo.status == cold.status == warm.status == "optimal"
    assert lo.upper_bound == pytest.approx(scs["necessary"].solve(W).upper_bound, abs=2e-5)
    ref = scs["sufficient"].solve(W).upper_bound
    assert cold.upper_bound == pytest.approx(ref, abs=2e-5)
    assert warm.upper_bound == pytest.approx(ref, abs=2e-5)
    assert warm.iterations < cold.iterations


@pytest.mark.slow
def test_four_qubit_parties_certified_or_honestly_undecided():
    """Four qubit parties (256 x 256, 24 leaves of 128 x 128): three seeded valid processes
    (u = 0.9), random robustness at eps 1e-5 with the necessary and sufficient bounds; each
    verdict is certified by an exact check, or undecided with both bounds reported."""
    from bench.run import random_valid

    s = Scenario.from_dims([2] * 8)
    rng = np.random.default_rng(5)
    Ws = [random_valid(s, rng, 0.9) for _ in range(3)]
    opts = SolverOptions(eps_abs=1e-5, eps_rel=1e-5)
    done = analyse_and_certify_many(s, Ws, ("random",), "auto", opts, second_pass="none")
    for res, cv in done:
        b = res.bounds["random"]
        assert b.lower_from.solver == "ADMM" and b.upper_from.solver == "ADMM"
        assert b.lower <= b.upper + 1e-4
        if cv.certified:
            assert cv.verdict in ("separable", "nonseparable")
        else:
            assert cv.verdict == "undecided" and np.isfinite(b.lower) and np.isfinite(b.upper)
    assert sum(cv.certified for _, cv in done) >= 1
