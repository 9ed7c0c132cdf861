"""``orderless verify``: stored certificates re-checked without a solver; tampering caught."""

import h5py
import numpy as np
import yaml

from sweep.cli.main import main


def _spec(tmp_path, certify=True):
    """OCB white-noise grid across the threshold 1/sqrt2 (workers/THEORY.md §5)."""
    data = {"family": {"kind": "named", "name": "ocb"},
            "grid": [{"param": "weight", "values": [0.6, 0.9, 1.0]}],
            "compute": {"eps": 1e-8, "certify": certify},
            "run": {"cluster": "serial"}}
    path = tmp_path / "spec.yaml"
    path.write_text(yaml.safe_dump(data))
    return str(path)


def test_verify_ok_then_tampered(tmp_path, capsys):
    out = str(tmp_path / "r.h5")
    assert main(["run", _spec(tmp_path), "-o", out, "--no-progress"]) == 0
    assert main(["verify", out]) == 0
    assert "3 certificates checked" in capsys.readouterr().out
    with h5py.File(out, "r+") as f:
        rows = f["samples"][()]
        nonsep = [int(i) for i, v in zip(rows["index"], rows["verdict"]) if v == b"nonseparable"]
        ds = f[f"certificates/{nonsep[0]}/dual_blocks"]
        ds[...] = -ds[()]  # a witness whose PSD parts are negated must fail
    assert main(["verify", out]) == 1
    assert "1 failed" in capsys.readouterr().out


def test_verify_swapped_operator_rejected(tmp_path, capsys):
    out = str(tmp_path / "r.h5")
    assert main(["run", _spec(tmp_path), "-o", out, "--no-progress"]) == 0
    with h5py.File(out, "r+") as f:
        names = sorted(f["certificates"], key=int)
        a, b = f[f"certificates/{names[0]}/operator"], f[f"certificates/{names[-1]}/operator"]
        a[...] = b[()]
    assert main(["verify", out]) == 1


def test_verify_without_certificates_fails(tmp_path, capsys):
    out = str(tmp_path / "r.h5")
    assert main(["run", _spec(tmp_path, certify=False), "-o", out, "--no-progress"]) == 0
    assert main(["verify", out]) == 1


def test_verify_bad_file(tmp_path, capsys):
    p = tmp_path / "x.h5"
    p.write_bytes(b"not hdf5")
    assert main(["verify", str(p)]) == 2
    assert len(capsys.readouterr().err.strip().splitlines()) == 1


def test_schema_2_certificate_layout_still_reads(tmp_path):
    """Files written before schema 3 kept the arrays in a subgroup ``array`` and ``margin``
    as a dataset; read_certificate reads both layouts to the same certificate."""
    from sweep.cli.verify import read_certificate

    out = str(tmp_path / "r.h5")
    assert main(["run", _spec(tmp_path), "-o", out, "--no-progress"]) == 0
    with h5py.File(out, "r+") as f:
        name = sorted(f["certificates"], key=int)[0]
        new = f[f"certificates/{name}"]
        op, cert = read_certificate(new)
        old = f.create_group("old")
        old.create_dataset("operator", data=op)
        old.attrs["header"] = new.attrs["header"]
        old.create_dataset("margin", data=new.attrs["margin"])
        for key, arr in cert.arrays.items():
            old.create_dataset(f"array/{key}", data=arr)
        op2, cert2 = read_certificate(old)
    assert np.array_equal(op, op2) and cert2.kind == cert.kind and cert2.margin == cert.margin
    assert cert2.arrays.keys() == cert.arrays.keys()
    assert all(np.array_equal(cert.arrays[k], cert2.arrays[k]) for k in cert.arrays)
