"""docker/compose.yaml for real under podman-compose: a scheduler and two worker containers
with mutual TLS, the scheduler's port published on 127.0.0.1 only; a sweep driven from the
host and one by the driver service both equal the host's serial run, and clients without
the cluster's certificate are refused."""

from __future__ import annotations

import os
import socket
import ssl
from dataclasses import dataclass
from pathlib import Path

import pytest
from distributed import Client
from distributed.security import Security

from .compare import assert_same_results
from .conftest import host_orderless
from .podman_host import IMAGE_UID, REPO, compose_command, quiet, run

pytestmark = [pytest.mark.container,
              pytest.mark.filterwarnings("ignore::distributed.versions.VersionMismatchWarning")]
MAKE_TLS = REPO / "docker" / "make-tls.sh"


@dataclass(frozen=True)
class Cluster:
    port: int  # the scheduler's port on the host
    compose: list[str]
    env: dict[str, str]
    project: str

    @property
    def address(self) -> str:
        return f"tls://127.0.0.1:{self.port}"

    @property
    def data(self) -> Path:
        return Path(self.env["ORDERLESS_DATA"])


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _security(tls: Path) -> Security:
    cert, key = str(tls / "cert.pem"), str(tls / "key.pem")
    return Security(tls_ca_file=cert, tls_client_cert=cert, tls_client_key=key,
                    require_encryption=True)


def _remove_leftovers(project: str, env: dict[str, str]) -> None:
    """Containers and the network of ``project`` that `down` left behind, if any."""
    ids = quiet(["podman", "ps", "-a", "-q", "--filter",
                 f"label=io.podman.compose.project={project}"], env).stdout.split()
    if ids:
        quiet(["podman", "rm", "-f", "-t", "5", *ids], env)
    quiet(["podman", "network", "rm", "-f", f"{project}_default"], env)


@pytest.fixture(scope="module")
def cluster(image, podman_env, tls_dir, data_dir):
    """`up -d`: the scheduler and the two workers of docker/compose.yaml, on this build, a
    free host port, the test's TLS and data folders; `down` (and forced removal) after."""
    port, project = _free_port(), f"orderless-test-{os.getpid()}"
    env = {**podman_env, "ORDERLESS_IMAGE": image, "ORDERLESS_PORT": str(port),
           "ORDERLESS_TLS": str(tls_dir), "ORDERLESS_DATA": str(data_dir)}
    compose = [*compose_command(), "-p", project, "-f", str(REPO / "docker" / "compose.yaml")]
    try:
        run([*compose, "up", "-d"], env)
        with Client(f"tls://127.0.0.1:{port}", security=_security(tls_dir),
                    timeout="60s") as client:
            client.wait_for_workers(2, timeout=60)
        yield Cluster(port, compose, env, project)
    finally:
        quiet([*compose, "down", "-t", "10"], env)
        _remove_leftovers(project, env)


def test_only_the_scheduler_is_published_and_on_loopback(cluster):
    out = run(["podman", "port", f"{cluster.project}_scheduler_1"], cluster.env)
    assert out.split() == ["8786/tcp", "->", f"127.0.0.1:{cluster.port}"]
    for worker in ("worker_1", "worker_2"):
        assert run(["podman", "port", f"{cluster.project}_{worker}"], cluster.env) == ""


def test_host_sweep_over_tls_equals_serial(cluster, tls_dir, host_serial, tmp_path):
    """README's host command: DASK_CONFIG=<tls folder> orderless run ... --scheduler tls://..
    Both workers take part, and every sample equals the host's serial run."""
    out = tmp_path / "cluster.h5"
    host_orderless(["run", str(cluster.data / "spec.yaml"), "-o", str(out),
                    "--scheduler", cluster.address], {**cluster.env, "DASK_CONFIG": str(tls_dir)})
    samples = assert_same_results(out, host_serial)
    workers = set(samples["worker"])
    assert len(workers) == 2 and all(w.startswith(b"tls://") for w in workers)


def test_driver_service_writes_to_the_mounted_folder(cluster, host_serial):
    """`compose run --rm driver orderless run ...` inside the compose network, over TLS,
    writes its file into the data folder as the image's non-root user."""
    name = f"{cluster.project}_driver"
    try:
        run([*cluster.compose, "--profile", "driver", "run", "--rm", "--no-deps",
             "--name", name, "driver", "orderless", "run", "/data/spec.yaml",
             "-o", "/data/driver.h5", "--scheduler", "tls://scheduler:8786"], cluster.env)
    finally:
        quiet(["podman", "rm", "-f", "--ignore", name], cluster.env)
    result = cluster.data / "driver.h5"
    assert result.stat().st_uid == IMAGE_UID
    assert_same_results(result, host_serial)


def _handshake_then_read(port: int, context: ssl.SSLContext) -> bytes:
    with (socket.create_connection(("127.0.0.1", port), timeout=20) as raw,
          context.wrap_socket(raw) as tls):
        return tls.recv(1)


def test_clients_without_the_certificates_are_refused(cluster, tls_dir, tmp_path):
    """Plain TCP, a certificate of another authority, and no certificate at all (a TLS
    client that trusts the scheduler but shows nothing) are all turned away."""
    with pytest.raises(OSError):
        Client(f"tcp://127.0.0.1:{cluster.port}", timeout="5s")
    other = tmp_path / "other"
    run([MAKE_TLS, other], cluster.env)
    with pytest.raises(OSError):
        Client(cluster.address, security=_security(other), timeout="5s")
    # The scheduler itself refuses: these clients accept its certificate.
    trusting = ssl.create_default_context(cafile=str(tls_dir / "cert.pem"))
    trusting.check_hostname = False
    with pytest.raises(ssl.SSLError, match="(?i)certificate.required"):
        _handshake_then_read(cluster.port, trusting)
    trusting.load_cert_chain(str(other / "cert.pem"), str(other / "key.pem"))
    with pytest.raises(ssl.SSLError, match="(?i)unknown.ca"):
        _handshake_then_read(cluster.port, trusting)
