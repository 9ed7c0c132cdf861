"""Robustness solves of symmetric processes in the commutant of their symmetry group.

:class:`SymmetricProblem` compiles the reduced SDP of :mod:`workers.sdp.symmetric_conic` once per
(scenario, structure, kind, options, symmetry algebra) and returns ordinary
:class:`workers.analysis.robustness.RobustnessResult` objects: the leaves, dual blocks, Omega and
the witness are rebuilt as full operators, so certificates (:mod:`workers.certificates.verify`) are
issued and checked exactly as for any other solve; the checker never sees the reduction.
The dual blocks are the invariant dual matrices ``⊕_w 1 ⊗ Y_w / d_w``: a dual-feasible
point of the reduced problem is dual feasible for the full one (G maps the constraint space
into itself), so the witness is valid whether or not it is optimal for the full problem.
A solve that fails is redone on the full problem (``fallback_from`` records it).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from workers.operators.basis import from_coefficients, to_coefficients
from workers.sdp.cone_vectors import complex_cone_to_matrices
from workers.structures.layout import build_layout
from workers.structures.leaf_spaces import embed_identity, selection
from .robustness import RETRY, RobustnessResult, get_problem
from workers.operators.scenario import Scenario
from workers.sdp.solver_ipm import fits
from workers.sdp.solvers import RawSolution, SolverOptions, get_backend, resolve_solver
from workers.sdp.symmetric_conic import InvariantBasis, compile_symmetric, invariant_basis
from workers.sdp.symmetry import LocalSymmetry
from workers.operators.validity import white_noise


MAX_IPM_BLOCKS = 32
# back-ends that take the reduced problem (complex cone vectors); CLARABEL (real embedding)
# and ADMM (matrix-free, on the layout) always solve the full problem
REDUCIBLE = ("AUTO", "SCS", "IPM")


class Unreducible(ValueError):
    """The symmetry's commutant could not be built (a check failed) or would not pay."""


