"""Tests for bench/textbook.py: the dense cvxpy reference SDPs.

Independent references used here: a numpy reshape/trace implementation of trace-and-replace
written in this file, published robustness values (Araújo et al., NJP 17, 102001 (2015)) and
identities of the mathematics (workers/THEORY.md §§1-5).
"""

from __future__ import annotations

import math
from functools import reduce

import cvxpy as cp
import numpy as np
import pytest

from bench.textbook import (
    TextbookResult,
    _comb_constraints,
    textbook_generalized_robustness,
    textbook_random_robustness,
    textbook_random_robustness_tripartite,
    trace_replace,
    validity_map,
)

I2 = np.eye(2)
X = np.array([[0, 1], [1, 0]], dtype=complex)
Z = np.diag([1.0, -1.0]).astype(complex)
QUBITS = (2, 2, 2, 2)


def kron(*ops: np.ndarray) -> np.ndarray:
    return reduce(np.kron, ops)


def ocb_process() -> np.ndarray:
    """OCB process, order AI AO BI BO (Oreshkov, Costa, Brukner, Nat. Commun. 3, 1092 (2012))."""
    terms = kron(I2, Z, Z, I2) + kron(Z, I2, X, Z)
    return (kron(I2, I2, I2, I2) + terms / np.sqrt(2)) / 4


def choi_identity(d: int) -> np.ndarray:
    """Unnormalised Choi operator |1>><<1| of the identity channel on dimension d."""
    v = np.eye(d).reshape(-1)
    return np.outer(v, v).astype(complex)


def np_trace_replace(w: np.ndarray, dims: tuple[int, ...], axes: list[int]) -> np.ndarray:
    """Reference trace-and-replace by reshaping to a 2n-index tensor (workers/THEORY.md §1)."""
    n, t = len(dims), w.reshape(dims + dims)
    for ax in axes:
        reduced = np.trace(t, axis1=ax, axis2=ax + n)
        reduced = np.expand_dims(np.expand_dims(reduced, ax), ax + n)
        shape = [1] * (2 * n)
        shape[ax], shape[ax + n] = dims[ax], dims[ax]
        t = reduced * np.eye(dims[ax]).reshape(shape) / dims[ax]
    return t.reshape(w.shape)


