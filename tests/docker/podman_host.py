"""What the container tests need from the host: the tools, the podman settings of this
machine kind, the cached debootstrap base, and the build's pip settings and CA bundle taken
from the host's own pip configuration (nothing site-specific lives in docker/Dockerfile)."""

from __future__ import annotations

import hashlib
import importlib.metadata
import itertools
import os
import re
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path
from urllib.parse import urlparse

import pytest

REPO = Path(__file__).resolve().parents[2]
BASE_TAG = "localhost/orderless-test-base:bookworm-python3-venv"
# One tag per checkout, so that test runs from two worktrees never retag or remove each
# other's image (they share podman's layer cache).
IMAGE_TAG = "localhost/orderless-test:" + hashlib.sha256(str(REPO).encode()).hexdigest()[:12]
IMAGE_UID = 1000  # docker/Dockerfile's default UID
_names = itertools.count()
# runc: Debian's crun stops on the hybrid cgroups here; podman's default ulimits fail without
# CAP_SYS_RESOURCE (measured with podman 4.3 on these machines).
CONTAINERS_CONF = """[containers]
default_ulimits = ["nofile=20000:20000", "nproc=32768:32768"]

[engine]
runtime = "runc"
"""
# pip settings carried from the host into the build (the CA bundle goes as its own secret).
# Not pinned from the host: the project itself and the build tools (pyproject's
# build-system asks for its own setuptools).
UNPINNED = {"orderless", "pip", "setuptools", "wheel"}
PIP_KEYS = ("index-url", "extra-index-url", "find-links", "trusted-host", "timeout",
            "default-timeout", "no-index")


def require(ok: bool, reason: str) -> None:
    """Skip with ``reason`` unless ``ok``; under CI (ORDERLESS_CI=1) fail instead."""
    if ok:
        return
    if os.environ.get("ORDERLESS_CI") == "1":
        pytest.fail(f"{reason} (ORDERLESS_CI=1: the container tests must run; "
                    ".ci/install-podman installs what they need)", pytrace=False)
    pytest.skip(reason)


def compose_command() -> list[str] | None:
    """podman-compose >= 1.6 (Debian's 1.0.3 mangles override files), as a command."""
    try:
        version = importlib.metadata.version("podman-compose")
        command = [sys.executable, "-m", "podman_compose"]
    except importlib.metadata.PackageNotFoundError:
        exe = shutil.which("podman-compose")
        if exe is None:
            return None
        out = quiet([exe, "version"]).stdout
        found = re.search(r"podman-compose version\s+(\S+)", out)
        version, command = (found.group(1) if found else "0"), [exe]
    major_minor = tuple(int(x) for x in re.findall(r"\d+", version)[:2])
    return command if major_minor >= (1, 6) else None


def missing_tools() -> list[str]:
    """The tools the container tests need that this machine lacks."""
    missing = [t for t in ("podman", "runc", "debootstrap", "openssl") if not shutil.which(t)]
    if compose_command() is None:
        missing.append("podman-compose>=1.6")
    return missing


def quiet(cmd: list, env: dict[str, str] | None = None,
          timeout: float = 120) -> subprocess.CompletedProcess:
    """Run ``cmd`` for its exit code or output, never failing (probes and clean-ups)."""
    return subprocess.run([str(c) for c in cmd], env=env, capture_output=True, text=True,
                          timeout=timeout, check=False)


def run(cmd: list[str], env: dict[str, str], timeout: float = 300, **kw) -> str:
    """Run ``cmd``; its stdout, or a failure showing the end of its output."""
    p = subprocess.run([str(c) for c in cmd], env=env, capture_output=True, text=True,
                       timeout=timeout, check=False, **kw)
    if p.returncode != 0:
        pytest.fail(f"{' '.join(map(str, cmd))[:300]} exited {p.returncode}:\n"
                    f"{(p.stdout + p.stderr)[-3000:]}", pytrace=False)
    return p.stdout


def cache_dir() -> Path:
    """Where the debootstrap base is kept between runs: $ORDERLESS_TEST_CACHE, else
    /var/cache/orderless-test as root, else $XDG_CACHE_HOME/orderless-test."""
    if os.environ.get("ORDERLESS_TEST_CACHE"):
        return Path(os.environ["ORDERLESS_TEST_CACHE"])
    if os.geteuid() == 0:
        return Path("/var/cache/orderless-test")
    xdg = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(xdg) / "orderless-test"


