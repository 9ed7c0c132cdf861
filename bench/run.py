"""Throughput benchmarks of the compiled robustness SDPs against the textbook formulation.

Run from the repository root::

    python -m bench            # default targets (a few minutes on 2 cores)
    python -m bench --quick    # fewer samples
    python -m bench --only bipartite-random tripartite-qubits

Each target runs in its own spawned process (so its peak resident memory is its own) with one
BLAS/MKL thread; the fast path and the textbook baseline of one target run side by side in
that process.  Printed per target: instances, median seconds per sample (fast, baseline),
their ratio, the largest difference of the answers, and the peak memory of the process.
Times are wall-clock on a shared machine: read them as ratios, not absolutes.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from typing import Callable

import numpy as np

from bench.sweep_scaling import sweep_scaling
from bench.table import Row, format_table, peak_mib

THREAD_VARS = ("OMP_NUM_THREADS", "MKL_NUM_THREADS", "OPENBLAS_NUM_THREADS")


def random_valid(scenario, rng: np.random.Generator, u: float) -> np.ndarray:
    """``1° + u t_max H``: H a Gaussian Hermitian projected onto the traceless valid subspace,
    t_max the largest step keeping the operator PSD (u in (0, 1])."""
    from workers.operators.validity import project_valid, white_noise

    D = scenario.dim
    G = rng.standard_normal((D, D)) + 1j * rng.standard_normal((D, D))
    H = project_valid(scenario, (G + G.conj().T) / 2)
    H = H - np.trace(H).real / D * np.eye(D)
    lam = np.linalg.eigvalsh(H)[0]
    return white_noise(scenario) + u * H / (scenario.d_in_total * abs(lam))


def _timed(fn: Callable[[], float]) -> tuple[float, float]:
    t0 = time.perf_counter()
    value = fn()
    return time.perf_counter() - t0, value


def _compare(name: str, scenario, kind: str, method: str, n: int, eps: float,
             baseline: Callable | None, u: float = 0.9, seed: int = 4,
             solver: str = "AUTO") -> Row:
    """Fast path (compiled once per scenario) against ``baseline(W) -> value`` per sample.

    With a batching back-end (IPM) the n processes are solved as one batch and the fast time
    per sample is the batch's wall time over n (throughput per core; the note gives the
    median of one-at-a-time solves); otherwise it is the median of the single solves.
    """
    from workers.analysis.robustness import get_problem
    from workers.sdp.solvers import SolverOptions

    rng = np.random.default_rng(seed)
    Ws = [random_valid(scenario, rng, u) for _ in range(n)]
    opts = SolverOptions(solver=solver, eps_abs=eps, eps_rel=eps)
    t_setup, prob = _timed(lambda: get_problem(scenario, kind, method, opts))
    singles = [_timed(lambda W=W: prob.solve(W).value) for W in Ws]
    fast, t_fast = [v for _, v in singles], float(np.median([t for t, _ in singles]))
    how = "median of single solves"
    if hasattr(prob.backend, "solve_many"):
        t_batch, fast = _timed(lambda: [r.value for r in prob.solve_many(Ws)])
        t_fast, how = t_batch / n, f"batch of {n}; one at a time {t_fast:.3g} s"
    base = [_timed(lambda W=W: baseline(W)) for W in Ws] if baseline else []
    diff = max((abs(f - b[1]) for f, b in zip(fast, base)), default=float("nan"))
    note = f"{prob.options.solver}, {how}; setup {t_setup:.2f} s, eps {eps:g}, {method}"
    return Row(name, n, t_fast,
               float(np.median([b[0] for b in base])) if base else float("nan"), diff,
               peak_mib(), note)


def bipartite(kind: str, n: int) -> Row:
    from bench import textbook
    from workers.operators.scenario import Scenario

    s = Scenario.from_dims([2, 2, 2, 2])
    fn = (textbook.textbook_random_robustness if kind == "random"
          else textbook.textbook_generalized_robustness)
    return _compare(f"bipartite-{kind}", s, kind, "exact", n, 1e-8,
                    lambda W: fn(W, (2, 2, 2, 2), "SCS", 1e-8).value)


def tripartite_small(n: int) -> Row:
    """Tripartite with the last two outputs trivial (16x16): small enough for the baseline."""
    from bench import textbook
    from workers.operators.scenario import Scenario

    dims = (2, 2, 2, 1, 2, 1)
    s = Scenario.from_dims(dims)
    return _compare("tripartite-2,2,2,1,2,1", s, "random", "exact", n, 1e-8,
                    lambda W: textbook.textbook_random_robustness_tripartite(
                        W, dims, "SCS", 1e-8).value)


def tripartite_qubits(n: int, eps: float, baseline: bool = True) -> Row:
    """Three qubit parties (64 x 64, dynamical order) against the Pauli-coefficient cvxpy
    formulation of :mod:`bench.pauli_baseline` (SCS at eps 1e-7, a fresh problem per
    process).  "max diff" compares the signed optima (both sides leave the noise weight
    free), so separable samples are compared by how far inside the set they lie."""
    from bench.pauli_baseline import pauli_random_robustness
    from workers.analysis.robustness import get_problem
    from workers.operators.scenario import Scenario
    from workers.sdp.solvers import SolverOptions

    s = Scenario.from_dims([2] * 6)
    rng = np.random.default_rng(4)
    Ws = [random_valid(s, rng, 0.9) for _ in range(n)]
    opts = SolverOptions(eps_abs=eps, eps_rel=eps)
    t_setup, prob = _timed(lambda: get_problem(s, "random", "exact", opts))
    fast = [_timed(lambda W=W: prob.solve(W)) for W in Ws]
    t_fast = float(np.median([t for t, _ in fast]))
    how = "median of single solves"
    if hasattr(prob.backend, "solve_many") or hasattr(prob.backend, "solve_many_w"):
        t_batch, _ = _timed(lambda: prob.solve_many(Ws))
        how = f"batch of {n} {t_batch / n:.3g} s/sample; single solves median {t_fast:.3g} s"
    base = [_timed(lambda W=W: pauli_random_robustness(W, (2,) * 6, 1e-7)) for W in Ws] \
        if baseline else []
    diff = max((abs(f[1].upper_bound - b[1].value) for f, b in zip(fast, base)),
               default=float("nan"))
    iters = [r.iterations for _, r in fast]
    note = (f"{prob.options.solver}, {how}; setup {t_setup:.2f} s, eps {eps:g}, exact; "
            f"iterations {min(iters)}-{max(iters)}")
    if base:
        note += (f"; baseline: Pauli-coefficient cvxpy + SCS eps 1e-7, setup "
                 f"{np.median([b[1].setup_time for b in base]):.1f} s + solve "
                 f"{np.median([b[1].solve_time for b in base]):.1f} s")
    return Row(f"tripartite-qubits eps={eps:g}", n, t_fast,
               float(np.median([b[0] for b in base])) if base else float("nan"), diff,
               peak_mib(), note)


def switch_check(repeats: int = 1) -> Row:
    """``orderless check`` on the quantum switch with a qubit target (both robustness
    measures and the certificate), as a separate process pinned to one core; its answer
    check is R_r = 5.91037 and R_g = 0.6 (reference values computed outside this project
    with an independent formulation).  "peak MiB" is the check process's own peak."""
    import json
    import resource
    import subprocess
    import tempfile

    from workers.operators.families import quantum_switch

    with tempfile.TemporaryDirectory() as tmp:
        path = f"{tmp}/switch.npy"
        np.save(path, quantum_switch().matrix)
        pin = ["taskset", "-c", "0"] if _has_taskset() else []
        cmd = pin + [sys.executable, "-m", "sweep.cli", "check", path, "--dims", "2,2,2,2",
                     "--past", "4", "--future", "4", "--json"]
        env = {**os.environ, **{v: "1" for v in THREAD_VARS}}
        walls, out = [], {}
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        for _ in range(repeats):
            t0 = time.perf_counter()
            done = subprocess.run(cmd, capture_output=True, text=True, env=env, check=True)
            walls.append(time.perf_counter() - t0)
            out = json.loads(done.stdout)
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime + after.ru_stime - before.ru_utime - before.ru_stime) / repeats
    diff = max(abs(out["random_robustness"] - 5.91037), abs(out["generalized_robustness"] - 0.6))
    solves = "; ".join(f"{x['kind']} {x['solver']} {x['iterations']} it {x['solve_time']:.2f} s"
                       for x in out["solves"])
    return Row("quantum switch check", repeats, float(np.median(walls)), float("nan"), diff,
               after.ru_maxrss / 1024.0,
               f"one core{' (taskset -c 0)' if pin else ''}, wall median of {repeats}, CPU "
               f"{cpu:.1f} s; R_r {out['random_robustness']:.6f}, R_g "
               f"{out['generalized_robustness']:.6f}, verdict {out['verdict']} (certified "
               f"{out['certified']}); {solves}; max diff = against 5.91037 / 0.6")