def np_validity_map(w: np.ndarray, dims: tuple[int, ...]) -> np.ndarray:
    """L_V by its product formula (Araújo et al. 2015, appendix), with numpy only."""
    def factor(k: int, x: np.ndarray) -> np.ndarray:
        o, io = [2 * k + 1], [2 * k, 2 * k + 1]
        return x - np_trace_replace(x, dims, o) + np_trace_replace(x, dims, io)
    product = w
    for k in range(len(dims) // 2):
        product = factor(k, product)
    return w - product + np_trace_replace(w, dims, list(range(len(dims))))


def reorder(op: np.ndarray, dims: tuple[int, ...], order: list[int]) -> np.ndarray:
    """Operator given on subsystems in `order` (dims listed in that order) -> canonical order."""
    n = len(dims)
    back = list(np.argsort(order))
    t = op.reshape(dims + dims).transpose(back + [n + b for b in back])
    return t.reshape(op.shape)


def random_state(rng: np.random.Generator, d: int) -> np.ndarray:
    g = rng.normal(size=(d, d)) + 1j * rng.normal(size=(d, d))
    rho = g @ g.conj().T
    return rho / np.trace(rho)


def linear_map_matrix(expr_of, size: int) -> np.ndarray:
    """Matrix of a linear cvxpy expression map, by evaluation on the matrix-unit basis."""
    x = cp.Variable((size, size), complex=True)
    expr = expr_of(x)
    columns = []
    for j in range(size * size):
        unit = np.zeros(size * size, dtype=complex)
        unit[j] = 1
        x.value = unit.reshape(size, size)
        columns.append(np.asarray(expr.value).reshape(-1))
    return np.array(columns).T


@pytest.mark.parametrize("dims,axes", [((2, 3, 1, 2), [1]), ((2, 3, 1, 2), [0, 2]),
                                       ((2, 2, 2, 2), [1, 2, 3]), ((3, 2, 2), [0, 1, 2])])
def test_trace_replace_matches_numpy_reference(dims, axes):
    """_X W = Tr_X(W) ⊗ 1_X / d_X in place, for traced systems anywhere in the order.

    Source: definition in Araújo et al. NJP 17, 102001 (2015), sec. 2 (workers/THEORY.md §1);
    reference is the reshape/np.trace implementation above, not the code under test.
    """
    rng = np.random.default_rng(11)
    size = math.prod(dims)
    w = rng.normal(size=(size, size)) + 1j * rng.normal(size=(size, size))
    got = trace_replace(cp.Constant(w), dims, axes).value
    np.testing.assert_allclose(got, np_trace_replace(w, dims, axes), atol=1e-12)


def test_validity_map_matches_reference_and_counts_88_terms():
    """L_V agrees with a numpy product formula and has rank 88 for two qubit parties.

    Source: L_V from Araújo et al. 2015 (appendix); the count 88 of 256 Pauli strings is the
    derived check value in workers/THEORY.md §5. Also L_V is a projector (idempotent).
    """
    rng = np.random.default_rng(5)
    w = rng.normal(size=(16, 16)) + 1j * rng.normal(size=(16, 16))
    np.testing.assert_allclose(validity_map(cp.Constant(w), QUBITS).value,
                               np_validity_map(w, QUBITS), atol=1e-12)
    matrix = linear_map_matrix(lambda x: validity_map(x, QUBITS), 16)
    np.testing.assert_allclose(matrix @ matrix, matrix, atol=1e-12)
    assert np.linalg.matrix_rank(matrix, tol=1e-9) == 88


def test_comb_constraints_leave_52_per_order_and_16_in_both():
    """The comb equalities cut out 52 dimensions per order, 16 common to both orders.

    Source: derived counting check in workers/THEORY.md §§2 and 5 (52 of 256 Pauli strings per fixed
    order, 16 in both), for the constraints of Araújo et al. 2015.
    """
    def stacked(x, orders):
        rows = [c.expr for order in orders for c in _comb_constraints(x, QUBITS, order)]
        return cp.hstack([cp.vec(r, order="F") for r in rows])
    for orders, expected in [([(0, 1)], 52), ([(1, 0)], 52), ([(0, 1), (1, 0)], 16)]:
        matrix = linear_map_matrix(lambda x, o=orders: stacked(x, o), 16)
        assert 256 - np.linalg.matrix_rank(matrix, tol=1e-9) == expected


@pytest.mark.parametrize("solver", ["SCS", "CLARABEL"])
def test_ocb_random_robustness(solver):
    """OCB process: R_r = sqrt(2) - 1.

    Source: Araújo et al. NJP 17, 102001 (2015), sec. 5 value for the OCB process of
    Oreshkov, Costa, Brukner 2012 (check value in workers/THEORY.md §5).
    """
    result = textbook_random_robustness(ocb_process(), QUBITS, solver=solver)
    assert isinstance(result, TextbookResult)
    assert result.status == "optimal"
    assert abs(result.value - (np.sqrt(2) - 1)) < 1e-5


def test_ocb_generalized_robustness():
    """OCB process: R_g = 3 - 2 sqrt(2) ≈ 0.171573.

    Source: check value in workers/THEORY.md §5 (Araújo et al. 2015 give the OCB generalised
    robustness; the optimal Ω there is the sign-flipped OCB process).
    """
    result = textbook_generalized_robustness(ocb_process(), QUBITS)
    assert result.status == "optimal"
    assert abs(result.value - (3 - 2 * np.sqrt(2))) < 1e-5


def fixed_order_comb(rng: np.random.Generator) -> np.ndarray:
    """W = rho_AI ⊗ (Choi of identity AO -> BI) ⊗ 1_BO: a valid A<B comb (workers/THEORY.md §6)."""
    return kron(random_state(rng, 2), choi_identity(2), I2)


def test_fixed_order_comb_and_order_mixture_are_separable():
    """A comb of order A<B, and a mixture with a B<A comb, have R_r = 0 (workers/THEORY.md §6).

    Source: causally ordered combs are causally separable by definition (OCB 2012; Araújo et
    al. 2015); validity of the inputs is checked with the numpy L_V above.
    """
    rng = np.random.default_rng(2024)
    comb_ab = fixed_order_comb(rng)
    comb_ba = reorder(fixed_order_comb(rng), QUBITS, [2, 3, 0, 1])
    for w in (comb_ab, 0.3 * comb_ab + 0.7 * comb_ba):
        np.testing.assert_allclose(np_validity_map(w, QUBITS), w, atol=1e-12)
        result = textbook_random_robustness(w, QUBITS)
        assert result.status == "optimal"
        assert abs(result.value) < 1e-6


def test_white_noise_has_zero_robustness():
    """White noise 1° = 1/d_I is causally separable: R_r = R_g = 0.

    Source: Araújo et al. 2015, sec. 5 (1° is a valid, separable process); workers/THEORY.md §5.
    """
    noise = np.eye(16) / 4
    assert abs(textbook_random_robustness(noise, QUBITS).value) < 1e-6
    assert abs(textbook_generalized_robustness(noise, QUBITS).value) < 1e-6


def test_generalized_below_random_robustness_on_noisy_ocb():
    """R_g <= R_r, and R_r of p W_OCB + (1-p) 1° equals max(0, p sqrt2 - 1).

    Source: R_g minimises over all valid Ω, and 1° is one of them (Araújo et al. 2015, sec. 5).
    Closed form derived from the workers/THEORY.md §5 argument (|α| + |β| <= 1): with weight p,
    separability of (W_p + r 1°)/(1 + r) needs p sqrt2 <= 1 + r, so R_r = max(0, p sqrt2 - 1).
    """
    rng = np.random.default_rng(7)
    for p in rng.uniform(0.5, 1.0, size=2):
        w = p * ocb_process() + (1 - p) * np.eye(16) / 4
        r_r = textbook_random_robustness(w, QUBITS).value
        r_g = textbook_generalized_robustness(w, QUBITS).value
        assert abs(r_r - max(0.0, p * np.sqrt(2) - 1)) < 1e-5
        assert r_g <= r_r + 1e-6


@pytest.mark.parametrize("order", [[0, 1, 2, 3, 4, 5], [4, 5, 0, 1, 2, 3]])
def test_tripartite_with_trivial_party_reduces_to_bipartite(order):
    """OCB on two parties plus a party with d_I = d_O = 1: tripartite R_r = sqrt(2) - 1.

    Source: with a trivial party, conditions (i)-(iii) of workers/THEORY.md §4 (Wechs, Abbott,
    Branciard, NJP 21, 013027 (2019)) reduce to the bipartite A<B / B<A combs (derived here),
    so the value is the bipartite one of Araújo et al. 2015. The trivial party is placed last
    or first.
    """
    dims_in_order = (2, 2, 2, 2, 1, 1)
    dims = tuple(dims_in_order[order.index(s)] for s in range(6))
    w = reorder(ocb_process(), dims_in_order, order)
    result = textbook_random_robustness_tripartite(w, dims)
    assert result.status == "optimal"
    assert abs(result.value - (np.sqrt(2) - 1)) < 1e-5


def classical_switch() -> np.ndarray:
    """C (d_I = 1) sends a bit c; c = 0: A then B, c = 1: B then A (identity channels).

    Order AI AO BI BO CI CO, dims (2, 2, 2, 2, 1, 2). Common practice (a classically
    controlled order).
    """
    ket0, ket1 = np.diag([1.0, 0.0]), np.diag([0.0, 1.0])
    first = kron(ket0, choi_identity(2), I2, ket0)  # AI AO BI BO CO
    second = kron(ket0, choi_identity(2), I2, ket1)  # BI BO AI AO CO
    second = reorder(second, (2, 2, 2, 2, 2), [2, 3, 0, 1, 4])
    return (first + second).astype(complex)


@pytest.mark.slow
def test_tripartite_dynamical_order_is_separable():
    """A classically controlled order has R_r = 0 with the dynamical conditions.

    Slow: the 32x32 problem spends ~10 s in cvxpy compilation (measured on this machine).

    Source: workers/THEORY.md §4 / Wechs, Abbott, Branciard 2019: condition (i) acts on the sum
    W_(k), so a first party may choose the order of the others. Neither branch alone is a valid
    process, so imposing (i) per term would fail here. Validity checked with numpy L_V.
    """
    dims = (2, 2, 2, 2, 1, 2)
    w = classical_switch()
    np.testing.assert_allclose(np_validity_map(w, dims), w, atol=1e-12)
    assert np.isclose(np.trace(w).real, 8) and np.linalg.eigvalsh(w).min() > -1e-12
    result = textbook_random_robustness_tripartite(w, dims)
    assert result.status == "optimal"
    assert abs(result.value) < 1e-6


def test_bad_inputs_raise_clear_errors():
    """Wrong shape, wrong dims length and unknown solver: one-line ValueErrors (common practice)."""
    with pytest.raises(ValueError, match=r"W has shape \(8, 8\) but dims=\(2, 2, 2, 2\)"):
        textbook_random_robustness(np.eye(8), QUBITS)
    with pytest.raises(ValueError, match=r"dims=\(2, 2, 2\) must be 4 positive integers"):
        textbook_random_robustness(np.eye(8), (2, 2, 2))
    with pytest.raises(ValueError, match="solver='MOSEKX' is not supported"):
        textbook_random_robustness(np.eye(16) / 4, QUBITS, solver="MOSEKX")
