"""A one-node SLURM for the tests: munge, slurmctld and slurmd started from a temporary folder.

Everything lives in that folder: its own munge key and socket, slurm.conf with free ports on
127.0.0.1 (``NoInAddrAny,NoCtldInAddrAny``, so no daemon listens on other addresses), state,
spool, pid and log files.  Clients find it through ``SLURM_CONF`` in :attr:`Slurm.env`.
Teardown cancels every job, waits for an empty queue and stops each daemon by its PID.
How the packages were made to work here: Debian's slurmctld, slurmd, slurm-client and munge
22.05, as root, no cgroups (``proctrack/linuxproc``, ``task/none``).

Outside CI a missing component is a skip with its reason; with ``ORDERLESS_CI=1`` (set by
``.ci/run``) it is a failure.
"""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import time
from dataclasses import dataclass, field
from pathlib import Path

import pytest

PROGRAMS = ("munged", "mungekey", "slurmctld", "slurmd", "sbatch", "srun", "squeue", "scancel",
            "sinfo", "scontrol")


def missing(reason: str) -> None:
    """Fail in CI (ORDERLESS_CI=1), skip elsewhere."""
    if os.environ.get("ORDERLESS_CI"):
        pytest.fail(f"SLURM tests must run in CI: {reason}", pytrace=False)
    pytest.skip(reason)


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


CONF = """\
ClusterName=orderless-test
SlurmctldHost={node}(127.0.0.1)
SlurmctldPort={ctld_port}
SlurmdPort={d_port}
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
AuthInfo=socket={sock}
CommunicationParameters=NoInAddrAny,NoCtldInAddrAny
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SelectTypeParameters=CR_Core_Memory
SchedulerType=sched/builtin
SlurmdParameters=config_overrides
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
MpiDefault=none
ReturnToService=2
KillWait=5
MinJobAge=600
StateSaveLocation={d}/state
SlurmdSpoolDir={d}/spool
SlurmctldPidFile={d}/slurmctld.pid
SlurmdPidFile={d}/slurmd.pid
SlurmctldLogFile={d}/slurmctld.log
SlurmdLogFile={d}/slurmd.log
NodeName={node} NodeAddr=127.0.0.1 CPUs=2 Sockets=1 CoresPerSocket=2 ThreadsPerCore=1 \
RealMemory=16000 State=UNKNOWN
PartitionName=debug Nodes={node} Default=YES MaxTime=INFINITE State=UP
"""


@dataclass
class Slurm:
    """A running one-node SLURM: its folder, the client environment and its daemons."""

    folder: Path
    env: dict[str, str]
    procs: list[subprocess.Popen] = field(default_factory=list)
    started_in: float = 0.0

    def run(self, *cmd: str, check: bool = True, env: dict | None = None,
            **kw) -> subprocess.CompletedProcess:
        return subprocess.run(list(cmd), env=env or self.env, capture_output=True, text=True,
                              check=check, timeout=60, **kw)

    def jobs(self) -> dict[str, str]:
        """Job id -> state of every job in the queue (pending, running, completing)."""
        out = self.run("squeue", "-h", "-o", "%i %T").stdout
        return dict(line.split() for line in out.splitlines() if line.strip())

    def job_state(self, job_id: str) -> str:
        """State of a job, finished ones included (kept MinJobAge seconds)."""
        out = self.run("scontrol", "-o", "show", "job", job_id, check=False).stdout
        for item in out.split():
            if item.startswith("JobState="):
                return item.split("=", 1)[1]
        return "UNKNOWN"

    def wait_empty(self, timeout: float = 60) -> None:
        deadline = time.monotonic() + timeout
        while self.jobs():
            if time.monotonic() > deadline:
                raise TimeoutError(f"SLURM queue not empty after {timeout} s: {self.jobs()}")
            time.sleep(0.2)

    def wait_job(self, job_id: str, timeout: float = 120) -> str:
        """Wait until the job leaves the queue; its final state."""
        deadline = time.monotonic() + timeout
        while job_id in self.jobs():
            if time.monotonic() > deadline:
                raise TimeoutError(f"job {job_id} still in the queue after {timeout} s")
            time.sleep(0.2)
        return self.job_state(job_id)

    def cancel_all(self) -> None:
        ids = list(self.jobs())
        if ids:
            self.run("scancel", *ids, check=False)
        self.wait_empty()

    def log(self) -> str:
        return "\n".join((self.folder / f"{n}.log").read_text(errors="replace")[-3000:]
                         for n in ("slurmctld", "slurmd") if (self.folder / f"{n}.log").exists())


