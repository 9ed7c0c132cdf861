"""The HDF5 results file: self-describing, written only by the driver, resumable.

Layout (plain h5py reads everything):

* root attributes: ``format`` ("orderless-sweep"), ``schema_version``, ``spec_yaml``,
  ``spec_json``, ``spec_hash`` (sha256 of the spec without ``run``), ``root_seed``,
  ``n_samples``, ``axes`` (JSON list), ``scenario_dims`` (JSON, P first, F last),
  ``versions`` (JSON: orderless, numpy, scipy, scs, clarabel, cvxpy, dask, h5py, python),
  ``runs`` (JSON list: id, host, cluster, started, finished, state, computed, and seconds
  spent: startup_s, compute_s, storage_s, task_s, see :class:`sweep.execute.SweepOutcome`),
  ``committed``
  (rows that are complete; rows beyond it are discarded on reopen).
* ``grid/points``: float array (n_points, n_axes), one row per grid point.
* ``samples``: compound table, one row per computed sample in completion order (see
  :data:`SAMPLE_DTYPE`); ``index`` is the sample's global index (seed = SeedSequence(root_seed,
  spawn_key=(index,))), ``point`` its grid row.
* ``operators`` / ``witnesses`` (optional): complex (n, D, D), row-aligned with ``samples``.

Rows are appended in chunks and the file is flushed after each chunk, so a driver killed at
any moment leaves a readable file; reopening with the same spec resumes.
"""

from __future__ import annotations

import json
import os
import platform
import socket
import time
import uuid
from importlib import metadata
from pathlib import Path
from typing import Any

import h5py
import numpy as np

from .errors import UserError
from .plan import Plan
from .spec import SCHEMA_VERSION

FORMAT = "orderless-sweep"
S = "S24"
SAMPLE_DTYPE = np.dtype([
    ("index", "i8"), ("point", "i8"), ("rep", "i8"), ("seed", "u4"), ("status", S),
    ("verdict", S), ("valid", "?"), ("min_eig", "f8"), ("r_random", "f8"),
    ("r_random_lo", "f8"), ("r_random_hi", "f8"), ("r_generalized", "f8"),
    ("r_generalized_lo", "f8"), ("r_generalized_hi", "f8"), ("margin", "f8"),
    ("solver_status", S), ("iterations", "i8"), ("res_pri", "f8"), ("res_dual", "f8"),
    ("gap", "f8"), ("solve_time", "f8"), ("game_value", "f8"), ("aux", "f8"),
    ("certified", "?"), ("cert_margin", "f8"), ("passes", "i8"),
    ("worker", "S64"), ("message", "S200"),
])
PACKAGES = ("orderless", "numpy", "scipy", "scs", "clarabel", "cvxpy", "dask", "distributed",
            "h5py", "pydantic")


def versions() -> dict[str, str]:
    out = {"python": platform.python_version()}
    for name in PACKAGES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out


def now() -> str:
    return time.strftime("%Y-%m-%dT%H:%M:%S%z")


def to_record(rows: list[dict[str, Any]], seeds: list[int]) -> np.ndarray:
    rec = np.zeros(len(rows), dtype=SAMPLE_DTYPE)
    for j, (row, seed) in enumerate(zip(rows, seeds)):
        for name in SAMPLE_DTYPE.names:
            if name == "seed":
                rec[j][name] = seed
            elif SAMPLE_DTYPE[name].kind == "S":
                rec[j][name] = str(row[name]).encode("utf-8", "replace")[
                    :SAMPLE_DTYPE[name].itemsize]
            else:
                rec[j][name] = row[name]
    return rec


