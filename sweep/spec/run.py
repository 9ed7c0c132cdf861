"""Where a sweep runs: the ``run`` section of the job spec, profiles, and their precedence.

Precedence is resolved in one place, :func:`resolve_run`: command-line flags > the profile
(named by ``--profile`` or ``run.profile``) > the spec's ``run`` section > model defaults.
A profile file is YAML ``{profiles: {NAME: {<run fields>}}}``; it is looked up at ``--profiles
FILE``, else ``$ORDERLESS_PROFILES``, else ``./orderless-profiles.yaml`` (never written to).
"""

from __future__ import annotations

import os
import re
from pathlib import Path
from typing import Any, Literal

import yaml
from pydantic import (BaseModel, ConfigDict, Field, ValidationError, field_validator,
                      model_validator)

from sweep.errors import UserError


class _Strict(BaseModel):
    model_config = ConfigDict(frozen=True, extra="forbid")


ADDRESS = re.compile(r"^((tcp|tls)://)?(\[[0-9a-fA-F:]+\]|[A-Za-z0-9_.-]+):\d{1,5}$")
WALLTIME = re.compile(r"^(?:(\d+)-)?(?:(\d+):)?(\d+):(\d+)$")


def walltime_seconds(text: str) -> int:
    """Seconds of a batch walltime ``[D-]HH:MM:SS`` or ``MM:SS``; ValueError otherwise."""
    m = WALLTIME.match(text.strip())
    if not m:
        raise ValueError(f"walltime {text!r}: expected HH:MM:SS (or D-HH:MM:SS)")
    days, hours, minutes, seconds = (int(g or 0) for g in m.groups())
    return ((days * 24 + hours) * 60 + minutes) * 60 + seconds


def _interface() -> Any:
    return Field(None, description="network interface of the scheduler and the workers, e.g. "
                 "ib0 (null: each binds its host name's address)")


def _scheduler_host() -> Any:
    return Field(None, description="host or IP the scheduler binds, which the workers must "
                 "reach (null: from interface, else this machine's host name)")


class JobqueueSpec(_Strict):
    """A batch-queue cluster through dask-jobqueue (extra ``orderless[jobqueue]``).  Workers
    leave before the walltime (worker lifetime, staggered) and are replaced by new jobs."""

    system: Literal["slurm", "pbs", "sge", "lsf"] = Field(description="batch system")
    cores: int = Field(1, ge=1, description="cores per job")
    processes: int = Field(1, ge=1, description="worker processes per job")
    memory: str = Field("4GB", description="memory per job, e.g. 4GB")
    walltime: str = Field("01:00:00", description="walltime per job, HH:MM:SS; each worker "
                          "leaves min(5 min, walltime/4) before it, staggered")
    queue: str | None = Field(None, description="queue / partition (null: the default one)")
    account: str | None = Field(None, description="account / project to charge")
    jobs: int = Field(1, ge=1, description="number of jobs, kept running (a job that ends or "
                      "is cancelled is replaced)")
    extra_directives: list[str] = Field(default_factory=list,
                                        description="extra #SBATCH/#PBS/... lines")
    prologue: list[str] = Field(default_factory=list,
                                description="shell lines run before the worker starts")
    interface: str | None = _interface()
    scheduler_host: str | None = _scheduler_host()
    shared_directory: str | None = Field(
        None, description="folder the compute nodes can read, for the temporary TLS "
        "certificates (files of mode 0600, removed at the end; null: the current folder)")

    @field_validator("walltime")
    @classmethod
    def _walltime(cls, v: str) -> str:
        if walltime_seconds(v) < 10:
            raise ValueError(f"walltime {v!r}: expected at least 10 seconds")
        return v


class AllocationSpec(_Strict):
    """Inside a SLURM allocation (``sbatch``/``salloc``): the driver hosts the scheduler and
    starts one single-threaded worker per allocated task with ``srun``."""

    interface: str | None = _interface()
    scheduler_host: str | None = _scheduler_host()
    srun_args: list[str] = Field(default_factory=list, description="extra arguments for the "
                                 "workers' srun, e.g. [--mem-per-cpu=2G]")


