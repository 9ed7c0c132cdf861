"""Named remotes: where ``orderless submit`` runs a sweep, read from the profile file.

The profile file (``--profiles FILE``, ``$ORDERLESS_PROFILES`` or
``./orderless-profiles.yaml``) may hold, next to ``profiles``, a ``remotes`` mapping::

    remotes:
      hpc:
        ssh: hpc-login               # an ~/.ssh/config alias, or user@host
        ssh_options: ["-o", "Port=2222"]
        workdir: ~/orderless-sweeps  # one folder per sweep is made in here
        command: ~/venvs/orderless/bin/orderless
        setup: ["module load python/3.11"]
        start: sbatch                # sbatch (a batch job runs the driver) or background
        cluster: allocation          # the driver's --cluster there
        sbatch: ["--ntasks=8", "--time=24:00:00", "--mem-per-cpu=2G"]
        profile: null                # a run profile of this same file, used there

This model is the single source of truth for those keys; ``python -m sweep.spec --markdown``
documents it with the rest.
"""

from __future__ import annotations

from pathlib import Path
from typing import Literal

import yaml
from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator

from sweep.errors import UserError
from sweep.spec.run import profile_file


class RemoteSpec(BaseModel):
    """A machine reached over SSH where ``orderless submit`` starts sweeps (profile file,
    ``remotes.NAME``)."""

    model_config = ConfigDict(frozen=True, extra="forbid")

    ssh: str = Field(min_length=1, description="SSH destination: an ~/.ssh/config alias or "
                     "user@host")
    ssh_options: list[str] = Field(default_factory=list, description="extra ssh options, "
                                   "e.g. [-o, Port=2222] or [-F, FILE] or [-J, jumphost]")
    workdir: str = Field(min_length=1, description="folder on the remote holding one "
                         "sub-folder per sweep (~/ is the remote home)")
    command: str = Field("orderless", min_length=1, description="the remote command that "
                         "runs orderless, e.g. ~/venv/bin/orderless")
    setup: list[str] = Field(default_factory=list, description="shell lines run on the remote "
                             "before each command (module load, exports)")
    start: Literal["sbatch", "background"] = Field(
        "sbatch", description="how the driver is started: sbatch (a batch job) or background "
        "(a detached process, for a workstation)")
    cluster: Literal["allocation", "jobqueue", "local", "serial"] = Field(
        "allocation", description="the driver's --cluster on the remote (allocation: workers "
        "in the sbatch job's own allocation)")
    sbatch: list[str] = Field(default_factory=list, description="options for sbatch, e.g. "
                              "[--ntasks=8, --time=24:00:00]")
    profile: str | None = Field(None, description="run profile of this file to use on the "
                                "remote (the file is copied with the spec)")

    @field_validator("ssh_options")
    @classmethod
    def _portable(cls, opts: list[str]) -> list[str]:
        if "-p" in opts:
            raise ValueError("ssh_options has -p; expected -o Port=N (or a Host entry in "
                             "~/.ssh/config)")
        return opts


def load_remote(name: str, profiles: str | None) -> tuple[RemoteSpec, Path]:
    """The remote ``name`` and the profile file it came from; one-line errors."""
    path = profile_file(profiles)
    if path is None:
        raise UserError(f"--remote {name!r}: no profile file found (give --profiles FILE or "
                        "set ORDERLESS_PROFILES); expected a 'remotes' mapping in it")
    try:
        data = yaml.safe_load(path.read_text()) or {}
    except yaml.YAMLError as exc:
        raise UserError(f"profile file {str(path)!r}: not valid YAML ({exc})") from None
    remotes = data.get("remotes") if isinstance(data, dict) else None
    if not isinstance(remotes, dict) or not remotes:
        raise UserError(f"profile file {str(path)!r} has no 'remotes' mapping; expected "
                        "remotes: {NAME: {ssh: ..., workdir: ..., command: ...}}")
    if name not in remotes:
        raise UserError(f"remote {name!r} not in {str(path)!r}; known: {sorted(remotes)}")
    try:
        spec = RemoteSpec.model_validate(remotes[name] or {})
    except ValidationError as exc:
        err = exc.errors()[0]
        field = ".".join(str(p) for p in err["loc"])
        raise UserError(f"{str(path)!r}: remotes.{name}.{field}: "
                        f"{err['msg'].removeprefix('Value error, ')}") from None
    if spec.profile is not None:
        profs = data.get("profiles") or {}
        if spec.profile not in profs:
            raise UserError(f"{str(path)!r}: remotes.{name}.profile={spec.profile!r} is not a "
                            f"profile of this file; known: {sorted(profs)}")
    return spec, path
