"""Session fixtures of the container tests: podman configured for this machine kind, the
project image built on the cached debootstrap base, TLS material, a data folder with the
test spec, and the host's serial run of that spec (the reference every container run must
equal)."""

from __future__ import annotations

import os
import sys
from pathlib import Path

import pytest
import yaml

from .podman_host import (
    CONTAINERS_CONF,
    IMAGE_TAG,
    IMAGE_UID,
    REPO,
    build_command,
    ensure_base,
    image_id,
    missing_tools,
    quiet,
    require,
    run,
)

ONE_THREAD = {"OMP_NUM_THREADS": "1", "MKL_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1"}
# Bipartite qubits, 12 samples in 6 tasks, both robustness measures, certified.
SPEC = {"scenario": {"dims": [2, 2, 2, 2]},
        "family": {"kind": "ensemble", "measure": "valid_direction"},
        "grid": [{"param": "u", "values": [0.9, 1.0]}],
        "compute": {"samples": 6, "seed": 15, "robustness": ["random", "generalized"]},
        "run": {"progress": False, "samples_per_task": 2}}


@pytest.fixture(scope="session")
def podman_env(tmp_path_factory) -> dict[str, str]:
    """The environment every podman command runs in (CONTAINERS_CONF for this machine)."""
    require(os.geteuid() == 0, "the container tests need root (debootstrap, rootful podman)")
    missing = missing_tools()
    require(not missing, f"missing {', '.join(missing)}")
    conf = tmp_path_factory.mktemp("podman") / "containers.conf"
    conf.write_text(CONTAINERS_CONF)
    return {**os.environ, "CONTAINERS_CONF": str(conf)}


@pytest.fixture(scope="session")
def image(podman_env, tmp_path_factory) -> str:
    """The id of the project image, built from the current checkout (podman's layer cache
    makes a rebuild with unchanged dependencies quick); the build it replaces is removed."""
    base = ensure_base(podman_env)
    before = image_id(IMAGE_TAG, podman_env)
    workdir = tmp_path_factory.mktemp("build")
    run(build_command(workdir, base), podman_env, timeout=1200)
    built = (workdir / "image-id").read_text().strip().removeprefix("sha256:")
    if before and before != built:
        quiet(["podman", "rmi", before], podman_env)
    return built


def _owned_by_image_user(path: Path) -> Path:
    for p in (path, *path.rglob("*")):
        os.chown(p, IMAGE_UID, IMAGE_UID)
    return path


@pytest.fixture(scope="session")
def tls_dir(podman_env, tmp_path_factory) -> Path:
    """docker/make-tls.sh's certificate, key and host dask configuration, readable by the
    containers' user."""
    d = tmp_path_factory.mktemp("tls-parent") / "tls"
    run([REPO / "docker" / "make-tls.sh", d], podman_env)
    return _owned_by_image_user(d)


@pytest.fixture(scope="session")
def data_dir(podman_env, tmp_path_factory) -> Path:
    """The folder mounted as /data, holding spec.yaml, writable by the containers' user."""
    d = tmp_path_factory.mktemp("data")
    (d / "spec.yaml").write_text(yaml.safe_dump(SPEC))
    return _owned_by_image_user(d)


def host_orderless(args: list[str], env: dict[str, str]) -> str:
    """The ``orderless`` command line of this checkout, run on the host."""
    return run([sys.executable, "-m", "sweep.cli", *args], {**env, "PYTHONPATH": str(REPO)},
               cwd=REPO)


@pytest.fixture(scope="session")
def host_serial(podman_env, data_dir, tmp_path_factory) -> Path:
    """The reference: the test spec run serially on the host, BLAS pinned to one thread."""
    out = tmp_path_factory.mktemp("host") / "serial.h5"
    host_orderless(["run", str(data_dir / "spec.yaml"), "-o", str(out), "--cluster", "serial"],
                   {**podman_env, **ONE_THREAD})
    return out
