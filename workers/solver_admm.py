"""The matrix-free back-end (``solver="ADMM"``): random robustness without a conic matrix.

``AUTO`` picks it when the conic matrix of :mod:`workers.conic` would exceed
:data:`AUTO_NNZ` nonzeros (four qubit parties: ~36 million, which with SCS's copies and
factorisation does not fit in 2 GiB); it works on the :class:`workers.layout.Layout` alone,
with memory a few copies of the leaves (:mod:`workers.admm`).  It computes the random
robustness (the verdict's quantity); the generalised robustness needs a conic back-end.
"""

from __future__ import annotations

import numpy as np

from .admm import AdmmSolution, AffineProjector, Coordinates, solve_random
from .basis import to_coefficients
from .layout import Layout
from .leaf_spaces import embed_identity, selection
from .solvers import SolverOptions
from .validity import white_noise

AUTO_NNZ = 20_000_000  # above this the conic matrix (and SCS's factor of it) outgrows RAM
MAX_ITERS = 20_000  # cap on the solver's own max_iters (first-order: hundreds to thousands)


def needs_admm(layout: Layout, kind: str) -> bool:
    """Whether ``AUTO`` should use the matrix-free back-end for this problem."""
    return kind == "random" and layout.estimated_nnz() > AUTO_NNZ


class AdmmBackend:
    """Douglas-Rachford splitting with Anderson acceleration, in the product basis."""

    name = "ADMM"
    warm_startable = False

    def __init__(self, layout: Layout, kind: str, options: SolverOptions) -> None:
        if kind != "random":
            raise ValueError(f"solver='ADMM' computes the random robustness only (got "
                             f"kind={kind!r}); use solver='SCS' for the generalised one")
        self.layout, self.options = layout, options
        dims = layout.scenario.subsystem_dims
        self.noise = to_coefficients(white_noise(layout.scenario), dims)
        self.coords = Coordinates(layout)
        self.projector = AffineProjector(layout, self.noise, self.coords)
        self._index = [selection(dims, small).indices for small in layout.spaces]
        self.setup_time = 0.0

    def solve_w(self, w: np.ndarray) -> AdmmSolution:
        o = self.options
        return solve_random(self.layout, w, self.noise, o.eps_abs, o.eps_rel,
                            min(o.max_iters, MAX_ITERS), o.time_limit,
                            projector=self.projector, coords=self.coords)

    def witness_coefficients(self, sol: AdmmSolution) -> np.ndarray:
        """s_alpha = sum_j P_{j alpha} Tr(sigma_alpha S_j) from the reduced dual blocks."""
        lay = self.layout
        s = np.zeros(lay.particular.shape[1])
        for j, S in enumerate(sol.duals):
            s[self._index[j]] += lay.particular[j, self._index[j]] * to_coefficients(
                S, lay.spaces[j])
        return s

    def full_blocks(self, sol: AdmmSolution) -> tuple[tuple[np.ndarray, ...], tuple]:
        """Leaves and dual blocks of every leaf of the structure as D x D matrices (a merged
        block is split equally among its leaves; each leaf gets the block's dual)."""
        lay = self.layout
        dims, D = lay.scenario.subsystem_dims, lay.scenario.dim
        sizes = np.bincount(lay.classes)
        leaves = [embed_identity(Y, dims, small) for Y, small in zip(sol.leaves, lay.spaces)]
        duals = [embed_identity(S, dims, small, n / D)
                 for S, small, n in zip(sol.duals, lay.spaces, lay.block_sizes)]
        return (tuple(leaves[c] / sizes[c] for c in lay.classes),
                tuple(duals[c] for c in lay.classes))

    def status(self, sol: AdmmSolution) -> str:
        if sol.converged:
            return "optimal"
        o = self.options
        if o.time_limit is not None and sol.solve_time >= o.time_limit:
            return "time_limit"
        return "iteration_limit"