class ResultFile:
    """The one writer of a sweep's HDF5 file (use as a context manager)."""

    def __init__(self, path: str | Path, plan: Plan) -> None:
        self.path, self.plan, self.spec = Path(path), plan, plan.spec
        self.f = self._open()
        self._done = set(int(i) for i in self.f["samples"]["index"])
        self.run_entry: dict[str, Any] | None = None

    def _open(self) -> h5py.File:
        if self.path.exists():
            try:
                f = h5py.File(self.path, "r+")
            except BlockingIOError:
                raise UserError(f"output {str(self.path)!r} is open in another process (a "
                                "sweep still running?); expected it to be free") from None
            except OSError as exc:
                raise UserError(f"output {str(self.path)!r} exists but is not a writable HDF5 "
                                f"file ({exc}); expected an orderless results file") from None
            self._check_same(f)
            self._truncate(f)
            return f
        self.path.parent.mkdir(parents=True, exist_ok=True)
        tmp = self.path.with_name(self.path.name + ".creating")
        with h5py.File(tmp, "w") as f:  # a file appears complete or not at all
            self._create(f)
        os.replace(tmp, self.path)
        return h5py.File(self.path, "r+")

    def _check_same(self, f: h5py.File) -> None:
        if f.attrs.get("format") != FORMAT:
            f.close()
            raise UserError(f"output {str(self.path)!r} is not an orderless results file "
                            "(no format attribute); choose another -o path")
        old = f.attrs.get("spec_hash")
        if old != self.spec.spec_hash():
            f.close()
            raise UserError(f"output {str(self.path)!r} holds a different spec (hash "
                            f"{str(old)[:12]}, this spec {self.spec.spec_hash()[:12]}); "
                            "expected the same spec to resume, or choose another -o path")

    def _truncate(self, f: h5py.File) -> None:
        n = int(f.attrs["committed"])
        for name in ("samples", "operators", "witnesses"):
            if name in f and f[name].shape[0] != n:
                f[name].resize(n, axis=0)

    def _create(self, f: h5py.File) -> None:
        plan, spec = self.plan, self.spec
        f.attrs.update(format=FORMAT, schema_version=SCHEMA_VERSION, spec_yaml=spec.to_yaml(),
                       spec_json=spec.model_dump_json(), spec_hash=spec.spec_hash(),
                       root_seed=spec.compute.seed, n_samples=plan.n_samples,
                       axes=json.dumps(plan.axis_names), created=now(), committed=0,
                       scenario_dims=json.dumps(list(plan.scenario.subsystem_dims)),
                       versions=json.dumps(versions()), runs="[]")
        pts = np.array(plan.points, dtype=float).reshape(len(plan.points), len(plan.axis_names))
        g = f.create_group("grid")
        g.create_dataset("points", data=pts)
        g.attrs["axes"] = json.dumps(plan.axis_names)
        f.create_dataset("samples", shape=(0,), maxshape=(None,), dtype=SAMPLE_DTYPE,
                         chunks=(256,))
        D = plan.scenario.dim
        for name, wanted in (("operators", spec.compute.store_operators),
                             ("witnesses", spec.compute.store_witnesses)):
            if wanted:
                f.create_dataset(name, shape=(0, D, D), maxshape=(None, D, D), dtype=complex,
                                 chunks=(1, D, D))
        f.flush()

    def done_indices(self) -> set[int]:
        return set(self._done)

    def start_run(self, cluster: str) -> None:
        self.run_entry = {"id": uuid.uuid4().hex[:12], "host": socket.gethostname(),
                          "cluster": cluster, "started": now(),
                          "finished": None, "state": "running", "computed": 0,
                          "storage_s": 0.0, "task_s": 0.0}
        self._save_runs()

    def _save_runs(self) -> None:
        runs = json.loads(self.f.attrs["runs"])
        if runs and runs[-1].get("id") == self.run_entry["id"]:
            runs[-1] = self.run_entry
        else:
            runs.append(self.run_entry)
        self.f.attrs["runs"] = json.dumps(runs, default=_rounded)
        self.f.flush()

    def append(self, rows: list[dict[str, Any]]) -> int:
        """Append the rows not already stored; flush; return how many were new."""
        t0 = time.perf_counter()
        n = self._append(rows)
        if self.run_entry is not None:
            self.run_entry["storage_s"] += time.perf_counter() - t0
            self.run_entry["task_s"] += sum(float(r.get("task_seconds", 0.0)) for r in rows)
        return n

    def _append(self, rows: list[dict[str, Any]]) -> int:
        rows = [r for r in rows if r["index"] not in self._done]
        if not rows:
            return 0
        seeds = [int(np.random.SeedSequence(self.spec.compute.seed, spawn_key=(r["index"],))
                     .generate_state(1)[0]) for r in rows]
        n0, n1 = self.f["samples"].shape[0], self.f["samples"].shape[0] + len(rows)
        self.f["samples"].resize(n1, axis=0)
        self.f["samples"][n0:n1] = to_record(rows, seeds)
        for name, key in (("operators", "operator"), ("witnesses", "witness")):
            if name in self.f:
                self.f[name].resize(n1, axis=0)
                for j, r in enumerate(rows):
                    if r[key] is not None:
                        self.f[name][n0 + j] = r[key]
        self._store_certificates(rows)
        self.f.attrs["committed"] = n1
        self._done.update(int(r["index"]) for r in rows)
        if self.run_entry is not None:
            self.run_entry["computed"] += len(rows)
        self.f.flush()
        return len(rows)

    def _store_certificates(self, rows: list[dict[str, Any]]) -> None:
        """Certificates under ``certificates/<index>``: dataset ``operator`` (the W it
        certifies), one dataset per certificate array, and the scalars (``header``,
        ``margin``, 0-d arrays) as attributes, which keeps the HDF5 objects per sample few
        (the driver writes them while the workers compute).

        Written before ``committed`` moves, so a group whose row is not committed is an
        orphan of a killed write; it is replaced when that sample is recomputed.
        """
        group = self.f.require_group("certificates")
        for r in rows:
            if r.get("certificate") is None:
                continue
            name = str(r["index"])
            if name in group:
                del group[name]
            g = group.create_group(name)
            g.create_dataset("operator", data=r["cert_operator"])
            for key, arr in r["certificate"].items():
                arr, key = np.asarray(arr), key.removeprefix("array/")
                if arr.ndim == 0:
                    g.attrs[key] = str(arr.item()) if arr.dtype.kind == "U" else arr.item()
                else:
                    g.create_dataset(key, data=arr)

    def finish(self, state: str) -> None:
        if self.run_entry is not None:
            self.run_entry.update(finished=now(), state=state)
            for key in ("storage_s", "task_s"):
                self.run_entry[key] = round(self.run_entry[key], 3)
            self._save_runs()

    def close(self) -> None:
        if self.f.id.valid:
            self.f.close()

    def __enter__(self) -> "ResultFile":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def _rounded(value: Any) -> Any:
    """JSON fallback for numpy scalars in the run entries."""
    return round(float(value), 6)


def read_results(path: str | Path) -> tuple[dict[str, Any], np.ndarray, np.ndarray]:
    """(root attributes, samples table, grid points) of a results file, for summaries."""
    p = Path(path)
    if not p.is_file():
        raise UserError(f"results file {str(p)!r} does not exist, expected an .h5 file written "
                        "by `orderless run`")
    try:
        with h5py.File(p, "r") as f:
            if f.attrs.get("format") != FORMAT:
                raise UserError(f"{str(p)!r} is not an orderless results file (no format "
                                "attribute)")
            attrs = {k: (v.decode() if isinstance(v, bytes) else v) for k, v in f.attrs.items()}
            n = int(attrs["committed"])
            return attrs, f["samples"][:n], f["grid/points"][()]
    except OSError as exc:
        raise UserError(f"{str(p)!r} is not a readable HDF5 file ({exc})") from None
