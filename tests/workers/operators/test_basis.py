"""Product Hilbert-Schmidt basis: orthogonality, round trips, pattern counts."""

import numpy as np
import pytest

from workers.operators.basis import (basis_element, from_coefficients, local_basis, pattern_codes,
                           pattern_sizes, to_coefficients)


@pytest.mark.parametrize("d", [1, 2, 3, 4])
def test_local_basis_orthogonal_hermitian(d):
    """Tr(B_a B_b) = d delta_ab, B_0 = 1, others traceless Hermitian (common practice:
    generalised Gell-Mann matrices, rescaled)."""
    B = local_basis(d)
    gram = np.einsum("aij,bji->ab", B, B)
    assert np.allclose(gram, d * np.eye(d * d))
    assert np.allclose(B, B.conj().transpose(0, 2, 1))
    assert np.allclose(B[0], np.eye(d))
    assert np.allclose(np.trace(B[1:], axis1=1, axis2=2), 0)


def test_qubit_basis_is_pauli():
    """For d = 2 the basis is (1, X, Y, Z) (Pauli matrices, common practice)."""
    B = local_basis(2)
    X = np.array([[0, 1], [1, 0]])
    Y = np.array([[0, -1j], [1j, 0]])
    Z = np.diag([1, -1])
    assert np.allclose(B[1], X) and np.allclose(B[2], Y) and np.allclose(B[3], Z)


@pytest.mark.parametrize("dims", [(2, 2), (1, 3, 2), (2, 3, 1, 2)])
def test_round_trip(dims, rng):
    D = int(np.prod(dims))
    G = rng.standard_normal((D, D)) + 1j * rng.standard_normal((D, D))
    H = G + G.conj().T
    c = to_coefficients(H, dims)
    assert np.allclose(from_coefficients(c, dims), H)


def test_coefficients_match_dense_traces(rng):
    """c_alpha = Tr(sigma_alpha W), checked element by element against dense Kronecker
    products (identity of the expansion)."""
    dims = (2, 3)
    G = rng.standard_normal((6, 6)) + 1j * rng.standard_normal((6, 6))
    H = G + G.conj().T
    c = to_coefficients(H, dims).reshape(4, 9)
    for a in range(4):
        for b in range(9):
            ref = np.trace(basis_element((a, b), dims) @ H).real
            assert c[a, b] == pytest.approx(ref, abs=1e-12)


def test_pattern_sizes():
    """Pattern block sizes are prod (d_s^2 - 1) over nontrivial systems (workers/THEORY.md §2)."""
    sizes = pattern_sizes((2, 3))
    assert sizes == {0: 1, 1: 3, 2: 8, 3: 24}
    assert len(pattern_codes((2, 2, 2, 2))) == 256
