"""The one writer of a sweep's HDF5 file: provenance, appends flushed per task, resume.

The layout is described in :mod:`sweep.storage.results`.  Rows are appended per task and the file is
flushed after each change, under the lock protocol of :mod:`sweep.storage.live`, so a driver killed
at any moment leaves a readable file, readers see every committed row while the sweep runs,
and reopening with the same spec resumes.

Faults of the environment stop the run before they can damage the file: before each write
the free space of the results' file system is checked against the write's size (HDF5 itself
crashes the process when a write fails with the disk full), and a read-only or unwritable
folder is refused before anything is created.  A new file is created only when
:meth:`ResultFile.create` is called (once the cluster is ready), complete or not at all.
"""

from __future__ import annotations

import contextlib
import errno
import json
import os
import socket
import time
import uuid
from pathlib import Path
from typing import Any

import h5py
import numpy as np

from sweep.errors import EnvironmentFault, UserError
from .disk import free_bytes, os_reason, read_only
from .live import WriterLock, retry_blocked
from sweep.planning.plan import Plan
from .results import FORMAT, SAMPLE_DTYPE, check_format, mark_dead, now, to_record, versions
from sweep.spec.model import SCHEMA_VERSION
from sweep.units import human_bytes

CHUNK_ROWS = 256
SLACK = 512 * 1024  # bytes kept free beyond a write's estimate (metadata, the last run entry)
POINTS_BLOCK = 1 << 16  # grid points written per block


