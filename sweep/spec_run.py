"""Where a sweep runs: the ``run`` section of the job spec, profiles, and their precedence.

Precedence is resolved in one place, :func:`resolve_run`: command-line flags > the profile
(named by ``--profile`` or ``run.profile``) > the spec's ``run`` section > model defaults.
A profile file is YAML ``{profiles: {NAME: {<run fields>}}}``; it is looked up at ``--profiles
FILE``, else ``$ORDERLESS_PROFILES``, else ``./orderless-profiles.yaml`` (never written to).
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any, Literal

import yaml
from pydantic import BaseModel, ConfigDict, Field, ValidationError, model_validator

from .errors import UserError


class _Strict(BaseModel):
    model_config = ConfigDict(frozen=True, extra="forbid")


class JobqueueSpec(_Strict):
    """A batch-queue cluster through dask-jobqueue (extra ``orderless[jobqueue]``)."""

    system: Literal["slurm", "pbs", "sge", "lsf"] = Field(description="batch system")
    cores: int = Field(1, ge=1, description="cores per job")
    processes: int = Field(1, ge=1, description="worker processes per job")
    memory: str = Field("4GB", description="memory per job, e.g. 4GB")
    walltime: str = Field("01:00:00", description="walltime per job, HH:MM:SS")
    queue: str | None = Field(None, description="queue / partition")
    account: str | None = Field(None, description="account / project to charge")
    jobs: int = Field(1, ge=1, description="number of jobs to start")
    extra_directives: list[str] = Field(default_factory=list,
                                        description="extra #SBATCH/#PBS/... lines")
    prologue: list[str] = Field(default_factory=list,
                                description="shell lines run before the worker starts")


class RunSpec(_Strict):
    """Where to run; does not change the results, so it is not part of the spec hash."""

    cluster: Literal["local", "address", "jobqueue", "serial"] = Field(
        "local", description="local: LocalCluster on this machine; address: an existing "
        "scheduler; jobqueue: batch queue; serial: in-process, no dask (debugging)")
    workers: int | None = Field(None, ge=1, description="local: worker processes (default: "
                                "one per core)")
    address: str | None = Field(None, description="scheduler address, e.g. tcp://host:8786")
    jobqueue: JobqueueSpec | None = Field(None, description="batch-queue settings")
    samples_per_task: int | None = Field(
        None, ge=1, description="samples per dask task, solved as one batch with a compiled "
        "problem (null = auto: at most 32, with at least 8 tasks per worker)")
    profile: str | None = Field(None, description="profile to apply from the profile file")
    progress: bool = Field(True, description="progress bar on stderr")

    @model_validator(mode="after")
    def _complete(self) -> "RunSpec":
        if self.cluster == "address" and not self.address:
            raise ValueError("cluster='address' needs run.address, e.g. tcp://host:8786")
        if self.cluster == "jobqueue" and self.jobqueue is None:
            raise ValueError("cluster='jobqueue' needs a run.jobqueue section (system, cores, "
                             "memory, walltime)")
        return self


def profile_file(explicit: str | None) -> Path | None:
    """The profile file to read: explicit, else $ORDERLESS_PROFILES, else ./orderless-profiles."""
    for cand in (explicit, os.environ.get("ORDERLESS_PROFILES"), "orderless-profiles.yaml"):
        if cand and Path(cand).is_file():
            return Path(cand)
        if cand and cand is explicit:
            raise UserError(f"--profiles {cand!r}: file does not exist, expected a YAML file "
                            "with a 'profiles' mapping")
    return None


def load_profile(name: str, path: Path | None) -> dict[str, Any]:
    """The run fields of profile ``name``; the error lists the known profile names."""
    if path is None:
        raise UserError(f"profile {name!r} requested but no profile file found (give "
                        "--profiles FILE or set ORDERLESS_PROFILES)")
    data = yaml.safe_load(path.read_text()) or {}
    profiles = data.get("profiles") if isinstance(data, dict) else None
    if not isinstance(profiles, dict):
        raise UserError(f"profile file {str(path)!r}: expected a top-level 'profiles' mapping")
    if name not in profiles:
        raise UserError(f"profile {name!r} not in {str(path)!r}; known: {sorted(profiles)}")
    return dict(profiles[name] or {})


def resolve_run(spec_run: RunSpec, cli: dict[str, Any], profiles_path: str | None = None
                ) -> RunSpec:
    """Merge defaults < spec ``run`` < profile < CLI flags (None values in ``cli`` are unset)."""
    merged = spec_run.model_dump(exclude_unset=True)
    cli = {k: v for k, v in cli.items() if v is not None}
    name = cli.get("profile") or merged.get("profile")
    if name:
        merged.update(load_profile(name, profile_file(profiles_path)))
    merged.update(cli)
    if "address" in cli and "cluster" not in cli:
        merged["cluster"] = "address"
    try:
        return RunSpec.model_validate(merged)
    except ValidationError as exc:
        err = exc.errors()[0]
        path = ".".join(str(p) for p in err["loc"]) or "run"
        raise UserError(f"run.{path}={err.get('input')!r}: "
                        f"{err['msg'].removeprefix('Value error, ')}") from None
