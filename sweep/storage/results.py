"""The results file's layout, and reading it (also while a sweep is writing it).

Layout (plain h5py reads everything; :mod:`sweep.storage.writer` writes it):

* root attributes: ``format`` ("orderless-sweep"), ``schema_version``, ``spec_yaml``,
  ``spec_json``, ``spec_hash`` (sha256 of the spec without ``run``; for a files family with
  each file's operator digest in place of its path), ``files`` (JSON: per file of a files
  family its path as written, ``sha256`` and ``operators``), ``root_seed``, ``n_samples``,
  ``axes`` (JSON list), ``scenario_dims`` (JSON, P first, F last), ``versions`` (JSON),
  ``runs`` (JSON list, see :data:`RUN_STATES`), ``committed`` (rows that are complete; rows
  beyond it are discarded on reopen).
* ``grid/points``: float array (n_points, n_axes), one row per grid point.
* ``samples``: compound table (:data:`SAMPLE_DTYPE`), one row per computed sample in
  completion order; ``index`` is the sample's global index, ``point`` its grid row, ``run``
  the entry of ``runs`` that computed it.
* ``operators`` / ``witnesses`` (optional): complex (n, D, D), row-aligned with ``samples``;
  ``certificates/<index>``: the certificate of a sample and the operator it certifies.

Schema 4 renamed ``solve_time`` to ``solve_time_share`` (a batched interior-point solve's time
is split equally among its samples; ``solve_batch`` says among how many) and added ``run``;
schema 3 files are read with those columns filled in (-1: unknown) and are resumed in their
own layout.
"""

from __future__ import annotations

import json
import platform
import time
from importlib import metadata
from pathlib import Path
from typing import Any

import numpy as np

from sweep.errors import UserError
from .live import reading, writer_alive

FORMAT = "orderless-sweep"
S = "S24"
SAMPLE_DTYPE = np.dtype([
    ("index", "i8"), ("point", "i8"), ("rep", "i8"), ("seed", "u4"), ("status", S),
    ("verdict", S), ("valid", "?"), ("min_eig", "f8"), ("r_random", "f8"),
    ("r_random_lo", "f8"), ("r_random_hi", "f8"), ("r_generalized", "f8"),
    ("r_generalized_lo", "f8"), ("r_generalized_hi", "f8"), ("margin", "f8"),
    ("solver_status", S), ("iterations", "i8"), ("res_pri", "f8"), ("res_dual", "f8"),
    ("gap", "f8"), ("solve_time_share", "f8"), ("solve_batch", "i8"), ("game_value", "f8"),
    ("aux", "f8"), ("certified", "?"), ("cert_margin", "f8"), ("passes", "i8"),
    ("run", "i4"), ("worker", "S64"), ("message", "S200"),
])
PACKAGES = ("orderless", "numpy", "scipy", "scs", "clarabel", "cvxpy", "dask", "distributed",
            "h5py", "pydantic")
# schema 3 column name -> schema 4 name
RENAMED = {"solve_time": "solve_time_share"}
# states of a run entry: "running" while its driver lives; "dead" when a later open found
# it still "running" with no driver (SIGKILL, crash, power loss)
RUN_STATES = ("running", "complete", "interrupted", "terminated", "failed", "dead")


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


def to_record(rows: list[dict[str, Any]], seeds: list[int], run: int,
              dtype: np.dtype = SAMPLE_DTYPE) -> np.ndarray:
    """Rows as a record array of ``dtype`` (the current layout, or an older file's)."""
    rec = np.zeros(len(rows), dtype=dtype)
    for j, (row, seed) in enumerate(zip(rows, seeds)):
        for name in dtype.names:
            key = RENAMED.get(name, name)
            if name == "seed":
                rec[j][name] = seed
            elif name == "run":
                rec[j][name] = run
            elif dtype[name].kind == "S":
                rec[j][name] = str(row[key]).encode("utf-8", "replace")[:dtype[name].itemsize]
            else:
                rec[j][name] = row[key]
    return rec


def normalize(samples: np.ndarray) -> np.ndarray:
    """Rows of any schema as :data:`SAMPLE_DTYPE` (missing columns: run and solve_batch -1)."""
    if samples.dtype == SAMPLE_DTYPE:
        return samples
    out = np.zeros(len(samples), dtype=SAMPLE_DTYPE)
    out["run"] = out["solve_batch"] = -1
    for name in samples.dtype.names:
        target = RENAMED.get(name, name)
        if target in SAMPLE_DTYPE.names:
            out[target] = samples[name]
    return out


def decode_attrs(f) -> dict[str, Any]:
    return {k: (v.decode() if isinstance(v, bytes) else v) for k, v in f.attrs.items()}


def check_format(f, path: Path) -> None:
    if f.attrs.get("format") != FORMAT:
        raise UserError(f"{str(path)!r} is not an orderless results file (no format "
                        "attribute)")


def mark_dead(runs: list[dict[str, Any]], alive: bool) -> list[dict[str, Any]]:
    """The run entries with a last ``running`` entry shown as ``dead`` when no driver holds
    the file (a driver that was killed never recorded its end)."""
    if runs and not alive and runs[-1].get("state") == "running":
        runs = [*runs[:-1], {**runs[-1], "state": "dead"}]
    return runs


def read_results(path: str | Path) -> tuple[dict[str, Any], np.ndarray, np.ndarray]:
    """(root attributes, committed samples as :data:`SAMPLE_DTYPE`, grid points) of a
    results file, consistent even while a sweep writes it.

    The attributes gain ``live`` (a driver is writing the file now) and ``runs`` shows a run
    whose driver died as ``dead``.
    """
    p = Path(path)
    with reading(p) as f:
        check_format(f, p)
        attrs = decode_attrs(f)
        n = int(attrs["committed"])
        samples, points = f["samples"][:n], f["grid/points"][()]
    alive = writer_alive(p)
    attrs["live"] = alive
    attrs["runs"] = json.dumps(mark_dead(json.loads(attrs["runs"]), alive))
    return attrs, normalize(samples), points
