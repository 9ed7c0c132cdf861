"""Tests for workers.games.seesaw: process values of causal games and the see-saw optimisation."""

from __future__ import annotations

import itertools
from functools import reduce

import numpy as np
import pytest

from workers.games.causal_bound import causal_bound
from workers.games.causal_games import get_game
from workers.games.seesaw import (behaviour, normalise_instrument, process_value, random_instrument,
                            seesaw)

I2 = np.eye(2)
X = np.array([[0.0, 1.0], [1.0, 0.0]])
Y = np.array([[0.0, -1j], [1j, 0.0]])
Z = np.diag([1.0, -1.0])
PAULIS = (I2, X, Y, Z)
OCB_VALUE = (2 + np.sqrt(2)) / 4
QUBITS = [(2, 2), (2, 2)]


def kron(*ops: np.ndarray) -> np.ndarray:
    return reduce(np.kron, ops)


def ocb_process() -> np.ndarray:
    """OCB process, order AI AO BI BO (OCB, Nat. Commun. 3, 1092 (2012); workers/THEORY.md §6)."""
    return (kron(I2, I2, I2, I2)
            + (kron(I2, Z, Z, I2) + kron(Z, I2, X, Z)) / np.sqrt(2)) / 4


def ocb_instruments() -> list[np.ndarray]:
    """workers/THEORY.md §7's instruments in the encoding of workers.games.causal_games.ocb_guess.

    Alice, bit x, guess a: xi_a ⊗ xi_x.  Bob, input y = 2b + b', guess g: xi_g ⊗ 1/2 when
    b' = 0, eta_g ⊗ xi_{b xor g} when b' = 1.
    """
    xi = [(I2 + Z) / 2, (I2 - Z) / 2]
    eta = [(I2 + X) / 2, (I2 - X) / 2]
    alice = np.array([[kron(xi[a], xi[x]) for a in range(2)] for x in range(2)])
    bob = np.zeros((4, 2, 4, 4))
    for b, b2, g in itertools.product(range(2), repeat=3):
        bob[2 * b + b2, g] = kron(xi[g], I2 / 2) if b2 == 0 else kron(eta[g], xi[b ^ g])
    return [alice, bob]


def random_qubit_process(rng: np.random.Generator, strength: float) -> np.ndarray:
    """Random valid bipartite qubit process: 1/4 (1 + t H), H on the allowed Pauli strings.

    A string is allowed iff it is the identity or some party has it nontrivial on A_I and
    trivial on A_O (workers/THEORY.md §2, from Araujo et al., NJP 17, 102001 (2015)); t is
    ``strength`` times the largest value keeping W positive.
    """
    H = np.zeros((16, 16), dtype=complex)
    for s in itertools.product(range(4), repeat=4):
        if any(s) and ((s[0] and not s[1]) or (s[2] and not s[3])):
            H += rng.normal() * kron(*(PAULIS[i] for i in s))
    t = strength / abs(np.linalg.eigvalsh(H).min())
    return (np.eye(16) + t * H) / 4


def lugano_process() -> np.ndarray:
    """Lugano process (Baumeler & Wolf, NJP 18, 013036 (2016); workers/THEORY.md §6), 64x64."""
    diag = np.zeros((2,) * 6)
    for a, b, c in itertools.product(range(2), repeat=3):
        diag[(1 - b) & c, a, (1 - c) & a, b, (1 - a) & b, c] = 1.0
    return np.diag(diag.ravel())


def test_ocb_instruments_reach_ocb_value() -> None:
    """workers/THEORY.md §7 instruments with the OCB process win with (2+sqrt2)/4 (OCB 2012), with
    p = Tr[W (M^A ⊗ M^B)] and no transpose (all operators are real symmetric)."""
    value = process_value(ocb_process(), ocb_instruments(), QUBITS, get_game("ocb_guess"))
    assert value == pytest.approx(OCB_VALUE, abs=1e-12)
    assert value > causal_bound(get_game("ocb_guess")).value


