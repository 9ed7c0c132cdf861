"""Exact shortcuts taken before any SDP (switched off by ``force_solve``).

A positive semidefinite W whose product-basis coefficients lie in the pattern mask of one
fixed causal order is itself a comb of that order (workers/THEORY.md §3), hence causally
separable with random and generalised robustness 0.  White noise 1° is the simplest case: it
lies in every order's mask.  The shortcut's decomposition (W in that order's leaf, zeros
elsewhere) satisfies every structure's conditions exactly, so it certifies like a solve.
"""

from __future__ import annotations

import time
from itertools import permutations

import numpy as np

from workers.operators.basis import to_coefficients
from workers.operators.masks import comb_mask
from .robustness import RobustnessResult
from workers.operators.scenario import Scenario
from workers.structures.causal import build_structure

REL_TOL = 1e-12


def comb_order(scenario: Scenario, W: np.ndarray) -> tuple[int, ...] | None:
    """An order whose comb mask holds W exactly (to 1e-12 relative) with W >= 0, else None."""
    if np.linalg.eigvalsh((W + W.conj().T) / 2)[0] < -REL_TOL * max(np.abs(W).max(), 1e-300):
        return None
    c = to_coefficients(W, scenario.subsystem_dims)
    scale = max(np.linalg.norm(c), 1e-300)
    for order in permutations(range(scenario.n_parties)):
        if np.linalg.norm(c[~comb_mask(scenario, order)]) <= REL_TOL * scale:
            return order
    return None


def comb_result(scenario: Scenario, W: np.ndarray, kind: str, method: str,
                order: tuple[int, ...], elapsed: float) -> RobustnessResult:
    """The robustness record of a comb found by :func:`comb_order` (no solver involved)."""
    leaves = None
    if method != "necessary":
        zero = np.zeros_like(W, dtype=complex)
        labels = build_structure(scenario, method).leaves
        leaves = tuple(np.asarray(W, dtype=complex) if lab == order else zero for lab in labels)
    return RobustnessResult(
        kind, method, 0.0, 0.0, 0.0, "shortcut", "shortcut", f"comb of order {order}", 0,
        0.0, 0.0, 0.0, elapsed, 0.0, float("nan"), None, leaves, None, None,
        f"W >= 0 lies in the comb mask of order {order}: separable without an SDP")


def try_comb_shortcut(scenario: Scenario, W: np.ndarray, kinds: tuple[str, ...],
                      methods: tuple[str, ...]) -> dict[str, dict[str, RobustnessResult]] | None:
    """Results per kind and method if W is a comb, else None."""
    t0 = time.perf_counter()
    order = comb_order(scenario, W)
    if order is None:
        return None
    elapsed = time.perf_counter() - t0
    return {k: {m: comb_result(scenario, W, k, m, order, elapsed) for m in methods}
            for k in kinds}
