"""The image built from docker/Dockerfile on a local debootstrap base: `orderless` runs in it
as a non-root user with BLAS pinned to one thread, a serial sweep in a container equals the
host's, and the OCI archive Apptainer builds from holds that same image."""

import json
import re

import pytest

from .compare import assert_same_results, package_versions
from .image_archive import read_archive
from .podman_host import IMAGE_UID, REPO, image_id, podman_run, run

pytestmark = pytest.mark.container
ARCHIVE = "orderless.docker.tar"  # the name README's save command writes, the .def reads


def test_orderless_runs_as_non_root_with_one_blas_thread(image, podman_env):
    """The default command is `orderless --help`; the user is the image's own, not root."""
    assert "usage: orderless" in podman_run(podman_env, [image])
    probe = ("import os, sweep.cli, workers.certificates.exact_psd; "
             "print(os.getuid(), os.getgid(), "
             "[os.environ[k] for k in ('OMP_NUM_THREADS', 'MKL_NUM_THREADS', "
             "'OPENBLAS_NUM_THREADS')])")
    out = podman_run(podman_env, [image, "python3", "-c", probe]).split(maxsplit=2)
    assert out[:2] == [str(IMAGE_UID)] * 2
    assert out[2].strip() == "['1', '1', '1']"


def test_serial_sweep_in_container_equals_host(image, podman_env, data_dir, host_serial):
    """`orderless run --cluster serial` inside a container writes to the mounted folder, with
    the host's package versions, and every sample equals the host's serial run."""
    podman_run(podman_env, ["-v", f"{data_dir}:/data", image, "orderless", "run",
                            "/data/spec.yaml", "-o", "/data/serial.h5", "--cluster", "serial"])
    result = data_dir / "serial.h5"
    assert result.stat().st_uid == IMAGE_UID
    assert package_versions(result) == package_versions(host_serial)
    samples = assert_same_results(result, host_serial)
    assert len(samples) == 12 and set(samples["status"]) == {b"ok"}


def _def_header(path) -> dict[str, str]:
    header = {}
    for line in path.read_text().splitlines():
        if line.startswith("%"):
            break
        if (found := re.match(r"^(\w+):\s*(\S+)", line)):
            header[found.group(1)] = found.group(2)
    return header


def test_image_archive_for_apptainer(image, podman_env, tmp_path):
    """`podman save --format docker-archive` writes what docker/orderless.def bootstraps
    from: its configuration hashes to the id of the image the other tests run and its layers
    to that image's layers; the non-root user, the pinned threads and the `orderless` entry
    point are in it, and podman runs `orderless` from the archive.  (Apptainer itself is
    not installed here, so the .sif is not built.)"""
    assert _def_header(REPO / "docker" / "orderless.def") == {"Bootstrap": "docker-archive",
                                                              "From": ARCHIVE}
    archive = tmp_path / ARCHIVE
    run(["podman", "save", "--format", "docker-archive", "-o", archive, image], podman_env)
    got = read_archive(str(archive))
    assert got.image_id == image_id(image, podman_env)
    layers = json.loads(run(["podman", "image", "inspect", "--format",
                             "{{json .RootFS.Layers}}", image], podman_env))
    assert got.diff_ids == layers
    config = got.config["config"]
    assert config["User"] == "orderless" and config["Cmd"] == ["orderless", "--help"]
    assert "OPENBLAS_NUM_THREADS=1" in config["Env"]
    assert any(e.startswith("PATH=/opt/venv/bin:") for e in config["Env"])
    assert "opt/venv/bin/orderless" in got.paths
    assert "usage: orderless" in podman_run(podman_env, [f"docker-archive:{archive}"])