def test_seesaw_reaches_ocb_value() -> None:
    """See-saw on the OCB process finds (2+sqrt2)/4 (OCB, Nat. Commun. 3, 1092 (2012)); its
    instruments are valid and reproduce the reported value (certificate)."""
    result = seesaw(ocb_process(), QUBITS, get_game("ocb_guess"), n_starts=3, seed=11)
    assert result.value == pytest.approx(OCB_VALUE, abs=1e-6)
    assert result.converged and result.solver == "CLARABEL"
    assert np.all(np.diff(result.history) >= 0)
    for inst in result.instruments:
        assert np.linalg.eigvalsh(inst).min() > -1e-10
        np.testing.assert_allclose(_out_trace(inst.sum(axis=1)), _eyes(inst), atol=1e-9)
    assert process_value(ocb_process(), result.instruments, QUBITS,
                         get_game("ocb_guess")) == pytest.approx(result.value, abs=1e-12)


def _out_trace(ops: np.ndarray) -> np.ndarray:
    """Tr over A_O of qubit operators on A_I ⊗ A_O, by einsum (independent of the module)."""
    return np.einsum("xiojo->xij", ops.reshape(-1, 2, 2, 2, 2))


def _eyes(inst: np.ndarray) -> np.ndarray:
    return np.broadcast_to(np.eye(2), (len(inst), 2, 2))


def test_seesaw_with_scs_agrees() -> None:
    """SCS and Clarabel agree on the OCB value (two general-purpose solvers)."""
    result = seesaw(ocb_process(), QUBITS, get_game("ocb_guess"), n_starts=2, seed=3,
                    solver="SCS", solver_tol=1e-8)
    assert result.value == pytest.approx(OCB_VALUE, abs=1e-5)


@pytest.mark.parametrize("p", [1.0, 0.85, 1 / np.sqrt(2), 0.5])
def test_white_noise_mixture_value(p: float) -> None:
    """p W_OCB + (1-p) 1/4 reaches p(2+sqrt2)/4 + (1-p)/2, which is 3/4 at p = 1/sqrt2
    (workers/THEORY.md §5 cross-check; noise alone gives independent outputs, value 1/2)."""
    W = p * ocb_process() + (1 - p) * np.eye(16) / 4
    result = seesaw(W, QUBITS, get_game("ocb_guess"), n_starts=2, seed=5)
    assert result.value == pytest.approx(p * OCB_VALUE + (1 - p) / 2, abs=1e-6)
    assert (result.value > 0.75 + 1e-6) == (p > 1 / np.sqrt(2) + 1e-9)


def test_random_processes_never_exceed_ocb_value() -> None:
    """See-saw on random valid qubit processes stays <= (2+sqrt2)/4, the maximum over qubit
    processes for this game stated in that line of work (Brukner 2014; from memory).  Also the
    behaviours are normalised probabilities (validity, workers/THEORY.md §2 / 7)."""
    rng = np.random.default_rng(2015)
    game = get_game("ocb_guess")
    for strength in (0.5, 0.9, 1.0):
        W = random_qubit_process(rng, strength)
        result = seesaw(W, QUBITS, game, n_starts=2, seed=int(rng.integers(1 << 30)))
        assert result.value <= OCB_VALUE + 1e-7
        p = behaviour(W, result.instruments, QUBITS)
        assert p.min() > -1e-9
        np.testing.assert_allclose(p.sum(axis=(0, 1)), 1.0, atol=1e-9)


def test_local_complex_unitary_leaves_value_unchanged() -> None:
    """Conjugating W by a complex local unitary on A_I does not change the best value
    (identity: the instrument absorbs it); exercises the complex Hermitian SDP."""
    rng = np.random.default_rng(8)
    q, _ = np.linalg.qr(rng.normal(size=(2, 2)) + 1j * rng.normal(size=(2, 2)))
    U = kron(q, I2, I2, I2)
    W = U @ ocb_process() @ U.conj().T
    result = seesaw(W, QUBITS, get_game("ocb_guess"), n_starts=2, seed=9)
    assert result.value == pytest.approx(OCB_VALUE, abs=1e-6)


