"""The job spec: one frozen pydantic model family, the single source of truth of the schema.

A spec has four sections: ``scenario`` (dims, global past/future), ``family`` (what operators
to analyse), ``grid`` (axes over any numeric family parameter) and ``compute`` (what to
compute, solver, samples, seed); ``run`` (where to run) does not change results and is left out
of the spec hash.  ``python -m sweep.spec --markdown`` prints the reference from this model.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path
from typing import Annotated, Any, Literal, Union

import yaml
from pydantic import (BaseModel, ConfigDict, Field, PrivateAttr, ValidationError,
                      model_validator)

from sweep.errors import UserError
from .run import RunSpec

SCHEMA_VERSION = 4


class Strict(BaseModel):
    model_config = ConfigDict(frozen=True, extra="forbid")


class ScenarioSpec(Strict):
    """Parties and their dimensions, in subsystem order P, A1_I, A1_O, ..., F."""

    dims: list[int] = Field(
        min_length=2, description="input then output dimension per party: [dI1, dO1, dI2, ...]")
    d_past: int = Field(1, ge=1, description="dimension of the global past P (1 = absent)")
    d_future: int = Field(1, ge=1, description="dimension of the global future F (1 = absent)")
    names: list[str] | None = Field(None, description="party names (default A, B, C, ...)")

    @model_validator(mode="after")
    def _even(self) -> "ScenarioSpec":
        if any(d < 1 for d in self.dims):
            raise ValueError(f"dims={self.dims} has an entry < 1, expected dimensions >= 1")
        if len(self.dims) % 2:
            raise ValueError(f"dims={self.dims} has {len(self.dims)} entries, expected an even "
                             "number (input then output dimension per party)")
        if self.names is not None and len(self.names) != len(self.dims) // 2:
            raise ValueError(f"names={self.names} has {len(self.names)} entries, expected "
                             f"{len(self.dims) // 2}")
        return self


class NamedFamily(Strict):
    """A published process (workers/THEORY.md §6), optionally mixed with white noise."""

    kind: Literal["named"]
    name: Literal["ocb", "quantum_switch", "lugano"] = Field(description="the process")
    d: int | None = Field(None, ge=1, description="target dimension (quantum_switch only)")
    weight: float = Field(1.0, ge=0.0, le=1.0,
                          description="white-noise mixture weight p of p W + (1-p) 1°")


# family fields added after schema 3, with the default that leaves the hash unchanged
ADDED_FAMILY_FIELDS: dict[str, Any] = {"steps": None}


class EnsembleFamily(Strict):
    """A random ensemble with its measure named (workers/THEORY.md §8;
    workers/operators/ensembles.py)."""

    kind: Literal["ensemble"]
    measure: Literal["valid_direction", "wishart", "hs_volume", "comb", "comb_mixture"] = Field(
        description="the sampling measure, documented in workers/operators/ensembles.py")
    u: float | None = Field(None, ge=0.0, le=1.0, description=(
        "valid_direction: fraction of the distance to the PSD boundary (null = uniform)"))
    steps: int | None = Field(None, ge=0, description=(
        "hs_volume: billiard-walk steps per sample from 1° (null = 100)"))
    rank: int | None = Field(None, ge=1, description="wishart: Ginibre columns (null = full)")
    order: list[int] | None = Field(None, description="comb: party order (null = uniform)")
    memory_dim: int = Field(2, ge=1, description="comb, comb_mixture: memory dimension")
    n_combs: int = Field(2, ge=1, description="comb_mixture: number of combs mixed")
    weight: float = Field(1.0, ge=0.0, le=1.0,
                          description="white-noise mixture weight p of p W + (1-p) 1°")


class FilesFamily(Strict):
    """Operators read from files: ``.npy`` of shape (D, D) or (n, D, D), or HDF5 datasets."""

    kind: Literal["files"]
    paths: list[str] = Field(min_length=1, description=(
        "files, relative to the spec's folder (kept as written; the results file records each "
        "file's sha256 of its operators, so the folder can move)"))
    dataset: str | None = Field(None, description="HDF5 dataset name (required for .h5 files)")
    weight: float = Field(1.0, ge=0.0, le=1.0,
                          description="white-noise mixture weight p of p W + (1-p) 1°")


Family = Annotated[Union[NamedFamily, EnsembleFamily, FilesFamily], Field(discriminator="kind")]


class Axis(Strict):
    """One grid axis: a numeric family parameter and its values (list or linspace)."""

    param: str = Field(description="a numeric field of the family, e.g. weight, u, rank")
    values: list[float] | None = Field(None, min_length=1, description="explicit values")
    start: float | None = Field(None, description="linspace start (with stop, num)")
    stop: float | None = Field(None, description="linspace stop")
    num: int | None = Field(None, ge=1, description="linspace number of points")

    @model_validator(mode="after")
    def _one_form(self) -> "Axis":
        lin = (self.start, self.stop, self.num)
        if (self.values is None) == all(v is None for v in lin) or (
                self.values is None and any(v is None for v in lin)):
            raise ValueError(f"axis {self.param!r}: give either values or all of start, stop, "
                             "num")
        return self

    @property
    def size(self) -> int:
        """Number of points on the axis (without listing them)."""
        return len(self.values) if self.values is not None else self.num

    def point(self, k: int) -> float:
        """The k-th value of the axis."""
        if self.values is not None:
            return self.values[k]
        step = 0.0 if self.num == 1 else (self.stop - self.start) / (self.num - 1)
        return self.start + k * step

    def points(self) -> list[float]:
        return [self.point(k) for k in range(self.size)]


class GameSpec(Strict):
    """Optional causal-game quantity: the best value found by see-saw (a lower bound)."""

    name: Literal["ocb_guess", "both_guess", "lugano_game"] = Field(description="the game")
    starts: int = Field(3, ge=1, description="see-saw random starts per sample")
    max_iter: int = Field(50, ge=1, description="see-saw rounds per start")


class ComputeSpec(Strict):
    """What to compute for every sample, and how."""

    validity: bool = Field(True, description="check validity first; invalid -> status 'invalid'")
    robustness: list[Literal["random", "generalized"]] = Field(
        default_factory=lambda: ["random"], description="robustness measures (verdict from "
        "the random one if present); empty = no verdict")
    method: Literal["auto", "exact", "bounds", "sufficient", "necessary", "fixed_orders"] = Field(
        "auto", description="separability characterisation (auto: exact N<=3, bounds N>=4)")
    solver: Literal["AUTO", "IPM", "SCS", "CLARABEL", "ADMM"] = Field(
        "AUTO", description="SDP back-end: AUTO (the built-in batched interior point IPM for "
        "small problems, e.g. bipartite qubits; the built-in matrix-free splitting ADMM for "
        "the random robustness with PSD blocks of 32x32 or more, e.g. three qubit parties, "
        "and whenever the conic matrix would not fit in memory, e.g. four qubit parties; "
        "SCS otherwise), IPM, SCS, CLARABEL or ADMM")
    eps: float = Field(1e-6, gt=0, description="solver eps_abs = eps_rel")
    max_iters: int = Field(200_000, ge=1, description="solver iteration cap")
    tol: float = Field(1e-6, gt=0, description="decision threshold on the robustness")
    samples: int = Field(1, ge=1, description="samples per grid point (1 for deterministic "
                         "families)")
    seed: int = Field(0, ge=0, description="root seed; sample i uses SeedSequence(seed, "
                      "spawn_key=(i,))")
    warm_start: bool = Field(
        False, description="warm-start SCS from the previous sample of the same task (pays "
        "along grids of large problems; values then depend on the task grouping at the "
        "solver's accuracy; the IPM never warm-starts)")
    force_solve: bool = Field(False, description="solve the SDPs even for operators recognised "
                              "as combs (PSD and inside one order's mask: separable, R = 0)")
    certify: bool = Field(True, description="certify every verdict in exact arithmetic "
                          "(workers.certificates); an uncertified verdict is stored as undecided")
    second_pass: Literal["auto", "clarabel", "tight", "none"] = Field(
        "auto", description="re-solve uncertified samples: auto (Clarabel up to 32x32, else SCS "
        "at 100x tighter eps), clarabel, tight, none")
    store_certificates: bool = Field(True, description="store each certificate (and its "
                                     "operator) so 'orderless verify' can re-check the file")
    store_operators: bool = Field(False, description="store each operator in the file")
    store_witnesses: bool = Field(False, description="store each witness in the file")
    game: GameSpec | None = Field(None, description="optional causal-game quantity")


class Spec(Strict):
    """A whole job spec."""

    scenario: ScenarioSpec | None = Field(None, description="required unless the family is "
                                          "named (then it must match if given)")
    family: Family
    grid: list[Axis] = Field(default_factory=list, description="axes; the grid is their product")
    compute: ComputeSpec = Field(default_factory=ComputeSpec)
    run: RunSpec = Field(default_factory=RunSpec, description="where to run (not hashed)")
    _source_dir: str | None = PrivateAttr(None)  # folder of the spec file (files' paths)

    @model_validator(mode="after")
    def _consistent(self) -> "Spec":
        from .checks import check_spec
        check_spec(self)
        return self

    def science(self) -> dict[str, Any]:
        """Everything that determines the results (the spec without ``run``).

        A family field added after files were written enters only when set away from its
        default (:data:`ADDED_FAMILY_FIELDS`), so an unchanged old spec keeps its hash and
        its results file resumes."""
        science = self.model_dump(mode="json", exclude={"run"})
        family = science["family"]
        for name, default in ADDED_FAMILY_FIELDS.items():
            if name in family and family[name] == default:
                del family[name]
        return science

    def spec_hash(self) -> str:
        text = json.dumps(self.science(), sort_keys=True, separators=(",", ":"))
        return hashlib.sha256(text.encode()).hexdigest()

    def to_yaml(self) -> str:
        return yaml.safe_dump(self.model_dump(mode="json"), sort_keys=False)

    @property
    def source_dir(self) -> Path:
        """The folder relative ``family.paths`` are read from: the spec file's folder, else
        the current directory."""
        return Path(self._source_dir) if self._source_dir else Path.cwd()


def format_error(exc: ValidationError, source: str) -> str:
    """One line: ``source: field.path=value: expected ...`` for the first error."""
    err = exc.errors()[0]
    path = ".".join(str(p) for p in err["loc"])
    msg = err["msg"].removeprefix("Value error, ")
    if not path:  # a cross-field check: its message names the fields itself
        return f"{source}: {msg}"
    if err["type"] == "extra_forbidden":
        return f"{source}: unknown key {path!r}; see `python -m sweep.spec --markdown`"
    value = err.get("input")
    shown = json.dumps(value, default=str) if not isinstance(value, dict) else "{...}"
    if len(shown) > 60:
        shown = shown[:57] + "..."
    more = f" (+{len(exc.errors()) - 1} more)" if len(exc.errors()) > 1 else ""
    return f"{source}: {path}={shown}: {msg}{more}"


def parse_spec(data: Any, source: str = "spec", source_dir: str | Path | None = None) -> Spec:
    """Validate a mapping as a :class:`Spec`; a bad field raises a one-line UserError.

    ``source_dir`` is the folder relative ``family.paths`` are read from (default: the
    current directory when the operators are read).
    """
    if not isinstance(data, dict):
        raise UserError(f"{source}: top level is {type(data).__name__}, expected a mapping "
                        "with keys scenario, family, grid, compute, run")
    if "profiles" in data and "family" not in data:
        raise UserError(f"{source} is a profile file (top-level 'profiles'), not a job spec; "
                        f"use it as `--profiles {source} --profile NAME` with a job spec")
    try:
        spec = Spec.model_validate(data)
    except ValidationError as exc:
        raise UserError(format_error(exc, source)) from None
    if source_dir is not None:
        spec._source_dir = str(Path(source_dir).resolve())
    return spec


def load_spec(path: str | Path) -> Spec:
    """Read and validate a YAML spec file; file paths in it are taken relative to its folder."""
    p = Path(path)
    if not p.is_file():
        raise UserError(f"spec file {str(p)!r} does not exist, expected a YAML job spec")
    try:
        text = p.read_text()
    except (OSError, UnicodeDecodeError) as exc:
        raise UserError(f"spec file {str(p)!r} cannot be read ({exc}); expected a YAML text "
                        "file") from None
    try:
        data = yaml.safe_load(text)
    except yaml.YAMLError as exc:
        line = getattr(getattr(exc, "problem_mark", None), "line", -1) + 1
        raise UserError(f"spec file {str(p)!r}: not valid YAML (line {line}: "
                        f"{getattr(exc, 'problem', exc)})") from None
    return parse_spec(data, str(p), p.parent)

