"""Limits before work: what a sweep will need per worker, per sample and on disk.

Nothing here builds a conic matrix or an operator.  The size of each robustness problem
comes from its layout's block structure (:func:`workers.structures.layout.build_layout`; above
:data:`LAYOUT_DIM` from the layout of the same scenario with every nontrivial dimension set to
2, whose blocks and pattern systems are the same, with the real dimensions put back), the
back-end from the ``AUTO`` rules of :mod:`workers.sdp.solvers`.  The figures are estimates, good
to a small factor, calibrated on this 2-core machine kind:

* memory: a worker's interpreter and libraries (:data:`BASE_BYTES`), the operator work of a
  sample (sampling, validity, certification: ~6 complex D x D copies; one four-qutrit-party
  sample, D = 6561, peaked at 3.7 GB), the layouts (D^2 pattern codes and particular weights
  per block) and each compiled problem: SCS ~100 bytes per conic nonzero (compiling the
  four-qubit-party matrix peaked at 55 bytes per nonzero before SCS copied it), ADMM ~20
  copies of its blocks (four qubit parties: 378 MiB peak);
* time: first-order solvers ~:data:`FIRST_ORDER_ITERS` iterations, each dominated by one
  eigendecomposition per PSD block (n^3 / :data:`EIG_RATE` s: four qubit parties with ADMM
  took 0.14 s per iteration on 24 blocks of 128), plus ~3 D^3 / 1e9 s of operator work.
  Measured against it: bipartite qubits 0.05 s per sample, tripartite qubits 2 s (estimate
  2 s), four qubit parties 4 min (estimate 8.5 min), the quantum switch 2.5-4 min (estimate
  12 min); hard SCS problems can take 10x longer than estimated.

:func:`check` refuses, with one line, a sweep whose samples cannot fit in a worker's memory
or whose sample table alone cannot fit on the disk, and returns warnings for sweeps that
will take hours.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from workers.operators.basis import pattern_sizes
from workers.structures.layout import build_layout
from workers.operators.scenario import Scenario
from workers.analysis.separability import methods_for
from workers.sdp.solver_admm import AUTO_BLOCK as SPLITTING_BLOCK
from workers.sdp.solver_admm import AUTO_NNZ
from workers.sdp.solver_ipm import AUTO_BLOCK, AUTO_VARIABLES
from workers.sdp.solvers import clarabel_bytes

from sweep.errors import UserError
from sweep.planning.plan import Plan
from sweep.storage.results import SAMPLE_DTYPE
from sweep.units import human_bytes, human_seconds

LAYOUT_DIM = 1024  # above this the layout itself (D^2 arrays per block) is not built
BASE_BYTES = 250e6
OPS_COPIES = 6
SCS_BYTES_PER_NNZ = 100
ADMM_COPIES = 20
EIG_RATE = 3.5e8  # n^3 per second for a dense Hermitian eigendecomposition, one thread
FIRST_ORDER_ITERS = {"SCS": 2000, "ADMM": 1000}
IPM_ITERS = 25
PER_SAMPLE_S = 0.05  # validity, certification and bookkeeping of a small sample
MAX_SAMPLES = 10 ** 9  # a boolean per sample is kept in memory by the driver
HOURS_WARNING = 3600.0


@dataclass(frozen=True)
class Solve:
    """One compiled robustness problem as the estimate sees it."""

    kind: str
    method: str
    backend: str
    blocks: tuple[int, ...]
    variables: int
    nnz: int

    @property
    def bytes(self) -> float:
        sq = sum(n * n for n in self.blocks)
        if self.backend == "ADMM":
            return ADMM_COPIES * 16.0 * sq
        if self.backend == "CLARABEL":
            return float(clarabel_bytes(self.blocks))
        if self.backend == "IPM":
            return 16.0 * self.variables * sq * 4
        return SCS_BYTES_PER_NNZ * float(self.nnz) + 16.0 * sq * 8

    @property
    def seconds(self) -> float:
        cubes = sum(float(n) ** 3 for n in self.blocks)
        if self.backend == "IPM":
            return IPM_ITERS * (self.variables ** 2 * sum(n * n for n in self.blocks)
                                + self.variables * cubes) / 1e9
        if self.backend == "CLARABEL":
            return 30 * sum((n * (2 * n + 1)) ** 3 / 3 for n in self.blocks) / 1e9
        return FIRST_ORDER_ITERS.get(self.backend, 2000) * (cubes / EIG_RATE
                                                             + 3.0 * self.nnz / 1e9)

    def describe(self) -> str:
        sizes = sorted(set(self.blocks), reverse=True)
        return (f"{self.kind}/{self.method} {self.backend}, blocks "
                f"{'/'.join(map(str, sizes))} x {len(self.blocks)}")


@dataclass(frozen=True)
class Estimate:
    """Per-worker memory, per-sample seconds and file size of a plan (see module doc)."""

    dim: int
    solves: tuple[Solve, ...]
    worker_bytes: float
    sample_seconds: float
    table_bytes: float
    file_bytes: float
    notes: list[str] = field(default_factory=list)

    def describe(self) -> str:
        return (f"D = {self.dim}: ~{human_bytes(self.worker_bytes)} per worker, "
                f"~{human_seconds(self.sample_seconds)} per sample ("
                + "; ".join(s.describe() for s in self.solves) + ")")


def _shadow(scenario: Scenario) -> Scenario:
    """The same parties with every nontrivial dimension set to 2 (same patterns)."""
    two = [2 if d > 1 else 1 for d in scenario.subsystem_dims]
    return Scenario.from_dims(two[1:-1], two[0], two[-1])


def _layout_sizes(scenario: Scenario, method: str) -> tuple[tuple[int, ...], int, int]:
    """(block sizes, null-space variables, conic nonzeros) of ``method``'s layout."""
    dims = scenario.subsystem_dims
    small = scenario.dim > LAYOUT_DIM
    lay = build_layout(_shadow(scenario) if small else scenario, method)
    blocks = tuple(math.prod(d for d, s in zip(dims, space) if s > 1) for space in lay.spaces)
    counts = pattern_sizes(dims) if not small else {
        p: math.prod(d * d - 1 for s, d in enumerate(dims) if (p >> s) & 1)
        for p in lay.systems}
    half = [n // 2 + 1 for n in blocks]
    nnz = variables = 0
    for p, system in lay.systems.items():
        q = system.null.shape[1]
        variables += counts[p] * q
        if q:
            rows = [int((abs(lay.nulls[p][j]) > 0).sum()) for j in range(len(blocks))]
            nnz += counts[p] * sum(r * h for r, h in zip(rows, half))
    return blocks, variables + 1, nnz


def _backend(solver: str, kind: str, blocks: tuple[int, ...], variables: int,
             nnz: int) -> str:
    if solver != "AUTO":
        return solver
    if kind == "random" and (nnz > AUTO_NNZ or max(blocks) >= SPLITTING_BLOCK):
        return "ADMM"  # as workers.sdp.solver_admm.needs_admm decides
    if variables <= AUTO_VARIABLES and max(blocks) <= AUTO_BLOCK:
        return "IPM"
    return "SCS"


def solves_for(scen: Scenario, robustness, method: str, solver: str) -> list[Solve]:
    """The robustness problems of ``robustness`` (kinds) with ``method`` on ``scen``."""
    D = scen.dim
    out = []
    for kind in robustness:
        for m in methods_for(scen, method):
            blocks, variables, nnz = _layout_sizes(scen, m)
            if kind == "generalized":  # Omega: one more block of size D over the valid space
                blocks, variables = blocks + (D,), variables + D * D // 3
                nnz += (D * D // 3) * (D // 2 + 1)
            backend = _backend(solver.upper(), kind, blocks, variables, nnz)
            out.append(Solve(kind, m, backend, blocks, variables, nnz))
    return out


def solves_of(plan: Plan) -> list[Solve]:
    """The robustness problems every worker compiles for ``plan``."""
    comp = plan.spec.compute
    return solves_for(plan.scenario, comp.robustness, comp.method, comp.solver)


def sample_seconds(dim: int, solves) -> float:
    """Estimated seconds for one operator of dimension ``dim`` and these solves."""
    return PER_SAMPLE_S + 3.0 * dim ** 3 / 1e9 + sum(s.seconds for s in solves)


def estimate(plan: Plan, n_missing: int) -> Estimate:
    """The :class:`Estimate` of computing ``n_missing`` samples of ``plan``."""
    comp, scen = plan.spec.compute, plan.scenario
    D = scen.dim
    solves = tuple(solves_of(plan))
    n_methods = len({s.method for s in solves})
    layouts = n_methods * D * D * (9 + 8 * max((len(s.blocks) for s in solves), default=0))
    ops = OPS_COPIES * 16.0 * D * D
    worker = BASE_BYTES + ops + layouts + sum(s.bytes for s in solves)
    seconds = sample_seconds(D, solves)
    per_row = 16.0 * D * D * (comp.store_operators + comp.store_witnesses)
    if comp.certify and comp.store_certificates:
        per_row += 16.0 * D * D + 8192
    table = n_missing * SAMPLE_DTYPE.itemsize + plan.n_points * 8.0 * len(plan.axis_names)
    notes = []
    if comp.certify and comp.second_pass in ("auto", "clarabel") and (
            comp.second_pass == "clarabel" or D <= 32):
        blocks = max((s.blocks for s in solves), key=len, default=())
        notes.append(f"a second pass with Clarabel (uncertified samples only) needs "
                     f"~{human_bytes(clarabel_bytes(blocks))}; it is skipped when it does not "
                     "fit")
    return Estimate(D, solves, worker, seconds, table, table + n_missing * per_row, notes)


def check(plan: Plan, n_missing: int, workers: int, worker_memory: float | None,
          free_disk: float | None, where: str) -> tuple[Estimate | None, list[str]]:
    """Refuse (one-line :class:`UserError`) what cannot fit; return the estimate and the
    warnings for what will take long or may not fit on the disk."""
    if plan.n_samples > MAX_SAMPLES:
        raise UserError(f"the spec has {plan.n_samples:.3g} samples ({plan.n_points} grid "
                        f"points x {plan.reps}), more than the {MAX_SAMPLES:.0e} one sweep "
                        "holds; expected fewer compute.samples or grid points (split the "
                        "sweep)")
    if n_missing == 0:
        return None, []
    est = estimate(plan, n_missing)
    if free_disk is not None and est.table_bytes > free_disk:
        raise UserError(f"{n_missing} samples need at least {human_bytes(est.table_bytes)} for "
                        f"the sample table alone, {human_bytes(free_disk)} free for {where}; "
                        "expected fewer compute.samples or grid points, or a larger disk")
    if worker_memory and est.worker_bytes > worker_memory:
        raise UserError(f"{est.describe()}: more than the {human_bytes(worker_memory)} a worker "
                        f"has here ({workers} worker{'s' if workers > 1 else ''}); expected a "
                        "problem that fits: smaller dimensions, fewer workers per machine, or "
                        "a machine with more memory")
    warnings = []
    total = est.sample_seconds * n_missing / max(workers, 1)
    if total > HOURS_WARNING:
        warnings.append(f"estimated ~{human_seconds(total)} for {n_missing} samples on "
                        f"{workers} worker{'s' if workers > 1 else ''} ({est.describe()}; "
                        "order of magnitude: the ETA on the progress line refines it)")
    if free_disk is not None and est.file_bytes > free_disk:
        warnings.append(f"the results may need ~{human_bytes(est.file_bytes)} with "
                        f"certificates, {human_bytes(free_disk)} free for {where}: the sweep "
                        "stops cleanly when the disk is full (rerun to resume)")
    return est, warnings
