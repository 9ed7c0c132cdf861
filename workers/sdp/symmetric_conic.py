"""The robustness SDP restricted to the commutant of a process's local symmetry group.

With a local symmetry group G (:mod:`workers.sdp.symmetry`), the leaves, Omega and the dual
blocks may all be taken G-invariant (an exact reduction).  Two facts make the reduced problem
as easy to compile as the full one (:mod:`workers.sdp.conic`):

* Local unitaries act inside each support pattern, so the invariant operators split by
  pattern: ``V = ⊕_p V_p``.  The per-pattern systems of the causal structure
  (``C_p x = h_p t``, the same for every basis element of pattern p) therefore apply to an
  orthonormal basis of V_p exactly as they applied to the basis elements: the variables are
  the null-space parameters of each invariant basis vector instead of each basis element.
* An invariant leaf is ``⊕_w 1 ⊗ Z_w`` in the adapted basis of :mod:`workers.sdp.commutant`, and
  is PSD iff every Z_w is: each PSD block of side n becomes blocks of sides m_w.

The bases of the V_p come from the commutant of the full space: its Hermitian basis in
coefficients (rows C, C C^T = D), and per pattern the projector ``C_p C_p^T / D`` onto V_p
in those coordinates, whose unit eigenvectors give both the coefficient rows of V_p and
their blocks.  A leaf on a reduced space (:mod:`workers.structures.leaf_spaces`) has its own
commutant.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import scipy.sparse as sp

from workers.operators.basis import from_coefficients, pattern_codes, to_coefficients_stack
from .commutant import Commutant, decompose
from .cone_vectors import matrices_to_complex_cone
from .conic import ConicProblem
from workers.structures.layout import Layout
from workers.operators.masks import valid_mask
from .symmetry import LocalSymmetry

MAX_ENTRIES = 40_000_000  # dim(commutant) x D^2 above which the reduction is not attempted


@dataclass(frozen=True)
class InvariantBasis:
    """Orthonormal invariant coefficient vectors per pattern, and their blocks per space.

    ``rows[p]`` is (k_p, n_p) over the basis elements ``index[p]`` (codes == p, increasing);
    ``comms[small]`` the commutant of each space; ``blocks[small][p]`` per part w of that
    commutant an array (k_p, m_w, m_w): the blocks of ``sum_alpha rows[p][b, alpha] sigma_alpha``
    (on the space ``small``; the reduced elements there).
    """

    dims: tuple[int, ...]
    rows: dict[int, np.ndarray]
    index: dict[int, np.ndarray]
    comms: dict[tuple[int, ...], Commutant]
    blocks: dict[tuple[int, ...], dict[int, list[np.ndarray]]]

    @property
    def dimension(self) -> int:
        return sum(r.shape[0] for r in self.rows.values())

    def coordinates(self, w: np.ndarray) -> np.ndarray:
        """Coordinates of an invariant coefficient vector in the concatenated bases."""
        return np.concatenate([self.rows[p] @ w[self.index[p]] for p in self.rows])

    def expand(self, tau: np.ndarray) -> np.ndarray:
        """Coefficient vector from concatenated coordinates (inverse of :meth:`coordinates`)."""
        D2 = int(np.prod(self.dims)) ** 2
        out, k = np.zeros(D2), 0
        for p, R in self.rows.items():
            out[self.index[p]] = tau[k:k + len(R)] @ R
            k += len(R)
        return out


def _full_space(dims: tuple[int, ...], comm: Commutant):
    """Per pattern: coefficient rows of V_p and their blocks in the full space's commutant."""
    D = int(np.prod(dims))
    codes = pattern_codes(dims)
    C = np.concatenate([to_coefficients_stack(comm.hermitian_basis(w), dims)
                        for w in range(len(comm.parts))])
    units = [comm.units(w) / np.sqrt(comm.parts[w].d) for w in range(len(comm.parts))]
    starts = np.cumsum([0] + [u.shape[0] for u in units])
    rows, index, blocks = {}, {}, {}
    for p in np.unique(codes):
        idx = np.flatnonzero(codes == p)
        Cp = C[:, idx]
        lam, U = np.linalg.eigh(Cp @ Cp.T / D)
        if np.max(np.minimum(np.abs(lam), np.abs(lam - 1)), initial=0.0) > 1e-8:
            return None  # not a projector: the group does not act inside patterns
        U = U[:, lam > 0.5]
        if not U.shape[1]:
            continue
        if p == 0:
            U = U * np.sign(U.T @ C[:, 0])  # the identity's row is +1, not -1
        rows[int(p)] = U.T @ Cp / np.sqrt(D)
        index[int(p)] = idx
        # sum_alpha R[b] sigma_alpha = sqrt(D) sum_u U[u, b] E_u, and E_u has blocks units/sqrt(d)
        blocks[int(p)] = [np.sqrt(D) * np.tensordot(U[starts[w]:starts[w + 1]].T, units[w], 1)
                          for w in range(len(units))]
    if sum(r.shape[0] for r in rows.values()) != comm.dimension:
        return None
    return rows, index, blocks


