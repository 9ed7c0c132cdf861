"""Planning a sweep: grid points, samples, per-sample seeds and operators, and tasks.

Sample ``i`` belongs to grid point ``i // reps`` and is repetition ``i % reps``, where
``reps`` is ``compute.samples`` (or the number of operators in the files, for a files family).
Its random numbers come from ``SeedSequence(compute.seed, spawn_key=(i,))`` only, which is the
i-th child ``SeedSequence(seed).spawn(...)[i]`` would give: a sample can be recomputed alone,
and results do not depend on how samples are grouped into tasks or how many workers ran them.

Nothing here is proportional to the number of samples or grid points: a point's coordinates
are computed from its index, and tasks are generated lazily.

A ``files`` family is identified by its operators, not by where they are: the spec hash holds
the sha256 of each file's operators (:func:`operator_digest`) in place of the paths, and
relative paths are read from the spec's folder, so a spec and its data folder can move.
"""

from __future__ import annotations

import hashlib
import json
import math
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path
from typing import Any, Iterable, Iterator

import numpy as np

from workers.operators.ensembles import get_sampler
from workers.operators.families import get_named, white_noise_mixture
from workers.operators.scenario import Scenario

from sweep.errors import UserError
from sweep.spec.model import Spec
from sweep.spec.checks import MEASURE_PARAMS, resolve_scenario


def sample_seed(root: int, index: int) -> np.random.SeedSequence:
    """The seed of sample ``index``: child ``index`` of ``SeedSequence(root)``."""
    return np.random.SeedSequence(root, spawn_key=(index,))


def operator_digest(ops: np.ndarray) -> str:
    """sha256 (hex) of a file's operators as read: complex128, little-endian, C order,
    shape (n, D, D) (a single (D, D) matrix hashes as n = 1)."""
    return hashlib.sha256(np.ascontiguousarray(ops, dtype="<c16").tobytes()).hexdigest()


def _read_one(name: str, path: Path, dataset: str | None) -> np.ndarray:
    if not path.is_file():
        raise UserError(f"family.paths: {name!r} does not exist (looked for {str(path)!r}), "
                        "expected a .npy or HDF5 file")
    if path.suffix == ".npy":
        try:
            return np.load(path, allow_pickle=False)
        except (ValueError, OSError, EOFError) as exc:
            raise UserError(f"family.paths: {name!r} is not a readable .npy file "
                            f"({str(exc).splitlines()[0]})") from None
    import h5py
    try:
        with h5py.File(path, "r") as f:
            if dataset not in f:
                raise UserError(f"family.dataset={dataset!r} not found in {name!r}; "
                                f"datasets: {sorted(f.keys())}")
            return f[dataset][()]
    except OSError as exc:
        raise UserError(f"family.paths: {name!r} is not a readable HDF5 file ({exc})") from None


@dataclass(frozen=True)
class FileOperators:
    """The operators of a files family, (n, D, D), with each file's digest and count."""

    operators: np.ndarray
    digests: list[str]
    counts: list[int]


def read_operators(paths: list[str], dataset: str | None, dim: int,
                   folder: Path | None = None) -> FileOperators:
    """All operators of a files family with each file's :func:`operator_digest`; relative
    paths are read from ``folder`` (default: the current directory); one-line errors on bad
    files."""
    out, digests = [], []
    for name in paths:
        path = Path(name) if folder is None else Path(folder) / name
        arr = np.asarray(_read_one(name, path, dataset))
        arr = arr[None] if arr.ndim == 2 else arr
        if arr.ndim != 3 or arr.shape[1:] != (dim, dim):
            raise UserError(f"family.paths: {name!r} holds shape {arr.shape}, expected ({dim}, "
                            f"{dim}) or (n, {dim}, {dim}) for this scenario")
        if arr.dtype.kind not in "fciu":
            raise UserError(f"family.paths: {name!r} holds dtype {arr.dtype}, expected real or "
                            "complex numbers")
        arr = arr.astype(complex)
        out.append(arr)
        digests.append(operator_digest(arr))
    return FileOperators(np.concatenate(out), digests, [len(a) for a in out])