def _has_taskset() -> bool:
    import shutil

    return shutil.which("taskset") is not None


def four_party(dims: tuple[int, ...], n: int, eps: float = 1e-8) -> Row:
    """Necessary and sufficient bounds per sample (both solves counted in the time)."""
    from workers.analysis.robustness import get_problem
    from workers.operators.scenario import Scenario
    from workers.sdp.solvers import SolverOptions

    s = Scenario.from_dims(list(dims))
    rng = np.random.default_rng(5)
    Ws = [random_valid(s, rng, 0.9) for _ in range(n)]
    opts = SolverOptions(eps_abs=eps, eps_rel=eps, time_limit=300.0)
    probs = [get_problem(s, "random", m, opts) for m in ("necessary", "sufficient")]
    chain = all(p.options.solver == "ADMM" for p in probs)  # sufficient from necessary
    times, gaps = [], []
    for W in Ws:
        def both(W=W):
            lo = probs[0].solve(W)
            return lo.value, probs[1].solve(W, warm_start=lo if chain else None).value
        t, (lo, up) = _timed(both)
        times.append(t)
        gaps.append(up - lo)
    blocks = [p.layout.n_blocks for p in probs]
    solvers = "/".join(p.options.solver for p in probs)
    return Row(f"four-party {','.join(map(str, dims))}", n, float(np.median(times)),
               float("nan"), float(max(gaps)), peak_mib(),
               f"{solvers}, eps {eps:g}, necessary+sufficient, blocks {blocks} (of 24), "
               f"largest {max(max(p.layout.block_sizes) for p in probs)}; "
               "max diff = largest sufficient-necessary gap")