class SecuritySpec(_Strict):
    """TLS between the driver, the scheduler and the workers.  A dask scheduler runs any code a
    client sends it: a cluster reachable from the network needs TLS."""

    tls: bool | None = Field(None, description="null: on for jobqueue and allocation, off for "
                             "local; address: as the address says (tls://, with the files "
                             "below or dask's distributed.comm.tls settings)")
    ca_file: str | None = Field(None, description="CA certificate (PEM) that signed every "
                                "certificate below (null with tls on: a temporary CA and "
                                "certificate for this run)")
    cert_file: str | None = Field(None, description="certificate (PEM) of this client, and of "
                                  "the scheduler and workers the tool starts")
    key_file: str | None = Field(None, description="its private key (PEM; null: in cert_file)")

    @model_validator(mode="after")
    def _files(self) -> "SecuritySpec":
        if (self.ca_file is None) != (self.cert_file is None):
            raise ValueError("security: ca_file and cert_file go together")
        if self.key_file and not self.cert_file:
            raise ValueError("security: key_file needs cert_file")
        if self.tls is False and self.ca_file:
            raise ValueError("security: certificate files given with tls: false")
        return self


class RunSpec(_Strict):
    """Where to run; does not change the results, so it is not part of the spec hash."""

    cluster: Literal["local", "address", "jobqueue", "allocation", "serial"] = Field(
        "local", description="local: LocalCluster on this machine; address: an existing "
        "scheduler; jobqueue: batch jobs as workers; allocation: inside a SLURM allocation, "
        "workers started with srun; serial: in-process, no dask (debugging)")
    workers: int | None = Field(None, ge=1, description="local: worker processes (default: "
                                "one per core); allocation: workers (default: the allocated "
                                "tasks)")
    address: str | None = Field(None, description="scheduler address, e.g. tls://host:8786")
    jobqueue: JobqueueSpec | None = Field(None, description="batch-queue settings")
    allocation: AllocationSpec | None = Field(None, description="allocation settings")
    security: SecuritySpec = Field(default_factory=SecuritySpec, description="TLS settings")
    start_timeout: float = Field(300.0, gt=0, description="seconds to wait for the first "
                                 "worker (address, jobqueue, allocation); a refused batch job "
                                 "stops the run at once")
    dashboard: bool = Field(False, description="start dask's dashboard and print its link "
                            "(extra orderless[dashboard])")
    samples_per_task: int | None = Field(
        None, ge=1, description="samples per dask task, solved as one batch with a compiled "
        "problem (null = auto: at most 32, with at least 8 tasks per worker)")
    profile: str | None = Field(None, description="profile to apply from the profile file")
    progress: bool = Field(True, description="progress bar on stderr")

    @field_validator("address")
    @classmethod
    def _address(cls, v: str | None) -> str | None:
        if v is not None and not ADDRESS.match(v):
            raise ValueError("not a scheduler address: expected tcp://HOST:PORT or "
                             "tls://HOST:PORT")
        return v

    @model_validator(mode="after")
    def _complete(self) -> "RunSpec":
        if self.cluster == "address" and not self.address:
            raise ValueError("cluster='address' needs run.address, e.g. tcp://host:8786")
        if self.cluster == "jobqueue" and self.jobqueue is None:
            raise ValueError("cluster='jobqueue' needs a run.jobqueue section (system, cores, "
                             "memory, walltime)")
        if self.cluster == "address" and self.address.startswith("tls://"):
            if self.security.tls is False:
                raise ValueError("run.security.tls is off but the address is tls://")
        elif self.cluster == "address" and self.security.tls:
            raise ValueError("run.security.tls is on but the address is not tls://")
        return self

    def tls(self) -> bool:
        """Whether this run's connections use TLS (see :class:`SecuritySpec`)."""
        if self.security.tls is not None:
            return self.security.tls
        if self.cluster == "address":
            return bool(self.address and self.address.startswith("tls://"))
        return self.cluster in ("jobqueue", "allocation")


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
        path = ".".join(str(p) for p in err["loc"])
        msg = err["msg"].removeprefix("Value error, ")
        if not path:  # a cross-field check: its message names the fields
            raise UserError(f"run: {msg}") from None
        raise UserError(f"run.{path}={err.get('input')!r}: {msg}") from None