class SymmetricProblem:
    """A robustness SDP restricted to the commutant of ``sym``; call :meth:`solve_many`."""

    def __init__(self, scenario: Scenario, kind: str, method: str, options: SolverOptions,
                 sym: LocalSymmetry) -> None:
        self.scenario, self.kind, self.method, self.sym = scenario, kind, method, sym
        self.layout = build_layout(scenario, method)
        basis = invariant_basis(sym, tuple(sorted(set(self.layout.spaces))))
        if basis is None:
            raise Unreducible(f"no usable commutant for the {sym.dimension}-dim symmetry")
        self.basis: InvariantBasis = basis
        dims = scenario.subsystem_dims
        noise = to_coefficients(white_noise(scenario), dims)
        self.problem = compile_symmetric(self.layout, kind, basis, noise)
        wanted = options.solver.upper()
        if wanted not in REDUCIBLE:
            raise Unreducible(f"solver {wanted} solves the full problem")
        if wanted == "AUTO":
            # the batched interior point for small problems with few blocks (its Python work
            # grows with the number of blocks), else SCS: on the quantum switch SCS takes
            # 0.2 s / 0.8 s (random / generalised) against the IPM's 0.3 s / 1.0 s
            small = fits(self.problem) and len(self.problem.cone_dims) <= MAX_IPM_BLOCKS
            solver = "IPM" if small else "SCS"
        else:
            solver = resolve_solver(wanted, self.problem)
        self.options = replace(options, solver=solver)
        self.backend = get_backend(solver)(self.problem, self.options)
        self._slices = self.problem.block_slices()
        self._index = [selection(dims, small).indices for small in self.layout.spaces]
        sizes = [c.sizes for c in (basis.comms[s] for s in self.layout.spaces)]
        self.note = (f"symmetry-reduced: {sym.dimension}-dim local symmetry algebra (residual "
                     f"{sym.residual:.1e}), PSD blocks {max(max(s) for s in sizes)} at most, "
                     f"{self.problem.A.shape[1]} variables")

    def solve_many(self, Ws, keep_certificate: bool = False, warm_start: bool = False
                   ) -> list[RobustnessResult]:
        """Solve every W of ``Ws`` (one batched call when the back-end batches);
        ``warm_start`` chains warm-started SCS solves along ``Ws`` as
        :meth:`workers.analysis.robustness.RobustnessProblem.solve_many` does."""
        ws = [self._coefficients(W) for W in Ws]
        if not ws:
            return []
        bs = np.array([self.problem.b(self.basis.coordinates(w)) for w in ws])
        many = getattr(self.backend, "solve_many", None)
        if warm_start and self.backend.warm_startable:
            raws, prev = [], None
            for b in bs:
                prev = self.backend.solve(b, prev)
                raws.append(prev)
        else:
            raws = many(bs) if many is not None else [self.backend.solve(b) for b in bs]
        out = []
        for W, w, raw in zip(Ws, ws, raws):
            res = self._result(raw, w, keep_certificate)
            if res.status in RETRY and self.options.fallback:
                full = get_problem(self.scenario, self.kind, self.method,
                                   replace(self.options, solver="AUTO"))
                res = replace(full.solve(W, keep_certificate=keep_certificate),
                              fallback_from=f"symmetric {res.solver}:{res.status}")
            out.append(res)
        return out

    def _coefficients(self, W: np.ndarray) -> np.ndarray:
        w = to_coefficients(W, self.scenario.subsystem_dims)
        outside = np.linalg.norm(w[~self.layout.spanned]) / max(np.linalg.norm(w), 1e-300)
        if outside > 1e-7:
            raise ValueError(
                f"operator is not in the valid subspace of this scenario (relative residual "
                f"{outside:.2e}); run the validity check first")
        return w

    def _blocks(self, v: np.ndarray, j: int) -> list[np.ndarray]:
        """The Hermitian blocks of leaf block j (or Omega for j = n_blocks) in vector v."""
        m = self.layout.n_blocks
        sizes = self.problem.cone_dims
        first = sum(len(self.basis.comms[s].sizes) for s in self.layout.spaces[:j])
        count = len(self._comm(j).sizes) if j < m else len(sizes) - first
        return [complex_cone_to_matrices(v[self._slices[first + w]], sizes[first + w])
                for w in range(count)]

    def _comm(self, j: int):
        small = self.layout.spaces[j] if j < self.layout.n_blocks else self.scenario.subsystem_dims
        return self.basis.comms[small]

    def _result(self, raw: RawSolution, w: np.ndarray, keep: bool) -> RobustnessResult:
        nan = float("nan")
        ok = raw.status not in ("failed", "error", "infeasible", "unbounded") and raw.x is not None
        dims, D, m = self.scenario.subsystem_dims, self.scenario.dim, self.layout.n_blocks
        witness = leaves = duals = omega = None
        wval = nan
        if ok:
            s = np.zeros(D * D)
            mats = []
            for j, small in enumerate(self.layout.spaces):
                Y = self._comm(j).operator(self._blocks(raw.y, j), scale_by_dimension=True)
                idx = self._index[j]
                s[idx] += self.layout.particular[j, idx] * to_coefficients(Y, small)
                if keep:
                    mats.append(embed_identity(Y, dims, small, Y.shape[0] / D))
            witness = from_coefficients(s, dims)
            wval = float(s @ w / D)
            if keep:
                if self.kind == "generalized":
                    mats.append(self._comm(m).operator(self._blocks(raw.y, m),
                                                       scale_by_dimension=True))
                duals = tuple([mats[c] for c in self.layout.classes] + mats[m:])
                parts = [embed_identity(self._comm(j).operator(self._blocks(raw.s, j)), dims,
                                        small) for j, small in enumerate(self.layout.spaces)]
                sizes = np.bincount(self.layout.classes)
                leaves = tuple(parts[c] / sizes[c] for c in self.layout.classes)
                if self.kind == "generalized":
                    omega = self._comm(m).operator(self._blocks(raw.s, m))
        value = max(raw.pobj, 0.0) if ok else nan
        return RobustnessResult(
            self.kind, self.method, value, raw.dobj if ok else nan, raw.pobj if ok else nan,
            raw.solver, raw.status, raw.raw_status, raw.iterations, raw.res_pri, raw.res_dual,
            raw.gap, raw.solve_time, raw.setup_time, wval, witness, leaves, duals, omega,
            "; ".join(x for x in (raw.message, self.note) if x), "", raw)


_CACHE: dict = {}


def get_symmetric_problem(scenario: Scenario, kind: str, method: str, options: SolverOptions,
                          sym: LocalSymmetry) -> SymmetricProblem | None:
    """Cached :class:`SymmetricProblem`, or None when the symmetry cannot be used."""
    key = (scenario, kind, method, options, sym)
    if key not in _CACHE:
        if len(_CACHE) >= 16:
            _CACHE.pop(next(iter(_CACHE)))
        try:
            _CACHE[key] = SymmetricProblem(scenario, kind, method, options, sym)
        except Unreducible:
            _CACHE[key] = None
    return _CACHE[key]