@dataclass(frozen=True)
class Plan:
    """Grid points and samples of a spec (see module doc)."""

    spec: Spec

    @cached_property
    def scenario(self) -> Scenario:
        return resolve_scenario(self.spec)

    @property
    def axis_names(self) -> list[str]:
        return [a.param for a in self.spec.grid]

    @property
    def n_points(self) -> int:
        return math.prod(a.size for a in self.spec.grid)

    def point(self, p: int) -> tuple[float, ...]:
        """Coordinates of grid point ``p``, the last axis varying fastest."""
        coords = []
        for axis in reversed(self.spec.grid):
            p, k = divmod(p, axis.size)
            coords.append(axis.point(k))
        return tuple(reversed(coords))

    @property
    def points(self) -> list[tuple[float, ...]]:
        """Every grid point (a list: for small grids and tests; one empty point if no grid)."""
        return [self.point(p) for p in range(self.n_points)]

    def points_array(self, start: int, stop: int) -> np.ndarray:
        """Coordinates of points ``start:stop`` as a float array (stop - start, n_axes)."""
        out = np.empty((stop - start, len(self.spec.grid)))
        for row, p in enumerate(range(start, stop)):
            out[row] = self.point(p)
        return out

    @cached_property
    def _files(self) -> FileOperators | None:
        fam = self.spec.family
        if fam.kind != "files":
            return None
        return read_operators(fam.paths, fam.dataset, self.scenario.dim, self.spec.source_dir)

    @property
    def files(self) -> np.ndarray | None:
        """The operators of a files family (n, D, D), or None."""
        return None if self._files is None else self._files.operators

    @property
    def file_digests(self) -> list[dict[str, Any]]:
        """Per file of a files family: its path as written, sha256 of its operators and how
        many it holds (empty for other families)."""
        if self._files is None:
            return []
        return [{"path": p, "sha256": d, "operators": n} for p, d, n in
                zip(self.spec.family.paths, self._files.digests, self._files.counts)]

    @property
    def reps(self) -> int:
        return len(self.files) if self.files is not None else self.spec.compute.samples

    @property
    def n_samples(self) -> int:
        return self.n_points * self.reps

    def spec_hash(self) -> str:
        """sha256 of everything that determines the results: the spec without ``run`` and,
        for a files family, the operators' digests in place of the paths (see module doc)."""
        if self._files is None:
            return self.spec.spec_hash()
        science = self.spec.science()
        science["family"]["paths"] = list(self._files.digests)
        text = json.dumps(science, sort_keys=True, separators=(",", ":"))
        return hashlib.sha256(text.encode()).hexdigest()

    def task_json(self) -> str:
        """What the workers need to rebuild this plan (:func:`plan_from_task_json`): the spec
        with the files' paths made absolute, and the digests the files must still have."""
        spec = self.spec
        files = []
        if self._files is not None:
            fam = spec.family
            absolute = [str((spec.source_dir / p).resolve()) for p in fam.paths]
            spec = spec.model_copy(update={"family": fam.model_copy(update={"paths": absolute})})
            files = list(self._files.digests)
        return json.dumps({"spec": spec.model_dump(mode="json"), "files_sha256": files})

    def locate(self, index: int) -> tuple[int, int]:
        """(grid point, repetition) of sample ``index``."""
        if not 0 <= index < self.n_samples:
            raise ValueError(f"sample index={index}, expected 0 <= index < {self.n_samples}")
        return divmod(index, self.reps)

    def family_at(self, point: int):
        """The family spec with the grid point's parameter values filled in."""
        fam = self.spec.family
        upd = {}
        for axis, v in zip(self.spec.grid, self.point(point)):
            ann = type(fam).model_fields[axis.param].annotation
            upd[axis.param] = int(v) if ann in (int, int | None) else float(v)
        return fam.model_copy(update=upd)

    def operator(self, index: int) -> tuple[np.ndarray, float]:
        """The operator of sample ``index`` and its ensemble's aux number (nan if none)."""
        point, rep = self.locate(index)
        fam = self.family_at(point)
        rng = np.random.default_rng(sample_seed(self.spec.compute.seed, index))
        aux = float("nan")
        if fam.kind == "named":
            W = get_named(fam.name, **({} if fam.d is None else {"d": fam.d})).matrix
        elif fam.kind == "files":
            W = self.files[rep]
        else:
            params = {name: getattr(fam, name) for name in MEASURE_PARAMS[fam.measure]}
            drawn = get_sampler(fam.measure)(self.scenario, rng, **params)
            W, aux = drawn.matrix, drawn.aux
        if fam.weight != 1.0:
            W = white_noise_mixture(self.scenario, W, fam.weight)
        return W, aux

    def tasks(self, indices: Iterable[int], per_task: int) -> Iterator[list[int]]:
        """Consecutive groups of at most ``per_task`` of the given (ascending) indices,
        generated lazily."""
        group: list[int] = []
        for i in indices:
            group.append(int(i))
            if len(group) == per_task:
                yield group
                group = []
        if group:
            yield group


def missing_indices(done: np.ndarray, chunk: int = 1 << 20) -> Iterator[int]:
    """Indices where the boolean mask ``done`` is False, ascending, without listing them all."""
    for start in range(0, len(done), chunk):
        for i in np.flatnonzero(~done[start:start + chunk]):
            yield start + int(i)


def plan_from_task_json(text: str) -> Plan:
    """The plan a worker rebuilds from :meth:`Plan.task_json` (or from a plain spec JSON);
    a files family whose operators changed since the driver read them is refused."""
    data = json.loads(text)
    if "spec" not in data:
        return Plan(Spec.model_validate(data))
    plan = Plan(Spec.model_validate(data["spec"]))
    expected = data.get("files_sha256") or []
    if expected:
        for name, old, new in zip(plan.spec.family.paths, expected, plan._files.digests):
            if old != new:
                raise UserError(f"family.paths: {name!r} changed while the sweep ran (sha256 "
                                f"{old[:12]} when it started, {new[:12]} now on worker); "
                                "expected the operator files unchanged during a run")
    return plan
