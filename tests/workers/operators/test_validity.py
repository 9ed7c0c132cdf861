"""Validity check and the projector onto the valid subspace."""

import numpy as np
import pytest

from workers.operators.families import ocb_process
from workers.operators.scenario import Scenario
from workers.operators.validity import check_shape, check_validity, project_valid, white_noise


def test_projector_idempotent_trace_preserving(rng):
    """P(P(X)) = P(X), Tr P(X) = Tr X (orthogonal projection; identity always allowed)."""
    s = Scenario.from_dims([2, 2, 3, 2], d_future=2)
    G = rng.standard_normal((s.dim, s.dim)) + 1j * rng.standard_normal((s.dim, s.dim))
    H = G + G.conj().T
    P1 = project_valid(s, H)
    assert np.allclose(project_valid(s, P1), P1)
    assert np.trace(P1) == pytest.approx(np.trace(H))


def test_white_noise_valid():
    """1° = 1/d_I is a valid process in every scenario (workers/THEORY.md §5)."""
    for s in [Scenario.from_dims([2, 2, 2, 2]), Scenario.from_dims([3, 2], 2, 3)]:
        assert check_validity(s, white_noise(s)).valid


def test_reports_each_problem():
    s = Scenario.from_dims([2, 2, 2, 2])
    W = ocb_process().matrix
    r = check_validity(s, 2 * W)
    assert not r.valid and not r.trace_ok and r.positive and r.linear_ok
    X = np.kron(np.diag([1, -1]), np.eye(8)) / 2
    r = check_validity(s, np.eye(16) / 4 + X)  # Z on A_I alone is allowed; too large -> not PSD
    assert not r.positive and r.linear_ok
    Zao = np.kron(np.kron(np.eye(2), np.diag([1, -1])), np.eye(4))
    r = check_validity(s, np.eye(16) / 4 + 0.1 * Zao)  # Z on A_O alone is signalling to nobody
    assert not r.linear_ok and "linear validity" in r.problems()[0]
    r = check_validity(s, np.eye(16) / 4 + 0.1j * Zao)
    assert not r.hermitian


def test_shape_errors_name_the_problem():
    s = Scenario.from_dims([2, 2, 2, 2])
    with pytest.raises(ValueError, match=r"multiply to 16 but the operator is 8x8"):
        check_shape(s, np.eye(8))
    with pytest.raises(ValueError, match="square"):
        check_shape(s, np.eye(16)[:4])
