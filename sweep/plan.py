"""Planning a sweep: grid points, samples, per-sample seeds and operators, and tasks.

Sample ``i`` belongs to grid point ``i // reps`` and is repetition ``i % reps``, where
``reps`` is ``compute.samples`` (or the number of operators in the files, for a files family).
Its random numbers come from ``SeedSequence(compute.seed, spawn_key=(i,))`` only, which is the
i-th child ``SeedSequence(seed).spawn(...)[i]`` would give: a sample can be recomputed alone,
and results do not depend on how samples are grouped into tasks or how many workers ran them.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path

import numpy as np

from workers.ensembles import get_sampler
from workers.families import get_named, white_noise_mixture
from workers.scenario import Scenario

from .errors import UserError
from .spec import Spec
from .spec_checks import resolve_scenario


def sample_seed(root: int, index: int) -> np.random.SeedSequence:
    """The seed of sample ``index``: child ``index`` of ``SeedSequence(root)``."""
    return np.random.SeedSequence(root, spawn_key=(index,))


def read_operators(paths: list[str], dataset: str | None, dim: int) -> np.ndarray:
    """All operators of a files family as an array (n, D, D); one-line errors on bad files."""
    out = []
    for p in paths:
        if not Path(p).is_file():
            raise UserError(f"family.paths: {p!r} does not exist, expected a .npy or HDF5 file")
        if p.endswith(".npy"):
            try:
                arr = np.load(p, allow_pickle=False)
            except ValueError as exc:
                raise UserError(f"family.paths: {p!r} is not a readable .npy file ({exc})") from None
        else:
            import h5py
            try:
                with h5py.File(p, "r") as f:
                    if dataset not in f:
                        raise UserError(f"family.dataset={dataset!r} not found in {p!r}; "
                                        f"datasets: {sorted(f.keys())}")
                    arr = f[dataset][()]
            except OSError as exc:
                raise UserError(f"family.paths: {p!r} is not a readable HDF5 file ({exc})") from None
        arr = np.asarray(arr)
        arr = arr[None] if arr.ndim == 2 else arr
        if arr.ndim != 3 or arr.shape[1:] != (dim, dim):
            raise UserError(f"family.paths: {p!r} holds shape {arr.shape}, expected ({dim}, "
                            f"{dim}) or (n, {dim}, {dim}) for this scenario")
        out.append(arr.astype(complex))
    return np.concatenate(out)


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

    @cached_property
    def points(self) -> list[tuple[float, ...]]:
        """Grid coordinates, the last axis varying fastest; one empty point if no grid."""
        return list(itertools.product(*[a.points() for a in self.spec.grid]))

    @cached_property
    def files(self) -> np.ndarray | None:
        fam = self.spec.family
        if fam.kind != "files":
            return None
        return read_operators(fam.paths, fam.dataset, self.scenario.dim)

    @property
    def reps(self) -> int:
        return len(self.files) if self.files is not None else self.spec.compute.samples

    @property
    def n_samples(self) -> int:
        return len(self.points) * self.reps

    def locate(self, index: int) -> tuple[int, int]:
        """(grid point, repetition) of sample ``index``."""
        if not 0 <= index < self.n_samples:
            raise ValueError(f"sample index={index}, expected 0 <= index < {self.n_samples}")
        return divmod(index, self.reps)

    def family_at(self, point: int):
        """The family spec with the grid point's parameter values filled in."""
        fam = self.spec.family
        upd = {}
        for axis, v in zip(self.spec.grid, self.points[point]):
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
            params = {"valid_direction": {"u": fam.u}, "wishart": {"rank": fam.rank},
                      "hs_volume": {"steps": fam.steps},
                      "comb": {"order": fam.order, "memory_dim": fam.memory_dim},
                      "comb_mixture": {"n_combs": fam.n_combs, "memory_dim": fam.memory_dim}}
            drawn = get_sampler(fam.measure)(self.scenario, rng, **params[fam.measure])
            W, aux = drawn.matrix, drawn.aux
        if fam.weight != 1.0:
            W = white_noise_mixture(self.scenario, W, fam.weight)
        return W, aux

    def tasks(self, indices: list[int], per_task: int) -> list[list[int]]:
        """Consecutive groups of at most ``per_task`` of the given sample indices."""
        idx = sorted(indices)
        return [idx[i:i + per_task] for i in range(0, len(idx), per_task)]
