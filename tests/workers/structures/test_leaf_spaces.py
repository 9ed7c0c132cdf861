"""Reduced leaf spaces: W_j = X ⊗ 1_T is PSD iff X is, so a leaf that is the identity on T is
solved on the smaller space; the optimum does not change (workers/THEORY.md §3: a comb never ends
on an output, so the last output of every fixed-order leaf is trivial)."""

import numpy as np
import pytest

from tests.conftest import random_valid_process
from workers.operators.basis import to_coefficients
from workers.sdp.conic import compile_problem
from workers.operators.families import ocb_process
from workers.structures.leaf_spaces import embed_identity, reduced_dims, selection
from workers.analysis.robustness import RobustnessProblem
from workers.operators.scenario import Scenario
from workers.sdp.solvers import SolverOptions


def test_embed_identity_matches_kron_with_reordering(rng):
    """X on (2, ., 3) with the middle factor (dim 2) dropped equals the einsum reference
    X[a c, a' c'] delta(b, b')."""
    X = rng.standard_normal((6, 6)) + 1j * rng.standard_normal((6, 6))
    full = embed_identity(X, (2, 2, 3), (2, 1, 3))
    ref = np.einsum("acAC,bB->abcABC", X.reshape(2, 3, 2, 3), np.eye(2)).reshape(12, 12)
    assert np.array_equal(full, ref)


def test_selection_reads_the_reduced_coefficients(rng):
    """Tr(sigma_a (X ⊗ 1_T)) = d_T Tr(sigma'_a X) for a trivial on T (product basis)."""
    dims, small = (2, 3, 2), (2, 1, 2)
    X = rng.standard_normal((4, 4)) + 1j * rng.standard_normal((4, 4))
    X = X + X.conj().T
    c_full = to_coefficients(embed_identity(X, dims, small), dims)
    assert np.allclose(selection(dims, small) @ c_full, 3 * to_coefficients(X, small))
    assert reduced_dims(dims, 0b101) == small


@pytest.mark.parametrize("dims,full,reduced", [([2, 2, 2, 2], 16, 8), ([2] * 6, 64, 32)])
def test_leaves_shrink_by_the_last_output(dims, full, reduced):
    s = Scenario.from_dims(dims)
    a = compile_problem(s, "exact", "random", reduce_leaves=False)
    b = compile_problem(s, "exact", "random")
    assert set(a.cone_dims) == {full} and set(b.cone_dims) == {reduced}
    assert a.n_z == b.n_z


def test_reduction_keeps_the_optimum(rng):
    """Same robustness with and without reduced leaves (OCB: sqrt2 - 1, and random W)."""
    s = ocb_process().scenario
    opts = SolverOptions(solver="SCS", eps_abs=1e-9, eps_rel=1e-9)
    red = RobustnessProblem(s, "random", "exact", opts)
    unred = RobustnessProblem(s, "random", "exact", opts)
    object.__setattr__(unred, "problem", compile_problem(s, "exact", "random",
                                                         reduce_leaves=False))
    from workers.sdp.solvers import ScsBackend
    unred.backend = ScsBackend(unred.problem, unred.options)
    for W in [ocb_process().matrix] + [random_valid_process(s, rng) for _ in range(3)]:
        a, b = red.solve(W, keep_certificate=True), unred.solve(W, keep_certificate=True)
        assert a.upper_bound == pytest.approx(b.upper_bound, abs=1e-7)
        assert a.witness_value == pytest.approx(b.witness_value, abs=1e-7)
        assert np.allclose(sum(a.leaves), sum(b.leaves), atol=1e-6)
