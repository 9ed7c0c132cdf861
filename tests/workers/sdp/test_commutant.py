"""Block-diagonalisation of commutants (workers/sdp/commutant.py)."""

import numpy as np
import pytest

from workers.sdp.commutant import decompose, trivial

X = np.array([[0, 1], [1, 0]], dtype=complex)
Y = np.array([[0, -1j], [1j, 0]])
Z = np.diag([1.0, -1.0]).astype(complex)


def _collective(P: np.ndarray, n: int) -> np.ndarray:
    """sum_k P on qubit k (the generator of U^{⊗n})."""
    out = np.zeros((2 ** n, 2 ** n), dtype=complex)
    for k in range(n):
        out += np.kron(np.kron(np.eye(2 ** k), P), np.eye(2 ** (n - k - 1)))
    return out


def _random_element(comm, rng):
    blocks = []
    for m in comm.sizes:
        G = rng.standard_normal((m, m)) + 1j * rng.standard_normal((m, m))
        blocks.append(G + G.conj().T)
    return comm.operator(blocks), blocks


def test_three_qubits_under_collective_su2(rng):
    """U⊗U⊗U on three qubits: spin 3/2 once and spin 1/2 twice (Clebsch-Gordan), so the
    commutant is C ⊕ M_2, of dimension 1 + 4 = 5 (Schur-Weyl duality: the image of the
    group algebra of S_3 without its sign representation; Fulton & Harris, Representation
    Theory, §6.1)."""
    comm = decompose([_collective(P, 3) for P in (X, Y, Z)])
    assert sorted((p.d, p.m) for p in comm.parts) == [(2, 2), (4, 1)]
    assert comm.dimension == 5
    W, blocks = _random_element(comm, rng)
    for P in (X, Y, Z):
        H = _collective(P, 3)
        assert np.linalg.norm(H @ W - W @ H) < 1e-10
    for a, b in zip(comm.blocks(W), blocks):
        assert np.allclose(a, b, atol=1e-10)
    # every permutation of the qubits commutes with U⊗U⊗U: it lies in the commutant
    swap = np.eye(8)[[0, 2, 1, 3, 4, 6, 5, 7]]  # exchanges qubits 2 and 3
    back = comm.operator(comm.blocks(swap))
    assert np.allclose(back, swap, atol=1e-10)


def test_torus_gives_weight_spaces():
    """An abelian algebra (Z on each of two qubits): every weight occurs once, so the
    commutant is the diagonal matrices (four 1 x 1 blocks)."""
    comm = decompose([np.kron(Z, np.eye(2)), np.kron(np.eye(2), Z)])
    assert comm.sizes == (1, 1, 1, 1) and all(p.d == 1 for p in comm.parts)


def test_psd_iff_blocks_psd(rng):
    """X = ⊕ 1 ⊗ Z_w is PSD iff every block is: eigenvalues are the blocks' eigenvalues."""
    comm = decompose([_collective(P, 3) for P in (X, Y, Z)])
    W, blocks = _random_element(comm, rng)
    ev = np.sort(np.linalg.eigvalsh(W))
    expected = np.sort(np.concatenate([np.repeat(np.linalg.eigvalsh(b), p.d)
                                       for b, p in zip(blocks, comm.parts)]))
    assert np.allclose(ev, expected, atol=1e-9)


def test_hermitian_basis_is_orthonormal_and_matches_units():
    comm = decompose([_collective(P, 3) for P in (X, Y, Z)])
    for w in range(len(comm.parts)):
        E = comm.hermitian_basis(w)
        gram = np.einsum("aij,bji->ab", E, E).real
        assert np.allclose(gram, np.eye(len(E)), atol=1e-10)
        for Eu, Zu in zip(E, comm.units(w)):
            assert np.allclose(comm.blocks(Eu)[w], Zu / np.sqrt(comm.parts[w].d), atol=1e-10)


def test_no_generators_and_non_algebras():
    """No generators: the trivial commutant; matrices not closed under commutators (X and
    Y on one qubit without Z) are refused."""
    assert trivial(4).sizes == (4,)
    assert decompose([np.zeros((4, 4))]).sizes == (4,)
    assert decompose([X, Y]) is None


@pytest.mark.parametrize("seed", range(4))
def test_decomposition_does_not_depend_on_the_generic_element(seed):
    comm = decompose([_collective(P, 4) for P in (X, Y, Z)], seed=seed)
    # four qubits: spin 2 once, spin 1 three times, spin 0 twice (Clebsch-Gordan)
    assert sorted((p.d, p.m) for p in comm.parts) == [(1, 2), (3, 3), (5, 1)]
