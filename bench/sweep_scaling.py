"""The sweep-scaling target: a bipartite sweep on 2 dask workers against 1, and what two plain
processes get on this machine (run in the driver: it starts its own workers)."""

from __future__ import annotations

import time

from bench.table import Row, peak_mib


def _plain_half(args: tuple[str, list[int]]) -> float:
    """Seconds to compute some samples in this process, without dask or storage."""
    from sweep.planning.task import run_samples, warm_up

    spec_json, indices = args
    warm_up(spec_json)
    t0 = time.perf_counter()
    for k in range(0, len(indices), 13):
        run_samples(spec_json, indices[k:k + 13])
    return time.perf_counter() - t0


def _machine_ceiling(spec_json: str, n: int, repeats: int = 3) -> list[float]:
    """What two plain processes get on this machine: the two halves of the sweep computed one
    after the other, against both at once (no dask, no storage); 2.0 on ideal hardware.
    One ratio per repeat, sorted."""
    import multiprocessing as mp

    halves = [(spec_json, list(range(0, n, 2))), (spec_json, list(range(1, n, 2)))]
    ctx = mp.get_context("spawn")
    out = []
    with ctx.Pool(1) as one, ctx.Pool(2) as two:
        for _ in range(repeats):
            out.append(sum(one.map(_plain_half, halves)) / max(two.map(_plain_half, halves)))
    return sorted(out)


def sweep_scaling(n: int, repeats: int = 11) -> Row:
    """A bipartite sweep of ``n`` samples (random and generalised robustness, certified):
    2 workers against 1 (fast = 2 workers), compared on the compute phase (first task
    submitted to last result stored; the cluster's start-up and shut-down are reported
    apart), and the scheduling + storage overhead of 1 worker: compute phase minus the
    tasks' own time, over the tasks' own time.  Medians of ``repeats`` runs (this 2-core
    machine is noisy; the range is in the note)."""
    import tempfile

    from sweep.execution.execute import run_sweep
    from sweep.spec.model import parse_spec
    from sweep.spec.run import RunSpec

    spec = parse_spec({"scenario": {"dims": [2, 2, 2, 2]},
                       "family": {"kind": "ensemble", "measure": "valid_direction"},
                       "compute": {"samples": n, "seed": 7, "eps": 1e-8,
                                   "robustness": ["random", "generalized"]}})
    ones, twos = [], []
    with tempfile.TemporaryDirectory() as tmp:
        for k in range(repeats):
            for label, runs, w in (("1", ones, 1), ("2", twos, 2)):
                run = RunSpec(cluster="local", workers=w, progress=False)
                runs.append(run_sweep(spec, f"{tmp}/{label}-{k}.h5", run))
    speed = sorted(a.compute / b.compute for a, b in zip(ones, twos))
    over = sorted((a.compute - a.task_seconds) / a.task_seconds for a in ones)
    one, two = (sorted(r, key=lambda o: o.compute)[len(r) // 2] for r in (ones, twos))
    mid = len(speed) // 2
    base = one.compute / n  # the row's ratio is the median speed-up of the paired runs
    ceiling = _machine_ceiling(spec.model_dump_json(), n, 3 if repeats > 3 else 1)
    return Row("sweep 2 workers vs 1", n, base / speed[mid], base, float("nan"),
               peak_mib(), f"speed-up {speed[mid]:.2f}x on the compute phase (median of "
               f"{repeats}, range {speed[0]:.2f}-{speed[-1]:.2f}; {one.compute:.1f} s vs "
               f"{two.compute:.1f} s; end to end with cluster start-up {one.elapsed:.1f} s vs "
               f"{two.elapsed:.1f} s); two plain processes without dask get "
               f"{ceiling[len(ceiling) // 2]:.2f}x on this machine (median of {len(ceiling)}, "
               f"range {ceiling[0]:.2f}-{ceiling[-1]:.2f}); 1-worker scheduling + storage overhead "
               f"{100 * over[mid]:.1f}% (range {100 * over[0]:.1f}-{100 * over[-1]:.1f}%) of "
               f"the tasks' {one.task_seconds:.1f} s (storage {one.storage:.2f} s)")
