"""The layout of a robustness problem: everything but the conic matrices.

A layout fixes, for one scenario and causal structure: the merged leaves, each leaf's
per-pattern linear system (particular solution and null space, workers/THEORY.md §§2-4 in the
product basis), the particular weights P of every basis element, which basis elements the
structure can span, and each leaf's reduced space (:mod:`workers.structures.leaf_spaces`).  The
conic compiler (:mod:`workers.sdp.conic`) turns it into A, b, c for SCS, Clarabel and the IPM; the
matrix-free first-order solver (:mod:`workers.sdp.splitting`) uses it directly, so problems whose
conic matrix would not fit in memory (four qubit parties) can still be solved.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from workers.operators.basis import pattern_codes
from .leaf_spaces import reduced_dims, used_bits
from workers.operators.scenario import Scenario
from .causal import (CausalStructure, PatternSystem, build_structure, leaf_classes,
                         merged_structure, pattern_systems, sparse_null_basis)


@dataclass(frozen=True)
class Layout:
    """Structure, pattern systems and leaf spaces of one (scenario, method).

    Attributes
    ----------
    structure
        The full causal structure (one leaf per ordering, as reported in results).
    merged
        The structure with one leaf per class of identical conditions (the PSD blocks).
    classes
        Block index of every leaf of ``structure``.
    systems
        Per pattern code, its :class:`workers.structures.causal.PatternSystem` over the blocks.
    particular
        (n_blocks, D^2): each block's particular-solution weight per basis element.
    spanned
        Basis elements inside the span of the structure.
    spaces
        Per block, the subsystem dimensions with the ones it is the identity on set to 1.
    nulls
        Per pattern code, the sparse (echelon) basis of its null space (blocks x q): each
        vector is 1 on its own pivot block and 0 on the other pivots, so it touches few
        blocks (the orthonormal basis would touch all of them and make A dense).
    """

    scenario: Scenario
    structure: CausalStructure
    merged: CausalStructure
    classes: tuple[int, ...]
    systems: dict[int, PatternSystem]
    particular: np.ndarray
    spanned: np.ndarray
    spaces: tuple[tuple[int, ...], ...]
    nulls: dict[int, np.ndarray]

    @property
    def codes(self) -> np.ndarray:
        return pattern_codes(self.scenario.subsystem_dims)

    @property
    def n_blocks(self) -> int:
        return self.merged.n_leaves

    @property
    def block_sizes(self) -> tuple[int, ...]:
        return tuple(int(np.prod(s)) for s in self.spaces)

    def estimated_nnz(self) -> int:
        """Nonzeros the conic matrix A would have (without building it): each null-space
        parameter touches its blocks, each block entry one product element with n_j
        nonzeros, about n_j / 2 + 1 of them in the stored lower triangle."""
        counts = dict(zip(*np.unique(self.codes, return_counts=True)))
        half = np.array([n // 2 + 1 for n in self.block_sizes])
        total = 0
        for p, sysm in self.systems.items():
            if sysm.null.shape[1]:
                rows = np.count_nonzero(self.nulls[p], axis=1)
                total += int(counts[p]) * int(rows @ half)
        return total


@lru_cache(maxsize=32)
def build_layout(scenario: Scenario, method: str, merge_leaves: bool = True,
                 reduce_leaves: bool = True, sparse_null: bool = True) -> Layout:
    """The layout of ``method``'s structure for ``scenario`` (cached per process).

    ``merge_leaves``, ``reduce_leaves`` and ``sparse_null`` (see :class:`Layout`) leave the
    optimum unchanged and only change the cost.
    """
    full = build_structure(scenario, method)
    dims = scenario.subsystem_dims
    D = scenario.dim
    codes = pattern_codes(dims)
    patterns = np.unique(codes)
    classes = leaf_classes(full, patterns) if merge_leaves else tuple(range(full.n_leaves))
    merged = merged_structure(full, classes)
    systems = pattern_systems(merged, patterns)
    m = merged.n_leaves
    P = np.zeros((m, D * D))
    spanned = np.zeros(D * D, dtype=bool)
    active = np.zeros((m, len(patterns)), dtype=bool)
    for k, (p, sysm) in enumerate(systems.items()):
        sel = codes == p
        P[:, sel] = sysm.particular[:, None]
        spanned[sel] = sysm.spanned
        active[:, k] = (sysm.particular != 0) | np.any(np.abs(sysm.null) > 1e-12, axis=1)
    keys = np.array(list(systems))
    spaces = tuple(
        reduced_dims(dims, used_bits(keys, active[j])) if reduce_leaves else tuple(dims)
        for j in range(m))
    nulls = {p: (sparse_null_basis(s.null) if sparse_null else s.null)
             for p, s in systems.items()}
    return Layout(scenario, full, merged, classes, systems, P, spanned, spaces, nulls)