def _reduced_space(dims, small, comm: Commutant, rows, index) -> dict[int, list[np.ndarray]]:
    """Blocks of the invariant basis vectors of the patterns inside a reduced space."""
    kept = sum(1 << s for s, (d, r) in enumerate(zip(dims, small)) if r == d and d > 1)
    n = int(np.prod(small))
    full = [int(d) ** 2 for d in dims]
    red = [int(r) ** 2 for r in small]
    out = {}
    for p, R in rows.items():
        if p & ~kept:
            continue
        local = np.unravel_index(index[p], full)
        pos = np.ravel_multi_index(tuple(np.minimum(a, r - 1) for a, r in zip(local, red)), red)
        mats = []
        for b in range(len(R)):
            c = np.zeros(n * n)
            c[pos] = R[b]
            mats.append(n * from_coefficients(c, small))
        out[p] = [np.array(Zs) for Zs in zip(*[comm.blocks(M) for M in mats])]
    return out


@lru_cache(maxsize=16)
def invariant_basis(sym: LocalSymmetry, spaces: tuple[tuple[int, ...], ...]
                    ) -> InvariantBasis | None:
    """The invariant bases and blocks for ``sym`` on the full space and on ``spaces``;
    None when the decomposition fails a check or the reduction would be too large."""
    dims = sym.dims
    D = int(np.prod(dims))
    comm = decompose(sym.on_space(dims))
    if comm is None or comm.dimension * D * D > MAX_ENTRIES or comm.dimension > D * D // 4:
        return None
    found = _full_space(dims, comm)
    if found is None:
        return None
    rows, index, full_blocks = found
    comms, blocks = {dims: comm}, {dims: full_blocks}
    for small in spaces:
        if small in comms:
            continue
        c = decompose(sym.on_space(small))
        if c is None:
            return None
        comms[small] = c
        blocks[small] = _reduced_space(dims, small, c, rows, index)
    return InvariantBasis(dims, rows, index, comms, blocks)


def compile_symmetric(layout: Layout, kind: str, basis: InvariantBasis,
                      noise: np.ndarray) -> ConicProblem:
    """The ``kind`` robustness SDP in invariant coordinates (``b = b_map @ coordinates``).

    Same standard form and variable order as :func:`workers.sdp.conic.compile_problem`: r (or the
    invariant coordinates of Omega on valid patterns), then the null-space parameters.
    """
    scen = layout.scenario
    dims, D = scen.subsystem_dims, scen.dim
    pats = list(basis.rows)
    k = {p: basis.rows[p].shape[0] for p in pats}
    start = dict(zip(pats, np.cumsum([0] + [k[p] for p in pats])[:-1]))
    n_tau = sum(k.values())
    valid = valid_mask(scen)
    om_pats = [p for p in pats if valid[basis.index[p][0]]] if kind == "generalized" else []
    om_start = dict(zip(om_pats, np.cumsum([0] + [k[p] for p in om_pats])[:-1]))
    n_x = 1 if kind == "random" else sum(k[p] for p in om_pats)
    z0, n_z = {}, 0
    for p in pats:
        q = layout.nulls[p].shape[1]
        if q:
            z0[p], n_z = n_z, n_z + k[p] * q
    rows_A, rows_b, cone_dims = [], [], []
    for j, small in enumerate(layout.spaces):
        comm, blocks = basis.comms[small], basis.blocks[small]
        for w, m in enumerate(comm.sizes):
            A = sp.lil_matrix((m * m, n_x + n_z))
            B = sp.lil_matrix((m * m, n_tau))
            for p, per_part in blocks.items():
                vec = matrices_to_complex_cone(per_part[w]).T / D  # (m^2, k_p)
                part = layout.systems[p].particular[j]
                if part:
                    B[:, start[p]:start[p] + k[p]] = part * vec
                    if kind == "random" and p == 0:
                        A[:, 0] = -part * noise[0] * vec
                    elif p in om_start:
                        A[:, om_start[p]:om_start[p] + k[p]] = -part * vec
                N = layout.nulls[p]
                for a in np.flatnonzero(np.abs(N[j]) > 1e-14):
                    cols = n_x + z0[p] + np.arange(k[p]) * N.shape[1] + a
                    A[:, cols] = -N[j, a] * vec
            rows_A.append(A.tocsc())
            rows_b.append(B.tocsr())
            cone_dims.append(m)
    if kind == "generalized":
        comm, blocks = basis.comms[dims], basis.blocks[dims]
        for w, m in enumerate(comm.sizes):
            A = sp.lil_matrix((m * m, n_x + n_z))
            for p in om_pats:
                A[:, om_start[p]:om_start[p] + k[p]] = -matrices_to_complex_cone(
                    blocks[p][w]).T / D
            rows_A.append(A.tocsc())
            rows_b.append(sp.csr_matrix((m * m, n_tau)))
            cone_dims.append(m)
    c = np.zeros(n_x + n_z)
    if kind == "random":
        c[0] = 1.0
    elif 0 in om_start:
        c[om_start[0]] = 1.0 / scen.d_out_total
    A = sp.vstack(rows_A).tocsc()
    A.eliminate_zeros()
    return ConicProblem(scen, layout.structure, kind, "scs_complex", A, c,
                        sp.vstack(rows_b).tocsr(), tuple(cone_dims), layout.particular,
                        layout.spanned, np.zeros(0, dtype=np.int64), n_z, layout.classes)
