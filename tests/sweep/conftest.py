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


__all__ = ["ocb_grid", "os"]