def four_qubits(n: int, eps: float = 1e-5) -> Row:
    """Four qubit parties (256 x 256): necessary and sufficient bounds per sample with the
    matrix-free splitting solver (AUTO's choice here), the sufficient solve started from the
    necessary one's final iterate; the note gives the conic matrix SCS would need."""
    from workers.structures.layout import build_layout
    from workers.analysis.robustness import get_problem
    from workers.operators.scenario import Scenario
    from workers.sdp.solvers import SolverOptions

    s = Scenario.from_dims([2] * 8)
    nnz = max(build_layout(s, m).estimated_nnz() for m in ("necessary", "sufficient"))
    rng = np.random.default_rng(5)
    Ws = [random_valid(s, rng, 0.9) for _ in range(n)]
    opts = SolverOptions(eps_abs=eps, eps_rel=eps)
    nec, suf = (get_problem(s, "random", m, opts) for m in ("necessary", "sufficient"))
    times, gaps, notes = [], [], []
    for W in Ws:
        def both(W=W):
            lo = nec.solve(W)
            return lo, suf.solve(W, warm_start=lo)
        t, (lo, up) = _timed(both)
        times.append(t)
        gaps.append(up.upper_bound - lo.upper_bound)
        notes.append(f"R in [{lo.upper_bound:.5f}, {up.upper_bound:.5f}], {lo.iterations}+"
                     f"{up.iterations} iterations ({lo.solve_time:.0f} s + "
                     f"{up.solve_time:.0f} s), {lo.status}/{up.status}")
    return Row("four-party qubits", n, float(np.median(times)), float("nan"),
               float(max(gaps)), peak_mib(),
               f"{nec.options.solver}, eps {eps:g}, blocks {nec.layout.block_sizes[0]}"
               f" x {nec.layout.n_blocks}; " + "; ".join(notes) + f"; the conic matrix "
               f"would hold ~{nnz / 1e6:.0f}M nonzeros (~{nnz * 12 / 2**30:.1f} GiB before SCS "
               "copies and factorises it)")


