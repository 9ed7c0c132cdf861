"""The SSH transport against a real sshd on loopback (tests/sweep/sshd_server.py): quoting of
paths with spaces and shell metacharacters, file copies both ways, one-line errors for an
unreachable host, a refused key and a missing remote command."""

from __future__ import annotations

import pytest

from sweep.errors import UserError
from sweep.remote.ssh import Remote, rjoin, rpath, sh_words
from tests.sweep.sshd_server import ALIAS, free_port

NASTY = "dir with space; $(touch pwned) `x` 'q' \"d\" & | *"



@pytest.fixture
def remote(sshd):
    return Remote("test", ALIAS, tuple(sshd.ssh_options))


def test_metacharacters_reach_the_remote_as_literal_words(remote, tmp_path):
    """shlex quoting (Python standard library): the remote shell sees one literal word."""
    folder = str(tmp_path / NASTY)
    remote.run(f"mkdir -p {rpath(folder)} && cd {rpath(folder)} && "
               + sh_words(["touch", "a file; rm -rf x"]))
    assert (tmp_path / NASTY / "a file; rm -rf x").is_file()
    assert not list(tmp_path.glob("**/pwned")) and not (tmp_path / "pwned").exists()
    out = remote.run(sh_words(["printf", "%s", NASTY])).stdout
    assert out == NASTY


def test_home_relative_paths_expand_on_the_remote(remote):
    out = remote.run(f"printf %s {rpath('~/x y')}").stdout
    home = remote.run('printf %s "$HOME"').stdout
    assert out == f"{home}/x y"
    assert rjoin("~/a/", "b", "c.h5") == "~/a/b/c.h5"


def test_upload_and_download_round_trip(remote, tmp_path):
    src = tmp_path / "src"
    (src / "sub dir").mkdir(parents=True)
    (src / "sub dir" / "data $1.npy").write_bytes(bytes(range(256)) * 40)
    (src / "spec.yaml").write_text("family: {kind: named, name: ocb}\n")
    dest = str(tmp_path / NASTY / "sweep")
    remote.upload_tree(src, dest)
    got = tmp_path / "back.npy"
    remote.download(rjoin(dest, "sub dir", "data $1.npy"), got)
    assert got.read_bytes() == bytes(range(256)) * 40


def test_unreachable_host_is_one_line(sshd):
    port = free_port()  # nothing listens there
    r = Remote("gone", "root@127.0.0.1", ("-o", f"Port={port}", "-o", "BatchMode=yes"))
    with pytest.raises(UserError, match=r"^remote 'gone' \(root@127.0.0.1\) is unreachable "
                                        r"\(.*Connection refused.*\)"):
        r.run("true")


def test_refused_key_is_one_line(sshd, tmp_path):
    """A key the server does not know: ssh's "Permission denied" becomes one line."""
    import subprocess
    subprocess.run(["ssh-keygen", "-q", "-t", "ed25519", "-N", "", "-f", str(tmp_path / "k")],
                   check=True)
    cfg = tmp_path / "cfg"  # the same alias, but with only the unknown key
    cfg.write_text(sshd.client_config.read_text().replace(str(sshd.client_key),
                                                          str(tmp_path / "k")))
    r = Remote("test", ALIAS, ("-F", str(cfg)))
    with pytest.raises(UserError, match=r"refused the authentication \(.*Permission denied"):
        r.run("true")


def test_missing_remote_command_is_one_line(remote):
    with pytest.raises(UserError, match=r"^remote 'test': probing failed \(exit 127\): .*"
                                        r"not found"):
        remote.run(sh_words(["/nonexistent/orderless", "--version"]), what="probing")
