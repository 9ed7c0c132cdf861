"""Compile a robustness SDP into conic standard form, once per scenario.

Standard form (shared by SCS and Clarabel):  minimise c.x  s.t.  A x + s = b,  s in K,
with K a product of PSD cones, one per leaf of the causal structure (plus one for the free
noise Omega in the generalised robustness).  Variables live only where the structure leaves
freedom: per pattern, the null-space parameters z of
:func:`workers.structures.causal.pattern_systems`. The process W enters *only* through ``b = b_map @
w`` (w its coefficient vector), so one compiled problem is re-solved for every W of the scenario,
reusing the solver's factorisation.

Kinds:

``random``       min r  s.t.  W + r 1° = sum_j W_j  (Araujo et al., NJP 17, 102001 (2015))
``generalized``  min Tr(Om)/d_O  s.t.  W + Om = sum_j W_j,  Om >= 0 valid (same paper)

r is not constrained to be >= 0: a negative optimum measures how far inside the separable
set W lies (the reported robustness is max(r, 0); the signed value is kept as evidence).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from workers.operators.basis import to_coefficients
from .cone_vectors import basis_to_cone, cone_size
from workers.structures.layout import Layout, build_layout
from workers.structures.leaf_spaces import selection
from workers.operators.masks import valid_mask
from workers.operators.scenario import Scenario
from workers.structures.causal import CausalStructure
from workers.operators.validity import white_noise

KINDS = ("random", "generalized")


@dataclass(frozen=True)
class ConicProblem:
    """Compiled data of one robustness SDP.

    Attributes
    ----------
    A, c
        Constraint matrix and objective (fixed per scenario).
    b_map
        ``b = b_map @ w`` for the coefficient vector w of the process.
    cone_dims
        Side of each Hermitian PSD block (leaves first, then Omega for ``generalized``).
    leaf_particular
        (n_blocks, D^2): the particular-solution weight of each leaf block per basis element.
    spanned
        Boolean mask over basis elements inside the span of the causal structure.
    omega_index
        Basis-element indices of the Omega variables (``generalized`` only).
    leaf_class
        PSD block of each leaf of ``structure``: leaves with identical conditions share one
        block (see :func:`workers.structures.causal.leaf_classes`); empty means one block per leaf.
    block_spaces
        Subsystem dimensions of each PSD block, with subsystems on which that block is the
        identity set to 1 (:mod:`workers.structures.leaf_spaces`); the block is X with W_j = X ⊗ 1.
    block_maps
        Per leaf block, the sparse map from coefficient vectors (length D^2) to the block's
        cone vector (before the 1/D scale): column alpha is vec(sigma'_alpha).
    """

    scenario: Scenario
    structure: CausalStructure
    kind: str
    fmt: str
    A: sp.csc_matrix
    c: np.ndarray
    b_map: sp.csr_matrix
    cone_dims: tuple[int, ...]
    leaf_particular: np.ndarray
    spanned: np.ndarray
    omega_index: np.ndarray
    n_z: int
    leaf_class: tuple[int, ...] = ()
    block_spaces: tuple[tuple[int, ...], ...] = ()
    block_maps: tuple[sp.csr_matrix, ...] = ()

    @property
    def n_leaves(self) -> int:
        """Leaves of the causal structure (as reported in results)."""
        return self.structure.n_leaves

    @property
    def n_blocks(self) -> int:
        """Leaf PSD blocks actually in the conic problem (after merging equal leaves)."""
        return max(self.leaf_class) + 1 if self.leaf_class else self.structure.n_leaves

    def classes(self) -> tuple[int, ...]:
        """Block index of every leaf."""
        return self.leaf_class or tuple(range(self.structure.n_leaves))

    def spaces(self) -> tuple[tuple[int, ...], ...]:
        """Subsystem dimensions of every PSD block (full dims where nothing is dropped)."""
        return self.block_spaces or tuple(self.scenario.subsystem_dims for _ in self.cone_dims)

    def b(self, w: np.ndarray) -> np.ndarray:
        return self.b_map @ w

    def block_slices(self) -> list[slice]:
        """Row slice of each PSD block in the stacked cone vector."""
        out, start = [], 0
        for n in self.cone_dims:
            size = cone_size(n, self.fmt)
            out.append(slice(start, start + size))
            start += size
        return out


def _null_parametrisation(codes: np.ndarray, layout: Layout) -> tuple[list, int]:
    """Assign z indices: per basis element, (element indices, first z index, null matrix).

    Patterns outside the span (target coefficient forced to 0) keep their null space too: the
    leaves may still carry opposite coefficients there (e.g. W_(k,l) = -W_(k,m) on a pattern
    that condition (i) forbids only for the sum W_(k)).
    """
    blocks, n_z = [], 0
    for p, null in layout.nulls.items():
        q = null.shape[1]
        if q == 0:
            continue
        idx = np.nonzero(codes == p)[0]
        blocks.append((idx, n_z, null))
        n_z += len(idx) * q
    return blocks, n_z


def _leaf_z_maps(blocks: list, n_leaves: int, D2: int, n_z: int) -> list[sp.csc_matrix]:
    """For each leaf j the sparse map z -> coefficients of W_j (shape D^2 x n_z)."""
    rows = [[] for _ in range(n_leaves)]
    cols = [[] for _ in range(n_leaves)]
    vals = [[] for _ in range(n_leaves)]
    for idx, z0, null in blocks:
        q = null.shape[1]
        zcols = z0 + np.arange(len(idx))[:, None] * q + np.arange(q)[None, :]
        for j in range(n_leaves):
            nz = np.nonzero(np.abs(null[j]) > 1e-14)[0]
            if len(nz) == 0:
                continue
            rows[j].append(np.repeat(idx, len(nz)))
            cols[j].append(zcols[:, nz].reshape(-1))
            vals[j].append(np.tile(null[j, nz], len(idx)))
    out = []
    for j in range(n_leaves):
        if rows[j]:
            r, c, v = np.concatenate(rows[j]), np.concatenate(cols[j]), np.concatenate(vals[j])
        else:
            r = c = np.zeros(0, dtype=np.int64)
            v = np.zeros(0)
        out.append(sp.csc_matrix((v, (r, c)), shape=(D2, n_z)))
    return out


def compile_problem(
    scenario: Scenario, method: str, kind: str, fmt: str = "scs_complex",
    merge_leaves: bool = True, sparse_null: bool = True, reduce_leaves: bool = True,
) -> ConicProblem:
    """Build the conic form of the ``kind`` robustness for the structure ``method``.

    ``merge_leaves`` replaces leaves with identical conditions by one block,
    ``sparse_null`` uses an echelon (sparse) null-space basis instead of the orthonormal one,
    and ``reduce_leaves`` drops the subsystems on which a leaf is the identity from its PSD
    block; all three leave the optimum unchanged and only change the cost.
    """
    if kind not in KINDS:
        raise ValueError(f"kind={kind!r}, expected one of {list(KINDS)}")
    layout = build_layout(scenario, method, merge_leaves, reduce_leaves, sparse_null)
    dims = scenario.subsystem_dims
    D = scenario.dim
    codes = layout.codes
    P, spanned, m = layout.particular, layout.spanned, layout.n_blocks
    blocks, n_z = _null_parametrisation(codes, layout)
    zmaps = _leaf_z_maps(blocks, m, D * D, n_z)
    if kind == "random":
        noise = to_coefficients(white_noise(scenario), dims)
        extra = [sp.csc_matrix((P[j] * noise)[:, None]) for j in range(m)]
        omega_index = np.zeros(0, dtype=np.int64)
        c_extra = np.array([1.0])
    else:
        omega_index = np.nonzero(valid_mask(scenario))[0]
        extra = [sp.diags(P[j]).tocsc()[:, omega_index] for j in range(m)]
        c_extra = np.zeros(len(omega_index))
        c_extra[omega_index == 0] = 1.0 / scenario.d_out_total
    spaces, maps, leaf_rows, b_blocks = [], [], [], []
    for j in range(m):
        small = layout.spaces[j]
        to_block = basis_to_cone(small, fmt) @ selection(dims, small)  # vec(sigma'_a) per a
        spaces.append(small)
        maps.append(to_block.tocsr())
        leaf_rows.append(-(to_block @ sp.hstack([extra[j], zmaps[j]]).tocsc()) / D)
        b_blocks.append(to_block @ sp.diags(P[j]) / D)
    if kind == "generalized":
        V = basis_to_cone(dims, fmt)
        om = sp.hstack([V[:, omega_index], sp.csc_matrix((V.shape[0], n_z))])
        leaf_rows.append(-om.tocsc() / D)
        b_blocks.append(sp.csr_matrix((V.shape[0], D * D)))
        spaces.append(dims)
    A = sp.vstack(leaf_rows).tocsc()
    b_map = sp.vstack(b_blocks).tocsr()
    c = np.concatenate([c_extra, np.zeros(n_z)])
    cone_dims = tuple(int(np.prod(s)) for s in spaces)
    return ConicProblem(
        scenario, layout.structure, kind, fmt, A, c, b_map, cone_dims, P, spanned,
        omega_index, n_z, layout.classes, tuple(spaces), tuple(maps),
    )