def _start(cmd: list[str], slurm: Slurm) -> None:
    slurm.procs.append(subprocess.Popen(cmd, env=slurm.env, stdout=subprocess.DEVNULL,
                                        stderr=subprocess.DEVNULL))


def _wait(what: str, ok, slurm: Slurm, timeout: float = 30) -> None:
    deadline = time.monotonic() + timeout
    while not ok():
        if time.monotonic() > deadline or any(p.poll() is not None for p in slurm.procs):
            raise RuntimeError(f"SLURM test cluster: {what} not ready\n{slurm.log()}")
        time.sleep(0.1)


def start_slurm(folder: Path) -> Slurm:
    """Start munged, slurmctld and slurmd on loopback from ``folder``; wait for an idle node."""
    absent = [p for p in PROGRAMS if shutil.which(p) is None]
    if absent:
        missing(f"SLURM not installed (missing {', '.join(absent)}; Debian: apt-get install "
                "slurmctld slurmd slurm-client munge, or run .ci/install-slurm)")
    if os.geteuid() != 0:
        missing("starting slurmd needs root")
    node = socket.gethostname().split(".")[0]
    if socket.gethostbyname(node) != "127.0.0.1":
        missing(f"host name {node!r} does not resolve to 127.0.0.1 (the node is on loopback)")
    (folder / "spool").mkdir(parents=True)
    (folder / "state").mkdir()
    sock, key = folder / "munge.sock", folder / "munge.key"
    conf = folder / "slurm.conf"
    conf.write_text(CONF.format(node=node, ctld_port=free_port(), d_port=free_port(),
                                sock=sock, d=folder))
    # its clients (and their batch jobs) keep dask's configuration in the folder too
    env = {**os.environ, "SLURM_CONF": str(conf), "DASK_CONFIG": str(folder / "dask")}
    slurm = Slurm(folder, env)
    subprocess.run(["mungekey", "-c", "-k", str(key)], check=True, capture_output=True)
    try:
        _start(["munged", "-F", "-f", f"--key-file={key}", f"--socket={sock}",
                f"--pid-file={folder / 'munged.pid'}", f"--log-file={folder / 'munged.log'}",
                f"--seed-file={folder / 'munged.seed'}"], slurm)
        _wait("munged", sock.exists, slurm)
        _start(["slurmctld", "-D", "-i", "-f", str(conf)], slurm)
        _wait("slurmctld", lambda: slurm.run("sinfo", "-h", check=False).returncode == 0,
              slurm)
        _start(["slurmd", "-D", "-N", node, "-f", str(conf)], slurm)
        _wait("slurmd", lambda: slurm.run("sinfo", "-h", "-o", "%T").stdout.strip() == "idle",
              slurm)
    except BaseException:
        stop_slurm(slurm)
        raise
    return slurm


def stop_slurm(slurm: Slurm) -> None:
    """Cancel every job, wait for an empty queue, stop each daemon by its PID."""
    try:
        if slurm.procs and all(p.poll() is None for p in slurm.procs[:2]):
            slurm.cancel_all()
    finally:
        for p in reversed(slurm.procs):  # slurmd, slurmctld, then munged
            p.terminate()
            try:
                p.wait(timeout=15)
            except subprocess.TimeoutExpired:
                p.kill()
                p.wait(timeout=5)


@pytest.fixture(scope="module")
def slurm(tmp_path_factory):
    """A one-node SLURM for the tests of one module (started once, torn down after)."""
    t0 = time.monotonic()
    s = start_slurm(tmp_path_factory.mktemp("slurm"))
    s.started_in = time.monotonic() - t0
    try:
        yield s
    finally:
        stop_slurm(s)
