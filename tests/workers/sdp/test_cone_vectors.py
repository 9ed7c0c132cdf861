"""Cone vectorisations: columns are vec(sigma_alpha), inner products are Tr(X Y), and each
solver's PSD cone accepts them (checked on min Tr(C X), Tr X = 1, whose optimum is the
smallest eigenvalue of C: common practice)."""

import numpy as np
import pytest
import scipy.sparse as sp

from workers.operators.basis import basis_element, to_coefficients
from workers.sdp.cone_vectors import FORMATS, basis_to_cone, cone_to_matrix, matrix_to_cone


def _herm(rng, n):
    G = rng.standard_normal((n, n)) + 1j * rng.standard_normal((n, n))
    return G + G.conj().T


@pytest.mark.parametrize("fmt", FORMATS)
def test_columns_and_pairing(fmt, rng):
    dims = (2, 3)
    M = basis_to_cone(dims, fmt)
    for a in (0, 5, 17, 35):
        S = basis_element((a // 9, a % 9), dims)
        assert np.allclose(M[:, a].toarray().ravel(), matrix_to_cone(S, fmt))
    X, Y = _herm(rng, 6), _herm(rng, 6)
    k = 1 if fmt == "scs_complex" else 2  # the real embedding doubles the trace
    assert matrix_to_cone(X, fmt) @ matrix_to_cone(Y, fmt) == pytest.approx(
        k * np.trace(X @ Y).real)
    assert np.allclose(cone_to_matrix(matrix_to_cone(Y, fmt), 6, fmt), k * Y)


@pytest.mark.parametrize("fmt,cone", [("scs_complex", "cs"), ("lower_real", "s")])
def test_scs_accepts_the_layout(fmt, cone, rng):
    import scs

    dims, n = (2, 2), 4
    C = _herm(rng, n)
    M = basis_to_cone(dims, fmt)
    A = sp.vstack([sp.csc_matrix(np.eye(16)[[0]]), -M / n]).tocsc()
    b = np.concatenate([[1.0], np.zeros(M.shape[0])])
    size = n if cone == "cs" else 2 * n
    sol = scs.SCS(dict(A=A, b=b, c=to_coefficients(C, dims) / n), {"z": 1, cone: [size]},
                  eps_abs=1e-9, eps_rel=1e-9, verbose=False).solve()
    assert sol["info"]["pobj"] == pytest.approx(np.linalg.eigvalsh(C)[0], abs=1e-6)


def test_clarabel_accepts_the_layout(rng):
    import clarabel

    dims, n = (2, 2), 4
    C = _herm(rng, n)
    M = basis_to_cone(dims, "upper_real")
    A = sp.vstack([sp.csc_matrix(np.eye(16)[[0]]), -M / n]).tocsc()
    b = np.concatenate([[1.0], np.zeros(M.shape[0])])
    st = clarabel.DefaultSettings()
    st.verbose = False
    cones = [clarabel.ZeroConeT(1), clarabel.PSDTriangleConeT(2 * n)]
    sol = clarabel.DefaultSolver(sp.csc_matrix((16, 16)), to_coefficients(C, dims) / n, A, b,
                                 cones, st).solve()
    assert sol.obj_val == pytest.approx(np.linalg.eigvalsh(C)[0], abs=1e-6)
