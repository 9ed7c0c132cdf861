"""Shared fixtures for the sweep tests: tmp working dirs, spec writers, isolated dask config."""

import os

import pytest
import yaml


@pytest.fixture(autouse=True)
def isolated_dask_config(tmp_path_factory, monkeypatch):
    """Keep dask (and dask-jobqueue) from reading or writing the user's home configuration."""
    cfg = tmp_path_factory.mktemp("dask-config")
    monkeypatch.setenv("DASK_CONFIG", str(cfg))
    monkeypatch.delenv("ORDERLESS_PROFILES", raising=False)


@pytest.fixture
def write_spec(tmp_path):
    """Write a spec mapping to YAML in tmp_path and return its path."""
    def _write(data, name="spec.yaml"):
        p = tmp_path / name
        p.write_text(data if isinstance(data, str) else yaml.safe_dump(data))
        return str(p)
    return _write


def ocb_grid(weights, **compute):
    return {"family": {"kind": "named", "name": "ocb"},
            "grid": [{"param": "weight", "values": list(weights)}],
            "compute": {"robustness": ["random"], **compute},
            "run": {"cluster": "serial", "progress": False}}


@pytest.fixture(scope="session")
def sshd(tmp_path_factory):
    """A real OpenSSH server on loopback (tests/sweep/sshd_server.py), one per test session."""
    from tests.sweep.sshd_server import start_sshd, stop_sshd
    server = start_sshd(tmp_path_factory.mktemp("sshd"))
    yield server
    stop_sshd(server)


@pytest.fixture
def chdir_tmp(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    return tmp_path


__all__ = ["ocb_grid", "os", "require", "cli"]


def require(condition: bool, reason: str) -> None:
    """Skip with ``reason`` when a real component is missing, except in CI
    (``ORDERLESS_CI=1``, set by .ci/run), where that is a failure."""
    if condition:
        return
    if os.environ.get("ORDERLESS_CI") == "1":
        pytest.fail(f"needed in CI: {reason}")
    pytest.skip(reason)


@pytest.fixture
def tmpfs(tmp_path):
    """Mount small tmpfs file systems (as root) under tmp_path: ``tmpfs(size_kb)`` returns
    the mount point; every mount is unmounted after the test."""
    import subprocess
    mounts = []

    def _mount(size_kb: int, name: str = "disk"):
        require(os.geteuid() == 0, "mounting a tmpfs needs root")
        point = tmp_path / name
        point.mkdir()
        r = subprocess.run(["mount", "-t", "tmpfs", "-o", f"size={size_kb}k", "tmpfs",
                            str(point)], capture_output=True, text=True)
        require(r.returncode == 0, f"mount -t tmpfs failed: {r.stderr.strip()}")
        mounts.append(point)
        return point

    yield _mount
    for point in mounts:
        subprocess.run(["umount", "-l", str(point)], capture_output=True)


def cli(*argv, timeout=300, **popen):
    """Run ``python -m sweep.cli ARGV`` in a subprocess: (exit code, stdout, stderr)."""
    import subprocess
    import sys
    from pathlib import Path
    repo = Path(__file__).resolve().parents[2]
    r = subprocess.run([sys.executable, "-m", "sweep.cli", *map(str, argv)], cwd=popen.pop(
        "cwd", repo), capture_output=True, text=True, timeout=timeout, **popen)
    return r.returncode, r.stdout, r.stderr
