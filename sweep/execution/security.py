"""TLS for the clusters a sweep runs on.

A dask scheduler runs whatever pickled code a client sends it, so anyone who can reach a plain
``tcp://`` scheduler can run code as the user who started it.  Clusters the tool starts off
this machine (``jobqueue``, ``allocation``) therefore use TLS by default: the certificate files
of ``run.security``, else a temporary CA and certificate made for the run (distributed's
``Security.temporary()``, which needs ``cryptography``).  The scheduler and every worker then
require a certificate signed by that CA from whoever connects.
"""

from __future__ import annotations

import ipaddress
import os
import socket
import sys
from pathlib import Path

from sweep.errors import UserError
from sweep.spec.run import RunSpec

RISK = "anyone who can reach it can run code as you"
PLAIN_RISK = (f"is plain TCP to another machine: {RISK}; use a tls:// address with "
              "run.security certificate files")


def notice(message: str) -> None:
    """A one-line warning on stderr."""
    print(f"orderless: warning: {message}", file=sys.stderr, flush=True)


def _file(field: str, value: str) -> str:
    path = Path(os.path.expanduser(value))
    if not path.is_file():
        raise UserError(f"run.security.{field}={value!r}: file does not exist, expected a PEM "
                        "file")
    return str(path.resolve())


def security_for(run: RunSpec):
    """The ``distributed.security.Security`` of ``run`` (None when TLS is off; opting out for
    a cluster off this machine is warned about)."""
    if not run.tls():
        if run.cluster in ("jobqueue", "allocation"):
            notice(f"run.security.tls is off: the {run.cluster} cluster's scheduler takes "
                   f"plain TCP from other machines: {RISK}")
        return None
    from distributed.security import Security
    sec = run.security
    if sec.cert_file:
        ca, cert = _file("ca_file", sec.ca_file), _file("cert_file", sec.cert_file)
        key = _file("key_file", sec.key_file) if sec.key_file else None
        return Security(tls_ca_file=ca, require_encryption=True,
                        **{f"tls_{role}_{kind}": value for role in ("client", "scheduler",
                                                                    "worker")
                           for kind, value in (("cert", cert), ("key", key)) if value})
    if run.cluster == "address":  # certificates from dask's configuration (DASK_CONFIG)?
        conf = Security()
        if conf.tls_ca_file and conf.tls_client_cert:
            return conf
        raise UserError(f"run.address={run.address!r}: a tls:// address needs certificates: "
                        "run.security.ca_file and cert_file (and key_file unless the key is in "
                        "cert_file), or dask's distributed.comm.tls settings (DASK_CONFIG)")
    try:
        return Security.temporary()
    except ImportError:
        raise UserError("TLS with temporary certificates needs the cryptography package: "
                        "pip install cryptography (or give run.security certificate files, "
                        "or opt out with run.security.tls: false)") from None


def worker_environ(security) -> dict[str, str]:
    """Environment variables that give a ``dask worker`` the worker side of ``security``
    through dask's configuration (certificates as PEM text when they exist only in memory).
    Environment variables, unlike command-line arguments, are not visible to other users."""
    if security is None:
        return {}
    tls = security.get_tls_config_for_role("worker")
    env = {"DASK_DISTRIBUTED__COMM__REQUIRE_ENCRYPTION": "True",
           "DASK_DISTRIBUTED__COMM__TLS__CA_FILE": tls["ca_file"],
           "DASK_DISTRIBUTED__COMM__TLS__WORKER__CERT": tls["cert"]}
    if tls.get("key"):
        env["DASK_DISTRIBUTED__COMM__TLS__WORKER__KEY"] = tls["key"]
    return env


def is_loopback(host: str) -> bool:
    """Whether ``host`` (a name or an IP) is this machine's loopback."""
    host = host.strip("[]")
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        pass
    try:
        return ipaddress.ip_address(socket.gethostbyname(host)).is_loopback
    except (OSError, ValueError):
        return False


def warn_if_plain(address: str) -> None:
    """Warn once when ``address`` is plain TCP to a host that is not loopback."""
    if address.startswith("tls://"):
        return
    host = address.removeprefix("tcp://").rsplit(":", 1)[0]
    if not is_loopback(host):
        notice(f"run.address={address!r} {PLAIN_RISK}")