def test_lugano_process_wins_with_certainty() -> None:
    """Lugano process (Baumeler & Wolf 2016) wins the Lugano game with probability 1 using
    classical instruments (measure A_I in Z, answer it, send own bit), above the causal bound
    3/4 (workers/THEORY.md §7); see-saw also finds 1."""
    W = lugano_process()
    dims = [(2, 2)] * 3
    game = get_game("lugano_game")
    basis = [np.diag([1.0, 0.0]), np.diag([0.0, 1.0])]
    inst = np.array([[kron(basis[g], basis[x]) for g in range(2)] for x in range(2)])
    assert process_value(W, [inst] * 3, dims, game) == pytest.approx(1.0, abs=1e-12)
    result = seesaw(W, dims, game, n_starts=3, seed=4)
    assert result.value == pytest.approx(1.0, abs=1e-6)


def _quantum_switch() -> np.ndarray:
    """Quantum switch, P (2 qubits), AI AO BI BO, F (2 qubits) (workers/THEORY.md §6; Araujo et al.
    2015).  Uses workers.operators.families.quantum_switch when that module exists; the fallback
    orders
    P = (P_t, P_c), F = (F_t, F_c)."""
    try:
        from workers.operators.families import quantum_switch
    except ImportError:
        pass
    else:
        return np.asarray(quantum_switch(2).matrix)
    w = np.zeros((2,) * 8)  # pt pc ai ao bi bo ft fc
    for i, j, k in itertools.product(range(2), repeat=3):
        w[i, 0, i, j, j, k, k, 0] += 1.0
        w[i, 1, j, k, i, j, k, 1] += 1.0
    w = w.ravel()
    return np.outer(w, w)


def test_quantum_switch_does_not_violate() -> None:
    """The quantum switch cannot violate causal inequalities (Araujo et al., NJP 17, 102001
    (2015)); P prepared in |+>|+>, F traced out, see-saw stays <= 3/4 (OCB 2012 bound)."""
    W = _quantum_switch().reshape(4, 16, 4, 4, 16, 4)
    plus = np.full((4, 4), 1 / 4)  # |+>|+> on P, invariant under the order of P_t, P_c
    reduced = np.einsum("pafqbf,qp->ab", W, plus)
    assert np.trace(reduced) == pytest.approx(4.0)
    result = seesaw(reduced, QUBITS, get_game("ocb_guess"), n_starts=3, seed=21)
    assert result.value <= 0.75 + 1e-6


def test_normalise_and_random_instruments_are_valid() -> None:
    """Random instruments are PSD and trace-preserving on summing outcomes (definition,
    workers/THEORY.md §7), checked with an independent einsum partial trace."""
    rng = np.random.default_rng(1)
    inst = random_instrument(rng, 3, 2, 2, 2)
    assert np.linalg.eigvalsh(inst).min() > -1e-12
    np.testing.assert_allclose(_out_trace(inst.sum(axis=1)), _eyes(inst), atol=1e-12)
    np.testing.assert_allclose(normalise_instrument(inst, 2, 2), inst, atol=1e-10)


def test_white_noise_in_unequal_dimensions() -> None:
    """White noise 1/d_I with d_in = 3, d_out = 2 gives independent outputs (definition of 1°,
    workers/THEORY.md §5): product behaviours are causal, so 'both guess' stays at its causal bound
    1/2 (Branciard et al. 2016), which a = x, b = y reaches; also checks instrument
    normalisation for d_in != d_out with an einsum partial trace."""
    result = seesaw(np.eye(36) / 9, [(3, 2), (3, 2)], get_game("both_guess"), n_starts=1)
    assert result.value == pytest.approx(0.5, abs=1e-6)
    traced = np.einsum("xaiojo->xij", result.instruments[0].reshape(2, 2, 3, 2, 3, 2))
    np.testing.assert_allclose(traced, np.broadcast_to(np.eye(3), (2, 3, 3)), atol=1e-9)


def test_bad_input_messages() -> None:
    """Errors name the argument and echo the value."""
    game = get_game("ocb_guess")
    with pytest.raises(ValueError, match=r"multiply to 16 but W is 8x8"):
        seesaw(np.eye(8), QUBITS, game)
    with pytest.raises(ValueError, match=r"solver='MOSEK'"):
        seesaw(ocb_process(), QUBITS, game, solver="MOSEK")
    with pytest.raises(ValueError, match=r"has 3 parties"):
        seesaw(ocb_process(), [(2, 2)] * 3, game)
    with pytest.raises(ValueError, match=r"instruments have shapes"):
        behaviour(ocb_process(), ocb_instruments()[:1], QUBITS)
