"""Estimates before work: block structure and back-end per problem, against what the
solvers really compile (workers.analysis.robustness.get_problem) and the measured figures of
bench/README.md."""

import pytest

from sweep.errors import UserError
from sweep.execution.limits import check, estimate, solves_of
from sweep.planning.plan import Plan
from sweep.spec.model import parse_spec
from workers.analysis.robustness import get_problem
from workers.sdp.solvers import SolverOptions, resolve_solver


def _plan(dims, **compute):
    return Plan(parse_spec({"scenario": {"dims": dims},
                            "family": {"kind": "ensemble", "measure": "valid_direction"},
                            "compute": {"samples": 4, **compute}}))


@pytest.mark.parametrize("dims", [[2, 2, 2, 2], [3, 3, 3, 3], [2, 2, 2, 2, 2, 2]])
@pytest.mark.parametrize("kind", ["random", "generalized"])
def test_estimated_problem_matches_the_compiled_one(dims, kind):
    """Blocks, variables and back-end of the estimate are those of the compiled problem
    (generalised: the extra Omega block exactly, its variables approximately)."""
    plan = _plan(dims, robustness=[kind])
    (solve,) = solves_of(plan)
    prob = get_problem(plan.scenario, kind, "exact", SolverOptions())
    if prob.problem is None:  # the matrix-free back-end compiles no conic matrix
        assert solve.backend == prob.options.solver == "ADMM"
        assert sorted(solve.blocks) == sorted(prob.layout.block_sizes)
        return
    assert sorted(solve.blocks) == sorted(prob.problem.cone_dims)
    assert solve.backend == resolve_solver("AUTO", prob.problem)
    if kind == "random":
        assert solve.variables == prob.problem.A.shape[1]
    else:
        assert 0.5 < solve.variables / prob.problem.A.shape[1] < 2


def test_four_qubit_parties_estimate_against_the_bench():
    """bench/README.md: four qubit parties with ADMM peaked at 378 MiB and took 240 s per
    sample (24 blocks of 128); the estimate is within a factor of 3 of both."""
    est = estimate(_plan([2] * 8), 4)
    assert {s.backend for s in est.solves} == {"ADMM"}
    assert all(s.blocks == (128,) * 24 for s in est.solves)
    assert 378e6 / 3 < est.worker_bytes < 3 * 378e6 * 1.05
    assert 240 / 3 < est.sample_seconds < 3 * 240


def test_refusals_and_warnings():
    plan = _plan([2, 2, 2, 2])
    _, warnings = check(plan, 4, 2, 8e9, 1e12, "'.'")
    assert warnings == []
    with pytest.raises(UserError, match="for the sample table alone"):
        check(plan, 4, 2, 8e9, 100.0, "'.'")
    with pytest.raises(UserError, match="more than the 1.0 MB a worker has here"):
        check(plan, 4, 2, 1e6, 1e12, "'.'")
    _, warnings = check(plan, 10 ** 6, 1, 8e9, 1e12, "'.'")
    assert len(warnings) == 1 and "for 1000000 samples on 1 worker" in warnings[0]


def test_workers_memory_known_before_start():
    """Local workers share the machine's memory; batch-queue jobs split theirs among their
    worker processes (the estimate is checked before any job is submitted)."""
    import psutil

    from sweep.execution.preflight import workers_and_memory
    from sweep.spec.run import RunSpec
    jq = RunSpec.model_validate({"cluster": "jobqueue", "jobqueue": {
        "system": "slurm", "memory": "8GB", "processes": 2, "jobs": 3}})
    assert workers_and_memory(jq) == (6, 4e9)
    n, memory = workers_and_memory(RunSpec(workers=4))
    assert n == 4 and memory == pytest.approx(psutil.virtual_memory().total / 4)
