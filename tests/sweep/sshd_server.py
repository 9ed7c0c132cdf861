"""A real OpenSSH server on loopback for the tests: its own config, host key and client key in
a temporary folder, a free port on 127.0.0.1, started in the foreground (``sshd -D``) so that
it is stopped by its own PID.  The client side gets an ssh config file with a ``Host`` alias,
which is how researchers reach clusters (aliases, keys, ProxyJump from ~/.ssh/config).
"""

from __future__ import annotations

import getpass
import os
import shutil
import signal
import socket
import subprocess
import time
from dataclasses import dataclass
from pathlib import Path

import pytest

SSHD = "/usr/sbin/sshd"
ALIAS = "orderless-test-remote"


@dataclass(frozen=True)
class SSHServer:
    """A running sshd: its port, the client's ssh config file and key, and its process."""

    port: int
    folder: Path
    client_config: Path
    client_key: Path
    proc: subprocess.Popen

    @property
    def ssh_options(self) -> list[str]:
        return ["-F", str(self.client_config)]


def require(component: str, path: str) -> None:
    """Skip (with the reason) when a real component is missing, fail under CI."""
    if shutil.which(path) or Path(path).exists():
        return
    msg = f"{component} is not installed ({path} missing)"
    if os.environ.get("ORDERLESS_CI") == "1":
        pytest.fail(f"{msg}; CI must install it (.ci/install-sshd)")
    pytest.skip(msg)


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _keygen(path: Path) -> None:
    subprocess.run(["ssh-keygen", "-q", "-t", "ed25519", "-N", "", "-f", str(path)],
                   check=True)


def start_sshd(folder: Path) -> SSHServer:
    require("OpenSSH server", SSHD)
    folder.mkdir(parents=True, exist_ok=True)
    _keygen(folder / "host_key")
    _keygen(folder / "client_key")
    shutil.copy(folder / "client_key.pub", folder / "authorized_keys")
    port = free_port()
    (folder / "sshd_config").write_text(
        f"Port {port}\nListenAddress 127.0.0.1\nHostKey {folder / 'host_key'}\n"
        f"AuthorizedKeysFile {folder / 'authorized_keys'}\nPasswordAuthentication no\n"
        "KbdInteractiveAuthentication no\nUsePAM no\nStrictModes no\n"
        f"PidFile {folder / 'sshd.pid'}\nPermitRootLogin prohibit-password\nLogLevel ERROR\n")
    user = getpass.getuser()
    (folder / "ssh_config").write_text(
        f"Host {ALIAS}\n  HostName 127.0.0.1\n  Port {port}\n  User {user}\n"
        f"  IdentityFile {folder / 'client_key'}\n  IdentitiesOnly yes\n  BatchMode yes\n"
        f"  StrictHostKeyChecking no\n  UserKnownHostsFile {folder / 'known_hosts'}\n"
        "  LogLevel ERROR\n")
    Path("/run/sshd").mkdir(exist_ok=True)  # sshd's privilege-separation folder
    proc = subprocess.Popen([SSHD, "-D", "-e", "-f", str(folder / "sshd_config")],
                            stdout=subprocess.DEVNULL, stderr=open(folder / "sshd.log", "wb"))
    server = SSHServer(port, folder, folder / "ssh_config", folder / "client_key", proc)
    deadline = time.monotonic() + 20
    while time.monotonic() < deadline:
        ok = subprocess.run(["ssh", "-F", str(server.client_config), ALIAS, "true"],
                            capture_output=True).returncode == 0
        if ok:
            return server
        if proc.poll() is not None:
            break
        time.sleep(0.2)
    stop_sshd(server)
    pytest.fail(f"sshd did not accept a key login: {(folder / 'sshd.log').read_text()[-500:]}")


def restart_sshd(server: SSHServer) -> SSHServer:
    """Stop the server and start it again on the same port with the same keys (a network
    that drops and comes back, seen from the laptop)."""
    stop_sshd(server)
    proc = subprocess.Popen([SSHD, "-D", "-e", "-f", str(server.folder / "sshd_config")],
                            stdout=subprocess.DEVNULL,
                            stderr=open(server.folder / "sshd.log", "ab"))
    again = SSHServer(server.port, server.folder, server.client_config, server.client_key, proc)
    deadline = time.monotonic() + 20
    while time.monotonic() < deadline:
        if subprocess.run(["ssh", "-F", str(again.client_config), ALIAS, "true"],
                          capture_output=True).returncode == 0:
            return again
        time.sleep(0.2)
    stop_sshd(again)
    pytest.fail("sshd did not come back on its port")


def stop_sshd(server: SSHServer) -> None:
    """Stop the server by its PID (the listener; sessions it forked end with it)."""
    if server.proc.poll() is None:
        server.proc.send_signal(signal.SIGTERM)
        try:
            server.proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            server.proc.kill()
            server.proc.wait()
