"""``orderless verify FILE.h5``: re-check every stored certificate without re-solving.

Exit 0 only when every stored certificate verifies and agrees with its sample's verdict;
exit 1 otherwise (also when the file stores no certificate at all).  On a file a sweep is
still writing, it checks the samples committed when it started and says so; certificates are
read in batches (:data:`BATCH`), each under the read lock of :mod:`sweep.storage.live`, and checked
outside it, so the sweep is never held up for long.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

import h5py
import numpy as np

from workers.certificates.verify import Certificate, verify_certificate
from workers.operators.scenario import Scenario

from sweep.storage.live import reading, writer_alive
from sweep.storage.results import check_format

BATCH = 64


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("verify", help="re-check the certificates stored in a results file")
    p.add_argument("results", help="an orderless results file (.h5)")
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(func=run)


def read_certificate(g: h5py.Group) -> tuple[np.ndarray, Certificate]:
    """The operator and the certificate stored in one ``certificates/<index>`` group.

    Schema 3 (see :meth:`sweep.storage.writer.ResultFile._store_certificates`): arrays are the
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
    live = writer_alive(p)
    with reading(p) as f:
        check_format(f, p)
        scenario = scenario_of(f)
        n = int(f.attrs["committed"])
        rows = f["samples"][:n]
        names = sorted(f["certificates"], key=int) if "certificates" in f else []
    verdicts = {int(i): v.decode() for i, v in zip(rows["index"], rows["verdict"])}
    names = [m for m in names if int(m) in verdicts]  # others: orphans of a cut-short write
    checked, failures = 0, []
    for start in range(0, len(names), BATCH):
        with reading(p) as f:
            batch = [(int(m), *read_certificate(f["certificates"][m]))
                     for m in names[start:start + BATCH]]
        for index, W, cert in batch:
            rep = verify_certificate(scenario, W, cert)
            checked += 1
            if not rep.ok or rep.verdict != verdicts[index]:
                failures.append({"index": index, "stored_verdict": verdicts[index],
                                 "verified_verdict": rep.verdict, "reason": rep.reason})
    decided = sum(v in ("separable", "nonseparable") for v in verdicts.values())
    return {"file": str(p), "samples": n, "decided": decided, "certificates": checked,
            "failures": failures, "live": live,
            "ok": checked > 0 and not failures and checked >= decided}


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
        if out["live"]:
            print("  (sweep still running: checked the samples stored when verify started)")
    return 0 if out["ok"] else 1