def ensure_base(env: dict[str, str]) -> str:
    """The base image: Debian bookworm minbase with python3-venv (python3 3.11 and its venv
    module, what docker/Dockerfile needs from BASE), made by debootstrap once and kept as a
    tarball in :func:`cache_dir`; imported into podman when podman does not have it."""
    if quiet(["podman", "image", "exists", BASE_TAG], env).returncode == 0:
        return BASE_TAG
    cache = cache_dir()
    cache.mkdir(parents=True, exist_ok=True)
    tarball = cache / "debian-bookworm-minbase-python3-venv.tar"
    if not tarball.is_file():
        mirror = os.environ.get("ORDERLESS_TEST_DEBIAN_MIRROR", "http://deb.debian.org/debian")
        with tempfile.TemporaryDirectory(dir=cache) as tmp:
            root = Path(tmp) / "root"
            run(["debootstrap", "--variant=minbase", "--include=python3-venv", "bookworm",
                 root, mirror], env, timeout=900)
            run(["tar", "-C", root, "-cf", Path(tmp) / "base.tar", "."], env)
            os.replace(Path(tmp) / "base.tar", tarball)
    run(["podman", "import", tarball, BASE_TAG], env)
    return BASE_TAG


def host_pip_settings() -> dict[str, str]:
    """The host's effective pip settings (files and PIP_* variables) among :data:`PIP_KEYS`,
    plus ``cert``."""
    out = quiet([sys.executable, "-m", "pip", "config", "list"]).stdout
    settings: dict[str, str] = {}
    for line in out.splitlines():  # e.g. global.find-links='/opt/wheels' or :env:.cert='...'
        found = re.match(r"^(?::env:|[\w-]+)\.([\w-]+)='(.*)'$", line.strip())
        if found and found.group(1) in (*PIP_KEYS, "cert"):
            settings[found.group(1)] = found.group(2)
    return settings


def ca_bundle(settings: dict[str, str]) -> str | None:
    """The CA bundle the host's pip trusts: pip's cert, else SSL_CERT_FILE, else Debian's."""
    for path in (settings.get("cert"), os.environ.get("SSL_CERT_FILE"),
                 "/etc/ssl/certs/ca-certificates.crt"):
        if path and Path(path).is_file():
            return path
    return None


def _local_dirs(key: str, value: str) -> list[str]:
    """Folders on this machine that a pip setting points to, to mount into the build: a
    find-links folder itself; for a file:// index, its parent (a simple index's pages link
    to the files beside it, ../../files/...)."""
    if key not in ("find-links", "index-url", "extra-index-url"):
        return []
    dirs = []
    for item in value.split():
        url = urlparse(item)
        if url.scheme in ("", "file"):
            path = Path(url.path)
            dirs.append(str(path if key == "find-links" and path.is_dir() else path.parent))
    return dirs


def build_command(workdir: Path, base: str) -> list[str]:
    """``podman build`` of docker/Dockerfile from ``base`` (the new image's id goes to
    ``workdir/image-id``), with the host's pip settings
    (as the pip.conf secret), its CA bundle (the ca-certificates secret), the host
    interpreter's package versions as constraints (the image then computes with the very
    same numerical stack as the host, so results can be compared bit for bit) and read-only
    mounts of every local folder those settings name."""
    settings = host_pip_settings()
    workdir.mkdir(parents=True, exist_ok=True)
    constraints = workdir / "constraints.txt"
    pins = {f"{d.metadata['Name']}=={d.version}" for d in importlib.metadata.distributions()
            if d.metadata["Name"] and d.metadata["Name"].lower() not in UNPINNED}
    constraints.write_text("\n".join(sorted(pins)) + "\n")
    lines = ["[global]", *(f"{k} = {v}" for k, v in settings.items() if k in PIP_KEYS),
             f"constraint = {constraints}"]
    (workdir / "pip.conf").write_text("\n".join(lines) + "\n")
    mounts = {str(workdir)}
    for key, value in settings.items():
        mounts.update(d for d in _local_dirs(key, value) if Path(d).is_dir())
    cmd = ["podman", "build", "--pull=never", "--network", "host", "-f",
           REPO / "docker" / "Dockerfile", "--build-arg", f"BASE={base}",
           "--secret", f"id=pip.conf,src={workdir / 'pip.conf'}", "-t", IMAGE_TAG,
           "--iidfile", workdir / "image-id"]
    if (ca := ca_bundle(settings)) is not None:
        cmd += ["--secret", f"id=ca-certificates,src={ca}"]
    for d in sorted(mounts):
        cmd += ["-v", f"{d}:{d}:ro"]
    return [*cmd, REPO]


def image_id(tag: str, env: dict[str, str]) -> str | None:
    p = quiet(["podman", "image", "inspect", "--format", "{{.Id}}", tag], env)
    if p.returncode != 0:
        return None
    return p.stdout.strip() or None


def container_name() -> str:
    return f"orderless-test-{os.getpid()}-{next(_names)}"


def podman_run(env: dict[str, str], args: list[str], timeout: float = 300) -> str:
    """``podman run --rm`` with a name of its own, removed by force if it outlives us."""
    name = container_name()
    try:
        return run(["podman", "run", "--rm", "--name", name, *args], env, timeout=timeout)
    finally:
        quiet(["podman", "rm", "-f", "--ignore", name], env)
