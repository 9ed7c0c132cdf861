"""``orderless verify FILE.h5``: re-check every stored certificate without re-solving.

Exit 0 only when every stored certificate verifies and agrees with its sample's verdict;
exit 1 otherwise (also when the file stores no certificate at all).
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

import h5py
import numpy as np

from workers.certificates import Certificate, verify_certificate
from workers.scenario import Scenario

from .errors import UserError


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("verify", help="re-check the certificates stored in a results file")
    p.add_argument("results", help="an orderless results file (.h5)")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(func=run)


def read_certificate(g: h5py.Group) -> tuple[np.ndarray, Certificate]:
    """The operator and the certificate stored in one ``certificates/<index>`` group.

    Schema 3 (see :meth:`sweep.storage.ResultFile._store_certificates`): arrays are the
    group's datasets besides ``operator``, scalars its attributes; schema 2 kept the arrays
    in a subgroup ``array`` and ``margin`` as a dataset (still read).
    """
    if "array" in g:  # schema 2
        data = {"header": np.array(g.attrs["header"]), "margin": g["margin"][()]}
        data.update({f"array/{key}": ds[()] for key, ds in g["array"].items()})
        return g["operator"][()], Certificate.from_arrays(data)
    data = {key: np.array(value) for key, value in g.attrs.items()}
    arrays = {key: np.array(value) for key, value in data.items()
              if key not in ("header", "margin")}
    data = {"header": data["header"], "margin": data["margin"],
            **{f"array/{k}": v for k, v in arrays.items()}}
    data.update({f"array/{key}": ds[()] for key, ds in g.items() if key != "operator"})
    return g["operator"][()], Certificate.from_arrays(data)


def scenario_of(f: h5py.File) -> Scenario:
    dims = json.loads(f.attrs["scenario_dims"])
    return Scenario.from_dims(dims[1:-1], d_past=dims[0], d_future=dims[-1])


def verify_file(path: str | Path) -> dict:
    """Verify every certificate of a results file; one entry per failure."""
    p = Path(path)
    if not p.exists():
        raise UserError(f"{p}: no such file")
    try:
        f = h5py.File(p, "r")
    except OSError:
        raise UserError(f"{p}: not an HDF5 file, expected an orderless results file") from None
    with f:
        if f.attrs.get("format") != "orderless-sweep":
            raise UserError(f"{p}: not an orderless results file (no format attribute)")
        scenario = scenario_of(f)
        n = int(f.attrs["committed"])
        rows = f["samples"][:n]
        verdicts = {int(i): v.decode() for i, v in zip(rows["index"], rows["verdict"])}
        group = f["certificates"] if "certificates" in f else {}
        checked, failures = 0, []
        for name in sorted(group, key=int):
            index = int(name)
            if index not in verdicts:
                continue  # orphan of a write cut short: its sample is not committed
            W, cert = read_certificate(group[name])
            rep = verify_certificate(scenario, W, cert)
            checked += 1
            if not rep.ok or rep.verdict != verdicts[index]:
                failures.append({"index": index, "stored_verdict": verdicts[index],
                                 "verified_verdict": rep.verdict, "reason": rep.reason})
        decided = sum(v in ("separable", "nonseparable") for v in verdicts.values())
    return {"file": str(p), "samples": n, "decided": decided, "certificates": checked,
            "failures": failures, "ok": checked > 0 and not failures and checked >= decided}


def run(args: argparse.Namespace) -> int:
    out = verify_file(args.results)
    if args.json:
        print(json.dumps(out, indent=2))
    else:
        print(f"{out['file']}: {out['certificates']} certificates checked for "
              f"{out['decided']} decided samples of {out['samples']}; "
              f"{len(out['failures'])} failed")
        for fail in out["failures"][:20]:
            print(f"  sample {fail['index']}: stored {fail['stored_verdict']}, verified "
                  f"{fail['verified_verdict']}: {fail['reason']}")
        if out["certificates"] < out["decided"]:
            print("  some decided samples have no stored certificate")
    return 0 if out["ok"] else 1
