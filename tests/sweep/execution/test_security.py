"""TLS: a scheduler the tool starts with TLS refuses clients without its credentials; tls://
addresses with certificate files; plain tcp:// to another machine is named as a risk."""

import socket
import ssl

import pytest

from sweep.execution.clusters import open_client
from sweep.errors import UserError
from sweep.execution.execute import run_sweep
from sweep.execution.security import is_loopback, security_for, warn_if_plain
from sweep.spec.model import parse_spec
from sweep.spec.run import RunSpec, resolve_run
from sweep.storage.results import read_results

OCB = {"family": {"kind": "named", "name": "ocb"},
       "grid": [{"param": "weight", "values": [0.5, 1.0]}], "run": {"progress": False}}


def rejects_strangers(address: str) -> None:
    """No client without the cluster's credentials gets to submit work to ``address``: not a
    dask client over plain TCP, nor one with a certificate of another CA (distributed's
    Security.temporary() makes a fresh one), and a TLS connection that offers no certificate
    is cut off by the scheduler (it requires one signed by the run's CA)."""
    from distributed import Client
    from distributed.security import Security
    for what, addr, sec in (("plain tcp", address.replace("tls://", "tcp://"), None),
                            ("another CA", address, Security.temporary())):
        with pytest.raises((OSError, TimeoutError)):
            with Client(addr, security=sec, timeout="3s") as c:
                c.submit(sum, [1, 2]).result(timeout=3)
                pytest.fail(f"{what}: a stranger ran a task on {address}")
    host, port = address.removeprefix("tls://").rsplit(":", 1)
    ctx = ssl.SSLContext(ssl.PROTOCOL_TLS_CLIENT)
    ctx.check_hostname, ctx.verify_mode = False, ssl.CERT_NONE  # trusts anything, no cert
    with socket.create_connection((host, int(port)), timeout=10) as raw:
        # TLS 1.3: the scheduler's "certificate required" alert, or, when it closes the
        # connection before the alert is read, an EOF; either way nothing gets through
        with pytest.raises((ssl.SSLError, ConnectionResetError)) as refused:
            with ctx.wrap_socket(raw) as tls:
                tls.sendall(b"\0" * 8)
                tls.recv(1)
        assert isinstance(refused.value, (ssl.SSLEOFError, ConnectionResetError)) or \
            "certificate" in str(refused.value).lower(), refused.value


@pytest.mark.cluster
def test_scheduler_started_with_tls_refuses_clients_without_credentials():
    """A local cluster with run.security.tls on: every connection is TLS with the run's
    temporary CA; strangers are refused while the tool's own client works."""
    run = RunSpec(workers=1, security={"tls": True})
    with open_client(run) as client:
        address = client.scheduler.address
        assert address.startswith("tls://127.0.0.1:")
        assert client.submit(sum, [1, 2]).result(timeout=60) == 3
        rejects_strangers(address)


@pytest.mark.cluster
def test_tls_address_with_certificate_files(tmp_path):
    """address mode with a tls:// scheduler and run.security files: the sweep runs over TLS
    (the files here come from a temporary CA written out, as a site would issue them)."""
    from distributed import LocalCluster
    from distributed.security import Security
    temp = Security.temporary()
    ca, cert, key = (tmp_path / n for n in ("ca.pem", "cert.pem", "key.pem"))
    ca.write_text(temp.tls_ca_file)
    cert.write_text(temp.tls_worker_cert)
    key.write_text(temp.tls_worker_key)
    files = {"ca_file": str(ca), "cert_file": str(cert), "key_file": str(key)}
    with LocalCluster(n_workers=1, threads_per_worker=1, protocol="tls://", host="127.0.0.1",
                      security=temp, dashboard_address="127.0.0.1:0") as cluster:
        run = RunSpec(cluster="address", address=cluster.scheduler_address, security=files,
                      progress=False)
        out = run_sweep(parse_spec(OCB), str(tmp_path / "t.h5"), run)
    assert out.computed == 2 and len(read_results(tmp_path / "t.h5")[1]) == 2


def test_tls_address_needs_certificates():
    """A tls:// address takes run.security files or dask's own TLS settings (a DASK_CONFIG
    folder, as for docker/compose.yaml); with neither, or with missing files, one line."""
    run = resolve_run(RunSpec(), {"address": "tls://127.0.0.1:8786"})
    with pytest.raises(UserError, match="a tls:// address needs certificates: run.security"):
        security_for(run)
    import dask
    with dask.config.set({"distributed.comm.tls.ca-file": "/c/ca.pem",
                          "distributed.comm.tls.client.cert": "/c/cert.pem"}):
        assert security_for(run).tls_client_cert == "/c/cert.pem"
    missing = RunSpec(cluster="address", address=run.address, security={
        "ca_file": "/nonexistent/ca.pem", "cert_file": "/nonexistent/cert.pem"})
    with pytest.raises(UserError, match=r"run.security.ca_file='/nonexistent/ca.pem': file "
                       "does not exist"):  # checked when connecting, not when reading specs
        security_for(missing)
    with pytest.raises(UserError, match="tls is off but the address is tls://"):
        resolve_run(RunSpec(), {"address": "tls://127.0.0.1:8786"} | {"security": {"tls": False}})


def test_plain_tcp_to_another_machine_is_named_as_a_risk(capsys):
    warn_if_plain("tcp://127.0.0.1:8786")
    warn_if_plain("tls://192.0.2.7:8786")
    assert capsys.readouterr().err == ""
    warn_if_plain("tcp://192.0.2.7:8786")  # TEST-NET-1 (RFC 5737): no connection is made
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "anyone who can reach it can run code as you" in err
    assert is_loopback("localhost") and is_loopback("[::1]") and not is_loopback("192.0.2.7")


def test_tls_defaults(capsys):
    """TLS is on by default for the clusters started off this machine, off for local; opting
    out for a batch cluster is named as a risk."""
    jq = {"system": "slurm"}
    assert RunSpec(cluster="jobqueue", jobqueue=jq).tls()
    assert RunSpec(cluster="allocation").tls()
    assert not RunSpec(cluster="jobqueue", jobqueue=jq, security={"tls": False}).tls()
    assert not RunSpec().tls() and not RunSpec(cluster="address",
                                               address="tcp://127.0.0.1:1").tls()
    assert security_for(RunSpec()) is None and capsys.readouterr().err == ""
    assert security_for(RunSpec(cluster="allocation", security={"tls": False})) is None
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "anyone who can reach it can run code as you" in err