def white_noise_grid(n: int, eps: float = 1e-6) -> Row:
    """p W + (1-p) 1° for the Lugano process (tripartite, 64 x 64) on n grid points
    p in [0.1, 1] (its threshold p = 1/(1 + R_r) lies inside): SCS solves warm-started along
    the grid (fast) against cold solves (baseline).  The OCB grid of the same length is in the
    note: a 16 x 16 solve is ~50 iterations, checked by SCS every 25, so warm starts cannot
    pay there; the batched IPM (no warm start) is its fast path."""
    from workers.operators.families import lugano_process, ocb_process, white_noise_mixture
    from workers.analysis.robustness import RobustnessProblem, get_problem
    from workers.sdp.solvers import SolverOptions

    P = lugano_process()
    opts = SolverOptions(solver="SCS", eps_abs=eps, eps_rel=eps)
    Ws = [white_noise_mixture(P.scenario, P.matrix, p) for p in np.linspace(0.1, 1.0, n)]
    t_cold, cold = _timed(lambda: RobustnessProblem(P.scenario, "random", "exact", opts)
                          .solve_many(Ws))
    t_warm, warm = _timed(lambda: RobustnessProblem(P.scenario, "random", "exact", opts)
                          .solve_many(Ws, warm_start=True))
    diff = max(abs(a.value - b.value) for a, b in zip(cold, warm))
    iters = (sum(r.iterations for r in cold), sum(r.iterations for r in warm))
    O = ocb_process()
    Wo = [white_noise_mixture(O.scenario, O.matrix, p) for p in np.linspace(0.5, 1.0, n)]
    ocb = {}
    for label, solver, warm_flag in (("SCS cold", "SCS", False), ("SCS warm", "SCS", True),
                                     ("IPM batch", "IPM", False)):
        prob = get_problem(O.scenario, "random", "exact", SolverOptions(solver=solver))
        ocb[label] = _timed(lambda: prob.solve_many(Wo, warm_start=warm_flag))[0] / n
    return Row("white-noise grid (warm vs cold)", n, t_warm / n, t_cold / n, diff, peak_mib(),
               f"Lugano, eps {eps:g}, SCS iterations {iters[0]} cold vs {iters[1]} warm; "
               f"R_r(p=1) = {cold[-1].value:.6f}; OCB grid per point: " +
               ", ".join(f"{k} {v * 1e3:.1f} ms" for k, v in ocb.items()))


TARGETS: dict[str, Callable[[bool], Row]] = {
    "sweep-scaling": lambda q: sweep_scaling(60, 3) if q else sweep_scaling(200),
    "bipartite-random": lambda q: bipartite("random", 16 if q else 32),
    "bipartite-generalized": lambda q: bipartite("generalized", 5 if q else 15),
    "tripartite-small": lambda q: tripartite_small(3 if q else 6),
    "tripartite-qubits": lambda q: tripartite_qubits(3 if q else 7, 1e-8, baseline=False),
    "tripartite-qubits-1e-6": lambda q: tripartite_qubits(2 if q else 4, 1e-6),
    "switch-check": lambda q: switch_check(1 if q else 3),
    "four-party-tiny": lambda q: four_party((2, 1) * 4, 3 if q else 10),
    "four-party-mixed": lambda q: four_party((2, 2, 2, 1, 2, 1, 2, 1), 2 if q else 3, 1e-6),
    "four-party-qubits": lambda q: four_qubits(1),
    "white-noise-grid": lambda q: white_noise_grid(50),
}


IN_PROCESS = ("sweep-scaling",)  # daemonic pool processes may not start dask nannies


def _run_one(name: str, quick: bool) -> Row:
    for var in THREAD_VARS:
        os.environ[var] = "1"
    return TARGETS[name](quick)


def main(argv: list[str] | None = None) -> int:
    import multiprocessing as mp

    ap = argparse.ArgumentParser(prog="python -m bench", description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="fewer samples per target")
    ap.add_argument("--only", nargs="+", choices=sorted(TARGETS), help="targets to run")
    args = ap.parse_args(argv)
    ctx = mp.get_context("spawn")
    rows = []
    for name in args.only or list(TARGETS):
        if name in IN_PROCESS:  # starts its own dask workers: pool processes cannot
            rows.append(_run_one(name, args.quick))
            print(format_table(rows[-1:]).splitlines()[-1], flush=True)
            continue
        with ctx.Pool(1) as pool:  # a fresh process per target: its own peak memory
            rows.append(pool.apply(_run_one, (name, args.quick)))
        print(format_table(rows[-1:]).splitlines()[-1], flush=True)
    import cvxpy, scs, clarabel  # noqa: E401 - versions for the record

    print(f"\n{time.strftime('%Y-%m-%d')}  python {sys.version.split()[0]}  numpy "
          f"{np.__version__}  scs {scs.__version__}  clarabel {clarabel.__version__}  "
          f"cvxpy {cvxpy.__version__}\n")
    print(format_table(rows))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