class ResultFile:
    """The one writer of a sweep's HDF5 file (use as a context manager).

    Opening an existing file checks it holds the same spec, discards rows beyond
    ``committed`` and records a run its driver left ``running`` as ``dead``.  A new file is
    not created until :meth:`create`.
    """

    def __init__(self, path: str | Path, plan: Plan) -> None:
        self.path, self.plan, self.spec = Path(path), plan, plan.spec
        self.folder = self.path.parent if str(self.path.parent) else Path(".")
        self.lock = WriterLock(self.path)
        self.f: h5py.File | None = None
        self.created = False
        self.run_entry: dict[str, Any] | None = None
        self.run_index = -1
        self.estimate = None  # sweep.execution.limits.Estimate of this run, set by the run loop
        self._done = np.zeros(plan.n_samples, dtype=bool)
        self._check_folder()
        if self.path.exists():
            self._open_existing()

    # --- opening -------------------------------------------------------------------------
    def existing_folder(self) -> Path:
        """The results' folder, or its nearest existing parent (created on :meth:`create`)."""
        folder = self.folder.absolute()
        while not folder.exists() and folder != folder.parent:
            folder = folder.parent
        return folder

    def _check_folder(self) -> None:
        if self.path.is_dir():
            raise UserError(f"output {str(self.path)!r} is a folder, expected an .h5 file path")
        folder = self.existing_folder()
        if not folder.is_dir():
            raise UserError(f"output {str(self.path)!r}: {str(folder)!r} is not a folder; "
                            "expected an .h5 file path in a folder")
        if not os.access(folder, os.W_OK | os.X_OK):
            why = os.strerror(errno.EROFS if read_only(folder) else errno.EACCES)
            if self.path.exists():
                raise EnvironmentFault(
                    f"output folder {str(folder)!r} is not writable ({why}); the results in "
                    f"{self.path.name!r} are intact (`orderless summary` reads them): copy the "
                    "file to a writable folder to resume")
            raise EnvironmentFault(f"output folder {str(folder)!r} is not writable ({why}); "
                                   "choose a writable -o path")

    def _open_existing(self) -> None:
        try:
            self.lock.acquire_alive()
        except OSError as exc:
            raise EnvironmentFault(f"cannot create the lock file {str(self.lock.path)!r} "
                                   f"({os_reason(exc)}); choose a writable -o path") from None
        try:
            self.f = self._h5_open()
            check_format(self.f, self.path)
            self._check_same()
            with self.lock.changing():
                self._truncate()
                self._bury_dead_run()
                self.f.flush()
            index = self.f["samples"]["index"][:]
            self._done[index[index < len(self._done)]] = True
        except BaseException:
            self.close()
            raise

    def _h5_open(self) -> h5py.File:
        return retry_blocked(self._h5_open_once, f"output {str(self.path)!r} is open in another "
                             "process (an HDF5 viewer or a script?); expected it to be closed",
                             10.0, 0.2)

    def _h5_open_once(self) -> h5py.File:
        try:
            return h5py.File(self.path, "r+")
        except BlockingIOError:
            raise
        except OSError as exc:
            text = str(exc)
            if "errno = 30" in text or "errno = 13" in text:
                raise EnvironmentFault(f"output {str(self.path)!r} is not writable; the stored "
                                       "results are intact: read them with `orderless "
                                       "summary`, or copy the file to a writable folder to "
                                       "resume") from None
            raise UserError(f"output {str(self.path)!r} exists but is not an HDF5 file "
                            f"({text.splitlines()[0][:80]}); expected an orderless results "
                            "file, or choose another -o path") from None

    def _check_same(self) -> None:
        f, plan = self.f, self.plan
        old, new = f.attrs.get("spec_hash"), plan.spec_hash()
        if old == new:
            return
        stored = json.loads(f.attrs.get("files", "[]"))
        if plan.file_digests and stored and len(stored) == len(plan.file_digests):
            for i, (a, b) in enumerate(zip(stored, plan.file_digests)):
                if a["sha256"] != b["sha256"]:
                    raise UserError(
                        f"family.paths[{i}] {b['path']!r} changed since {str(self.path)!r} was "
                        f"written (operators sha256 {a['sha256'][:12]} stored, "
                        f"{b['sha256'][:12]} now); expected the same operator data to resume, "
                        "or choose another -o path")
        hint = (" (it was written before operator files were hashed: start a new file)"
                if plan.file_digests and not stored else "")
        raise UserError(f"output {str(self.path)!r} holds a different spec (hash "
                        f"{str(old)[:12]}, this spec {new[:12]}){hint}; expected the same "
                        "spec to resume, or choose another -o path")

    def _truncate(self) -> None:
        n = int(self.f.attrs["committed"])
        for name in ("samples", "operators", "witnesses"):
            if name in self.f and self.f[name].shape[0] != n:
                self.f[name].resize(n, axis=0)

    def _bury_dead_run(self) -> None:
        """A last run still ``running`` has no driver (we hold the file): record it ``dead``
        with the rows it stored (every earlier run's count is known)."""
        runs = json.loads(self.f.attrs["runs"])
        if not runs or runs[-1].get("state") != "running":
            return
        runs = mark_dead(runs, alive=False)
        earlier = sum(int(r.get("computed", 0)) for r in runs[:-1])
        runs[-1]["computed"] = max(int(self.f.attrs["committed"]) - earlier, 0)
        from .progress import read_progress
        prog = read_progress(self.path)
        if prog and prog.get("run_id") == runs[-1].get("id"):
            runs[-1]["last_seen"] = prog.get("updated")
        self.f.attrs["runs"] = json.dumps(runs, default=_rounded)

    # --- creating ------------------------------------------------------------------------
    def create(self) -> None:
        """Create the file if it does not exist yet (complete or not at all)."""
        if self.f is not None:
            return
        plan = self.plan
        info = {"n_samples": plan.n_samples, "files": plan.file_digests,
                "spec_hash": plan.spec_hash()}  # reads the files before anything is created
        self.check_creation_space()
        tmp = self.path.with_name(self.path.name + ".creating")
        try:
            self.folder.mkdir(parents=True, exist_ok=True)
            with h5py.File(tmp, "w") as f:
                self._create(f, info)
            os.replace(tmp, self.path)
        except OSError as exc:
            raise EnvironmentFault(f"cannot create {str(self.path)!r} ({os_reason(exc)}); "
                                   "choose a writable -o path with free space") from None
        finally:
            with contextlib.suppress(OSError):
                tmp.unlink()
        self.created = True
        try:
            self.lock.acquire_alive()
        except OSError as exc:
            raise EnvironmentFault(f"cannot create the lock file {str(self.lock.path)!r} "
                                   f"({os_reason(exc)}); choose a writable -o path") from None
        self.f = self._h5_open()

    def check_creation_space(self) -> None:
        """Refuse (disk full) when a new results file would not fit (no-op if it exists)."""
        if self.f is not None:
            return
        plan = self.plan
        need = SLACK + plan.n_points * 8 * max(len(plan.axis_names), 1) + 64 * 1024 \
            + CHUNK_ROWS * SAMPLE_DTYPE.itemsize
        self.ensure_space(need, "to create the results file")

    def _create(self, f: h5py.File, info: dict[str, Any]) -> None:
        plan, spec = self.plan, self.spec
        f.attrs.update(format=FORMAT, schema_version=SCHEMA_VERSION, spec_yaml=spec.to_yaml(),
                       spec_json=spec.model_dump_json(), spec_hash=info["spec_hash"],
                       files=json.dumps(info["files"]), root_seed=spec.compute.seed,
                       n_samples=info["n_samples"], axes=json.dumps(plan.axis_names),
                       created=now(), committed=0,
                       scenario_dims=json.dumps(list(plan.scenario.subsystem_dims)),
                       versions=json.dumps(versions()), runs="[]")
        g = f.create_group("grid")
        pts = g.create_dataset("points", shape=(plan.n_points, len(plan.axis_names)),
                               dtype=float)
        for start in range(0, plan.n_points, POINTS_BLOCK):
            stop = min(start + POINTS_BLOCK, plan.n_points)
            if plan.axis_names:
                pts[start:stop] = plan.points_array(start, stop)
        g.attrs["axes"] = json.dumps(plan.axis_names)
        f.create_dataset("samples", shape=(0,), maxshape=(None,), dtype=SAMPLE_DTYPE,
                         chunks=(CHUNK_ROWS,))
        D = plan.scenario.dim
        for name, wanted in (("operators", spec.compute.store_operators),
                             ("witnesses", spec.compute.store_witnesses)):
            if wanted:
                f.create_dataset(name, shape=(0, D, D), maxshape=(None, D, D), dtype=complex,
                                 chunks=(1, D, D))

    def remove_if_unused(self) -> bool:
        """Delete the file if this run created it and stored nothing (a run that failed
        before its first result leaves nothing behind); True if removed."""
        if not self.created or self.f is None or int(self.f.attrs["committed"]) > 0:
            return False
        self.close()
        with contextlib.suppress(OSError):
            self.path.unlink()
        return True

    # --- space ---------------------------------------------------------------------------
    def ensure_space(self, need: int, what: str) -> None:
        try:
            free = free_bytes(self.existing_folder())
        except OSError:
            return
        if free < need:
            committed = int(self.f.attrs["committed"]) if self.f is not None else 0
            kept = (f"{committed} samples are kept in {str(self.path)!r}" if self.f is not None
                    else "nothing was written")
            raise EnvironmentFault(f"disk full: {human_bytes(free)} free in {str(self.folder)!r}, "
                                   f"{human_bytes(need)} needed {what}; {kept}: free space (or move "
                                   "the file) and rerun the same command to resume")

    def _write_size(self, rows: list[dict[str, Any]]) -> int:
        """Bytes a write of ``rows`` may take: the table (with a new chunk), certificates
        with their operators and HDF5 object headers, stored operators and witnesses."""
        n0 = self.f["samples"].shape[0]
        chunks = -(-(n0 + len(rows)) // CHUNK_ROWS) - -(-n0 // CHUNK_ROWS)
        size = (len(rows) + chunks * CHUNK_ROWS) * SAMPLE_DTYPE.itemsize
        D2 = self.plan.scenario.dim ** 2
        for r in rows:
            cert = r.get("certificate")
            if cert is not None:
                size += 8192 + 16 * D2 + sum(np.asarray(a).nbytes + 1024 for a in cert.values())
            size += 16 * D2 * sum(name in self.f for name in ("operators", "witnesses"))
        return 2 * size + SLACK

    # --- runs and rows -------------------------------------------------------------------
    def done_mask(self) -> np.ndarray:
        """Boolean mask over sample indices: True where a row is stored."""
        return self._done.copy()

    @property
    def n_done(self) -> int:
        return int(self._done.sum())

    def start_run(self, cluster: str) -> None:
        self.run_entry = {"id": uuid.uuid4().hex[:12], "host": socket.gethostname(),
                          "pid": os.getpid(), "cluster": cluster, "started": now(),
                          "finished": None, "state": "running", "computed": 0,
                          "storage_s": 0.0, "task_s": 0.0}
        self.run_index = len(json.loads(self.f.attrs["runs"]))
        self._save_runs()

    def _save_runs(self) -> None:
        runs = json.loads(self.f.attrs["runs"])
        if runs and runs[-1].get("id") == self.run_entry["id"]:
            runs[-1] = self.run_entry
        else:
            runs.append(self.run_entry)
        self.ensure_space(SLACK // 2, "to record the run")
        with self.lock.changing():
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
        rows = [r for r in rows if not self._done[r["index"]]]
        if not rows:
            return 0
        self.ensure_space(self._write_size(rows), f"to store the next {len(rows)} results")
        seeds = [int(np.random.SeedSequence(self.spec.compute.seed, spawn_key=(r["index"],))
                     .generate_state(1)[0]) for r in rows]
        samples = self.f["samples"]
        with self.lock.changing():
            n0, n1 = samples.shape[0], samples.shape[0] + len(rows)
            samples.resize(n1, axis=0)
            samples[n0:n1] = to_record(rows, seeds, self.run_index, samples.dtype)
            for name, key in (("operators", "operator"), ("witnesses", "witness")):
                if name in self.f:
                    self.f[name].resize(n1, axis=0)
                    for j, r in enumerate(rows):
                        if r[key] is not None:
                            self.f[name][n0 + j] = r[key]
            self._store_certificates(rows)
            self.f.attrs["committed"] = n1
            self.f.flush()
        self._done[[int(r["index"]) for r in rows]] = True
        if self.run_entry is not None:
            self.run_entry["computed"] += len(rows)
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

    def finish(self, state: str, error: str | None = None) -> None:
        """Record the run's end; skipped (the progress file still says it) when even that
        small write does not fit on the disk."""
        if self.run_entry is None or self.f is None:
            return
        self.run_entry.update(finished=now(), state=state)
        if error:
            self.run_entry["error"] = error[:300]
        for key in ("storage_s", "task_s"):
            self.run_entry[key] = round(self.run_entry[key], 3)
        with contextlib.suppress(EnvironmentFault):
            self._save_runs()

    def close(self) -> None:
        if self.f is not None and self.f.id.valid:
            self.f.close()
        self.lock.release()

    def __enter__(self) -> "ResultFile":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def _rounded(value: Any) -> Any:
    """JSON fallback for numpy scalars in the run entries."""
    return round(float(value), 6)
