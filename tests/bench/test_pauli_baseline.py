"""Tests for bench/pauli_baseline.py, the Pauli-coefficient cvxpy reference formulation.

References: the OCB process value R_r = sqrt2 - 1 (Araujo et al., NJP 17, 102001 (2015);
workers/THEORY.md §5), the string counts of workers/THEORY.md §§2-5 (52 of the 256 two-qubit
Pauli strings allowed in each fixed order, 16 in both), and that causally ordered combs are
separable (workers/THEORY.md §6).
"""

from __future__ import annotations

import numpy as np
import pytest

from bench.pauli_baseline import _bipartite_rules, pauli_random_robustness, pauli_strings
from workers.operators.families import ocb_process, random_comb
from workers.operators.scenario import Scenario


def test_strings_are_the_pauli_basis():
    """Columns vec(P_s) are orthogonal with Tr(P_s P_t) = D delta (Hermitian, unitary)."""
    words, vec = pauli_strings((2, 2, 1, 2))
    G = (vec.conj().T @ vec).toarray()
    assert len(words) == 64 and np.allclose(G, 8 * np.eye(64))


def test_bipartite_order_rules_count_52_and_16():
    words, _ = pauli_strings((2, 2, 2, 2))
    allowed, _ = _bipartite_rules(words)
    a, b = set(allowed[(0, 1)]), set(allowed[(1, 0)])
    assert len(a) == len(b) == 52 and len(a & b) == 16


def test_ocb_random_robustness():
    r = pauli_random_robustness(ocb_process().matrix, (2, 2, 2, 2))
    assert r.status == "optimal"
    assert r.value == pytest.approx(np.sqrt(2) - 1, abs=1e-6)


def test_tripartite_comb_is_separable():
    """A comb of order A < B < C (C with a trivial output) is inside the separable set: the
    free noise weight is not positive."""
    s = Scenario.from_dims([2, 2, 2, 2, 2, 1])
    W = random_comb(s, (0, 1, 2), np.random.default_rng(3))
    r = pauli_random_robustness(W, (2, 2, 2, 2, 2, 1))
    assert r.status == "optimal" and r.value <= 1e-6


def test_rejects_other_dimensions():
    with pytest.raises(ValueError, match="dimension 1 or 2"):
        pauli_random_robustness(np.eye(12), (2, 3, 1, 2))
