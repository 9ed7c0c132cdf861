"""The matrix-free back-end (``solver="ADMM"``): robustness SDPs without a conic matrix.

``AUTO`` picks it when the conic matrix of :mod:`workers.sdp.conic` would exceed
:data:`AUTO_NNZ` nonzeros (four qubit parties: ~36 million, which with SCS's copies and
factorisation does not fit in 2 GiB).  It works on the :class:`workers.structures.layout.Layout`
alone (:mod:`workers.sdp.splitting_data`, :mod:`workers.sdp.splitting`), with memory a few copies of
the blocks, for the random and the generalised robustness, and solves many processes per call.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from workers.structures.layout import Layout
from workers.structures.leaf_spaces import embed_identity
from .backend_types import SolverOptions
from .splitting import solve_batch
from .splitting_data import build_split_problem
from .stack_transforms import space_transform

AUTO_NNZ = 20_000_000  # above this the conic matrix (and SCS's factor of it) outgrows RAM
AUTO_BLOCK = 32  # random robustness with blocks this large: faster than SCS (bench/README.md)
MAX_ITERS = 20_000  # cap on the solver's own max_iters (first-order: hundreds to thousands)


def fits_in_memory(layout: Layout) -> bool:
    """Whether the conic matrix of this problem fits (SCS can take it)."""
    return layout.estimated_nnz() <= AUTO_NNZ


def needs_admm(layout: Layout, kind: str) -> bool:
    """Whether ``AUTO`` should use the matrix-free back-end: when the conic matrix would not
    fit, or for the random robustness with PSD blocks of at least :data:`AUTO_BLOCK` (three
    qubit parties: 2.2x SCS's speed at eps 1e-8, 1.4x at 1e-6, on this machine)."""
    big = kind == "random" and max(layout.block_sizes) >= AUTO_BLOCK
    return big or not fits_in_memory(layout)


@dataclass(frozen=True)
class AdmmSample:
    """One process's share of a batched splitting solve."""

    pobj: float
    dobj: float
    res_pri: float
    res_dual: float
    gap: float
    iterations: int
    converged: bool
    primal: np.ndarray
    dual: np.ndarray
    solve_time: float
    state: np.ndarray
    rho: float


class AdmmBackend:
    """Douglas-Rachford splitting with Anderson acceleration, in the product basis."""

    name = "ADMM"
    warm_startable = False

    def __init__(self, layout: Layout, kind: str, options: SolverOptions) -> None:
        self.layout, self.kind, self.options = layout, kind, options
        self.problem = build_split_problem(layout, kind)
        self.setup_time = 0.0

    def solve_w(self, w: np.ndarray) -> AdmmSample:
        return self.solve_many_w(np.asarray(w)[None])[0]

    def start_from(self, results) -> tuple[np.ndarray, np.ndarray] | None:
        """(states, rho) to start from, when every result is a matrix-free solve whose
        blocks lie in the same spaces as this problem's (else None: a cold start)."""
        if not results:
            return None
        sols = [getattr(r, "raw", None) for r in results]
        if not all(isinstance(s, AdmmSample) and s.state.shape == (self.problem.size,)
                   for s in sols):
            return None
        return np.array([s.state for s in sols]), np.array([s.rho for s in sols])

    def solve_many_w(self, ws: np.ndarray, start=None) -> list[AdmmSample]:
        """Solve for every row of ``ws`` in one batch; each sample's ``solve_time`` is the
        batch's wall time over the batch size."""
        o = self.options
        sol = solve_batch(self.problem, ws, o.eps_abs, o.eps_rel, min(o.max_iters, MAX_ITERS),
                          o.time_limit, start=start)
        per = sol.solve_time / len(ws)
        return [AdmmSample(float(sol.pobj[i]), float(sol.dobj[i]), float(sol.res_pri[i]),
                           float(sol.res_dual[i]), float(sol.gap[i]), int(sol.iterations[i]),
                           bool(sol.converged[i]), sol.primal[i], sol.dual[i], per,
                           sol.state[i], float(sol.rho[i]))
                for i in range(len(ws))]

    def _matrices(self, row: np.ndarray) -> list[np.ndarray]:
        """Block matrices ``(1/D) sum_alpha c_alpha sigma'_alpha`` of a state row."""
        D = self.layout.scenario.dim
        out = []
        for b in self.problem.blocks:
            c = row[b.offset:b.offset + b.n ** 2][None]
            out.append(space_transform(b.space).to_matrices(c)[0] * (b.n / D))
        return out

    def witness_coefficients(self, sol: AdmmSample) -> np.ndarray:
        """s_alpha = sum_j P_{j alpha} Tr(sigma_alpha S_j) from the dual blocks."""
        lay, D = self.layout, self.layout.scenario.dim
        s = np.zeros(lay.particular.shape[1])
        for j in range(lay.n_blocks):
            b = self.problem.blocks[j]
            c = sol.dual[b.offset:b.offset + b.n ** 2]
            s[b.alphas] += lay.particular[j, b.alphas] * c * (b.n / D)
        return s

    def full_blocks(self, sol: AdmmSample):
        """Leaves and dual blocks of every leaf of the structure as D x D matrices (a merged
        block is split equally among its leaves; each leaf gets the block's dual), then
        Omega and its dual for the generalised robustness."""
        lay = self.layout
        dims, D, m = lay.scenario.subsystem_dims, lay.scenario.dim, lay.n_blocks
        sizes = np.bincount(lay.classes)
        prim, dual = self._matrices(sol.primal), self._matrices(sol.dual)
        spaces = [b.space for b in self.problem.blocks]
        leaves = [embed_identity(Y, dims, sp) for Y, sp in zip(prim[:m], spaces)]
        duals = [embed_identity(S, dims, sp, b.n / D)
                 for S, sp, b in zip(dual, spaces, self.problem.blocks)]
        omega = prim[m] if self.kind == "generalized" else None
        return (tuple(leaves[c] / sizes[c] for c in lay.classes),
                tuple([duals[c] for c in lay.classes] + duals[m:]), omega)

    def status(self, sol: AdmmSample) -> str:
        if sol.converged:
            return "optimal"
        o = self.options
        if o.time_limit is not None and sol.solve_time >= o.time_limit:
            return "time_limit"
        return "iteration_limit"
