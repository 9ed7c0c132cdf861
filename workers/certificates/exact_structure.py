"""Exact per-pattern linear algebra of a causal structure, in integers.

For a support pattern p, the leaves' coefficients x_alpha (one entry per leaf) of a
decomposition must satisfy ``C_p x_alpha = h_p t_alpha`` (see :mod:`workers.structures.causal`):
row 0 of C_p is all ones with h = 1 (the leaves sum to the target), and each group condition
that forbids p adds the indicator row of the group's leaves with h = 0.  Here C_p is rebuilt
from the structure's group masks and reduced to independent rows ``C_I`` (row 0 kept first),
with the integer adjugate and determinant of ``G = C_I C_I^T``, so that

* the orthogonal projection onto the row space of C_p is ``y -> C_I^T adj(G) C_I y / det G``;
* the minimum-norm correction onto ``C_p x = h t`` (when p is spanned) is
  ``x -> x - C_I^T adj(G) (C_I x - h_I t) / det G``;

both exact on python integers.
"""

from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from functools import lru_cache

import flint
import numpy as np

from workers.operators.basis import pattern_codes
from workers.operators.scenario import Scenario
from workers.structures.causal import CausalStructure, build_structure


@dataclass(frozen=True)
class ExactPatternSystem:
    """Independent rows C_I (object ints), their h, adj(C_I C_I^T), det, and spannedness."""

    rows: np.ndarray
    h: np.ndarray
    adj: np.ndarray
    det: int
    spanned: bool


def _full_rows(structure: CausalStructure, pattern: int) -> list[list[int]]:
    m = structure.n_leaves
    rows = [[1] * m]
    for g in structure.groups:
        if g.forbids(pattern):
            rows.append([1 if j in g.leaves else 0 for j in range(m)])
    return rows


def _rank(rows: list[list[int]]) -> int:
    if not rows:
        return 0
    return flint.fmpz_mat(len(rows), len(rows[0]), [v for r in rows for v in r]).rank()


def _independent(rows: list[list[int]]) -> list[list[int]]:
    """Greedy maximal independent subset, in order (so row 0 is always kept)."""
    chosen: list[list[int]] = []
    for r in rows:
        if _rank(chosen + [r]) > len(chosen):
            chosen.append(r)
    return chosen


def _adjugate(G: list[list[int]]) -> tuple[np.ndarray, int]:
    M = flint.fmpz_mat(G)
    det = int(M.det())
    inv = M.inv()  # exact rational inverse
    k = len(G)
    adj = np.empty((k, k), dtype=object)
    for a in range(k):
        for b in range(k):
            q = Fraction(int(inv[a, b].p), int(inv[a, b].q)) * det
            if q.denominator != 1:
                raise ArithmeticError("adjugate is not integral")
            adj[a, b] = q.numerator
    return adj, det


def exact_system(structure: CausalStructure, pattern: int) -> ExactPatternSystem:
    """The exact system of one pattern (see module docstring)."""
    rows = _full_rows(structure, int(pattern))
    spanned = _rank(rows[1:]) < _rank(rows)
    indep = _independent(rows)
    C = np.array(indep, dtype=object)
    G = [[int(sum(a * b for a, b in zip(r, s))) for s in indep] for r in indep]
    adj, det = _adjugate(G)
    h = np.zeros(len(indep), dtype=object)
    h[0] = 1
    return ExactPatternSystem(C, h, adj, det, spanned)


@lru_cache(maxsize=32)
def exact_systems(scenario: Scenario, method: str) -> dict[int, ExactPatternSystem]:
    """:func:`exact_system` for every pattern occurring in the scenario (cached)."""
    structure = build_structure(scenario, method)
    codes = np.unique(pattern_codes(scenario.subsystem_dims))
    return {int(p): exact_system(structure, int(p)) for p in codes}


def common_det(systems: dict[int, ExactPatternSystem]) -> int:
    """lcm of all determinants: one denominator for every pattern's projection."""
    return int(np.lcm.reduce([s.det for s in systems.values()], dtype=object))


def project_rowspace(y: np.ndarray, codes: np.ndarray, systems: dict[int, ExactPatternSystem]
                     ) -> tuple[np.ndarray, np.ndarray, int]:
    """Project integer coefficients y (leaves x alphas) onto every row space, exactly.

    Returns ``(y_hat, s, L)``: ``y_hat / L`` is the projection of y, and ``s / L`` the
    witness coefficients ``lambda_alpha . h`` (the multiplier of the all-ones row).
    """
    L = common_det(systems)
    y_hat = np.zeros(y.shape, dtype=object)
    s = np.zeros(y.shape[1], dtype=object)
    for p, sysm in systems.items():
        idx = np.nonzero(codes == p)[0]
        lam = sysm.adj.dot(sysm.rows.dot(y[:, idx])) * (L // sysm.det)
        y_hat[:, idx] = sysm.rows.T.dot(lam)
        s[idx] = lam[0]
    return y_hat, s, L


def project_affine(x: np.ndarray, t: np.ndarray, codes: np.ndarray,
                   systems: dict[int, ExactPatternSystem]) -> tuple[np.ndarray, int]:
    """Minimum-norm exact correction of leaf coefficients x so that ``C_p x = h_p t``.

    x (leaves x alphas) and t (alphas) are integers on one common scale.  Returns
    ``(x_hat, L)`` with ``x_hat / L`` the corrected coefficients (same scale as x).
    Raises ValueError if t is nonzero on a pattern outside the structure's span.
    """
    L = common_det(systems)
    x_hat = np.zeros(x.shape, dtype=object)
    for p, sysm in systems.items():
        idx = np.nonzero(codes == p)[0]
        if not sysm.spanned and np.any(t[idx] != 0):
            raise ValueError(f"target has a component on pattern {p}, outside the span")
        resid = sysm.rows.dot(x[:, idx]) - np.outer(sysm.h, t[idx])
        x_hat[:, idx] = x[:, idx] * L - sysm.rows.T.dot(sysm.adj.dot(resid)) * (L // sysm.det)
    return x_hat, L
