"""SSH transport to a remote machine, through the user's own ``ssh`` client.

Nothing here opens a port or runs a server: every call is one ``ssh DEST 'sh -c SCRIPT'``,
so the user's ``~/.ssh/config`` (aliases, keys, agents, ``ProxyJump``) applies as it is.
Files travel inside that same connection (``tar`` into ``ssh``, ``cat`` out of it), so no
scp or sftp subsystem is needed on the remote.

Every argument that reaches the remote shell is quoted with :func:`shlex.quote`; scripts
are run by ``sh -c`` whatever the remote login shell is.  A remote path that starts with
``~/`` is expanded by the remote shell (``"$HOME"/...``), everything else is literal.

SSH failures become one-line :class:`sweep.errors.UserError` messages that name the remote
and say what to do (unreachable host, authentication refused, host key, command missing).
"""

from __future__ import annotations

import shlex
import subprocess
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

from sweep.errors import UserError

CONNECT_TIMEOUT_S = 20
UNREACHABLE = ("Could not resolve hostname", "Connection refused", "No route to host",
               "Connection timed out", "Network is unreachable", "Connection closed by",
               "Name or service not known", "Operation timed out", "kex_exchange_identification")


def rpath(path: str) -> str:
    """A remote path as a shell word: ``~/x`` expands on the remote, the rest is quoted."""
    if path == "~":
        return '"$HOME"'
    if path.startswith("~/"):
        return '"$HOME"/' + shlex.quote(path[2:])
    return shlex.quote(path)


def rjoin(folder: str, *names: str) -> str:
    """``folder/name/...`` as a remote path string (not yet quoted)."""
    return "/".join([folder.rstrip("/")] + [n.strip("/") for n in names])


def sh_words(argv: Sequence[str]) -> str:
    """A command line for the remote shell; every word quoted."""
    return " ".join(shlex.quote(str(a)) for a in argv)


@dataclass(frozen=True)
class SSHResult:
    """What one remote script printed, and its exit code."""

    returncode: int
    stdout: str
    stderr: str


@dataclass(frozen=True)
class Remote:
    """One SSH destination: an alias or ``user@host``, extra ssh options, setup lines.

    ``setup`` are shell lines the remote runs before every script (``module load ...``,
    ``export SLURM_CONF=...``); they are the user's own shell and are not quoted.
    """

    name: str
    destination: str
    options: tuple[str, ...] = ()
    setup: tuple[str, ...] = ()

    def argv(self, script: str) -> list[str]:
        """The local ssh command line that runs ``script`` under ``sh -c`` on the remote."""
        body = " && ".join([*self.setup, script]) if self.setup else script
        return ["ssh", "-o", f"ConnectTimeout={CONNECT_TIMEOUT_S}", *self.options,
                self.destination, "sh -c " + shlex.quote(body)]

    def run(self, script: str, *, check: bool = True, stdin: bytes | None = None,
            timeout: float = 300, what: str = "remote command") -> SSHResult:
        """Run ``script``; on an SSH failure (or a non-zero exit with ``check``) raise a
        one-line UserError naming the remote and ``what`` was being done."""
        try:
            proc = subprocess.run(self.argv(script), input=stdin, capture_output=True,
                                  timeout=timeout)
        except FileNotFoundError:
            raise UserError("the ssh client is not installed on this machine; expected "
                            "OpenSSH's `ssh` on PATH") from None
        except subprocess.TimeoutExpired:
            raise UserError(f"remote {self.name!r} ({self.destination}): {what} did not finish "
                            f"within {timeout:.0f} s") from None
        res = SSHResult(proc.returncode, proc.stdout.decode("utf-8", "replace"),
                        proc.stderr.decode("utf-8", "replace"))
        if res.returncode == 255:
            raise UserError(self.explain(res.stderr, what))
        if check and res.returncode != 0:
            raise UserError(f"remote {self.name!r}: {what} failed (exit {res.returncode}): "
                            f"{last_line(res.stderr or res.stdout)}")
        return res

    def explain(self, stderr: str, what: str) -> str:
        """One line for an ssh failure (exit 255) from its own message."""
        line = last_line(stderr)
        where = f"remote {self.name!r} ({self.destination})"
        if any(m in stderr for m in UNREACHABLE):
            return f"{where} is unreachable ({line}); check the host, the network or VPN"
        if "Permission denied" in stderr or "Too many authentication failures" in stderr:
            return (f"{where} refused the authentication ({line}); check your key or agent "
                    "(`ssh " + self.destination + "` must log in without questions)")
        if "Host key verification failed" in stderr or "REMOTE HOST IDENTIFICATION" in stderr:
            return f"{where}: host key verification failed; connect once with ssh to accept it"
        return f"{where}: ssh failed during {what} ({line or 'no message'})"

    def upload_tree(self, local: Path, remote_dir: str, *, timeout: float = 600) -> None:
        """Copy the contents of the local folder ``local`` into ``remote_dir`` (created)."""
        tar = subprocess.run(["tar", "-C", str(local), "-cf", "-", "."], capture_output=True,
                             check=True)
        self.run(f"mkdir -p {rpath(remote_dir)} && tar -C {rpath(remote_dir)} -xf -",
                 stdin=tar.stdout, timeout=timeout, what=f"copying files to {remote_dir}")

    def stream(self, script: str, local: Path, *, timeout: float = 3600,
               what: str = "copying a file") -> None:
        """Run ``script`` and write what it prints to ``local`` (all of it, or an error)."""
        with open(local, "wb") as out:
            try:
                proc = subprocess.run(self.argv(script), stdout=out, stderr=subprocess.PIPE,
                                      timeout=timeout)
            except subprocess.TimeoutExpired:
                raise UserError(f"remote {self.name!r}: {what} did not finish within "
                                f"{timeout:.0f} s") from None
        err = proc.stderr.decode("utf-8", "replace")
        if proc.returncode == 255:
            raise UserError(self.explain(err, what))
        if proc.returncode != 0:
            reason = last_line(err) or f"exit {proc.returncode}"
            raise UserError(f"remote {self.name!r}: {what} failed ({reason})")

    def download(self, remote_file: str, local: Path, *, timeout: float = 3600) -> None:
        """Copy one remote file to ``local`` (written in full or an error is raised)."""
        self.stream(f"cat {rpath(remote_file)}", local, timeout=timeout,
                    what=f"copying {remote_file}")


CAUSES = ("No space left on device", "Disk quota exceeded", "Read-only file system",
          "Permission denied", "not found", "No such file or directory")


def last_line(text: str) -> str:
    """The line of ``text`` that says why (one naming a known cause, else the last one),
    stripped, for one-line errors: tar and sh end with a generic summary line."""
    lines = [ln.strip() for ln in text.strip().splitlines() if ln.strip()]
    for cause in CAUSES:
        for line in lines:
            if cause in line:
                return line[:300]
    return lines[-1][:300] if lines else ""
