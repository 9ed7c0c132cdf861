"""Stacked small linear algebra that flags bad samples instead of raising (references:
numpy.linalg on one matrix at a time)."""

import numpy as np

from workers.sdp import batched_linalg as bl


def _spd(rng, n, batch):
    G = rng.standard_normal((batch, n, n)) + 1j * rng.standard_normal((batch, n, n))
    return G @ np.swapaxes(G, 1, 2).conj() + 0.1 * np.eye(n)


def test_cholesky_flags_only_the_indefinite_sample(rng):
    A = _spd(rng, 5, 4)
    A[2] -= 100 * np.eye(5)
    L, bad = bl.cholesky(A)
    assert bad.tolist() == [False, False, True, False]
    for i in (0, 1, 3):
        assert np.array_equal(L[i], np.linalg.cholesky(A[i]))
    assert np.array_equal(L[2], np.eye(5))


def test_spd_solve_matches_numpy_and_flags_singular(rng):
    M = _spd(rng, 6, 5).real
    b = rng.standard_normal((5, 6))
    x, bad = bl.spd_solve(M, b)
    assert not bad.any()
    assert np.allclose(x, np.linalg.solve(M, b[..., None])[..., 0])
    M[3] = 0.0
    x, bad = bl.spd_solve(M, b)
    assert bad.tolist() == [False, False, False, True, False] and np.all(x[3] == 0)


def test_max_step_reaches_the_boundary(rng):
    """alpha = max_steps(...) puts X + alpha D on the PSD boundary (smallest eigenvalue 0);
    a PSD direction gives inf."""
    X = _spd(rng, 5, 6)
    D = -_spd(rng, 5, 6)
    D[4] = -D[4]
    alpha = bl.max_steps(np.linalg.inv(np.linalg.cholesky(X)), D)
    assert np.isinf(alpha[4])
    for i in (0, 1, 2, 3, 5):
        lam = np.linalg.eigvalsh(X[i] + alpha[i] * D[i])
        assert abs(lam[0]) < 1e-9 * abs(lam).max()
