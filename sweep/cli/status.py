"""``orderless status [FILE.h5 | ID] [--json]``: is the sweep running, how far is it, what
failed.

With a results file: read locally from its progress file and lock (:mod:`sweep.storage.status`).
With a sweep id of ``orderless submit``: the same, read on the remote over SSH, plus the
driver's queue state (:func:`sweep.remote.ops.remote_status`).  With nothing: the submitted
sweeps of the local registry (:mod:`sweep.remote.registry`).
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

from sweep.units import human_seconds
from sweep.storage.progress import HEARTBEAT
from sweep.storage.status import run_status


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("status", help="state and progress of a sweep (also while it runs), "
                       "local or remote; with no argument the submitted sweeps")
    p.add_argument("file", nargs="?", metavar="FILE|ID",
                   help="HDF5 results file of `orderless run`, or a sweep id of `orderless "
                   "submit` (a unique prefix is enough)")
    p.add_argument("--json", action="store_true", help="print one JSON object "
                   "(sweep.storage.status.run_status)")
    p.set_defaults(func=run)


def render(st: dict) -> str:
    prog = st["progress"] or {}
    state = st["state"]
    lines = [f"results    {st['results']}: {st['stored']}/{st['n_samples']} samples stored"]
    who = (f"run {prog.get('run_id') or (st['last_run'] or {}).get('id', '?')} on "
           f"{prog.get('host') or (st['last_run'] or {}).get('host', '?')} "
           f"(pid {prog.get('pid') or (st['last_run'] or {}).get('pid', '?')}, "
           f"{prog.get('cluster') or (st['last_run'] or {}).get('cluster', '?')})")
    if state == "dead":
        lines.append(f"state      dead: {who} stopped without recording its end (killed or "
                     "crashed); rerun the same command to resume")
    else:
        phase = f", {prog['phase']}" if state == "running" and prog.get("phase") else ""
        lines.append(f"state      {state}{phase}: {who}")
    if prog:
        rate, eta = prog.get("rate"), prog.get("eta_s")
        speed = (f", {rate:.3g} samples/s, ETA {human_seconds(eta)}" if rate and
                 eta is not None and state == "running" else "")
        ago = st.get("updated_ago_s")
        stalled = (state == "running" and ago is not None and ago > 3 * HEARTBEAT)
        lines.append(f"this run   {prog.get('computed', 0)}/{prog.get('to_compute', 0)} "
                     f"computed{speed}"
                     + (f" (updated {human_seconds(ago)} ago)" if ago is not None else "")
                     + (": no heartbeat since, is the driver stopped (Ctrl-Z) or stuck?"
                        if stalled else ""))
        counts = ", ".join(f"{k} {v}" for k, v in sorted((prog.get("statuses") or {}).items()))
        if counts:
            lines.append(f"statuses   {counts}")
        err = prog.get("last_error")
        if err:
            lines.append(f"last error sample {err['index']} ({err['status']}): {err['message']}")
        if prog.get("error"):
            lines.append(f"ended by   {prog['error']}")
    return "\n".join(lines)


def _is_local(target: str) -> bool:
    return target.endswith((".h5", ".hdf5")) or Path(target).exists()


def run(args: argparse.Namespace) -> int:
    if args.file is None:
        return _list(args.json)
    if not _is_local(args.file):
        return _remote(args.file, args.json)
    st = run_status(args.file)
    if st["state"] == "none":
        from sweep.errors import UserError
        raise UserError(f"{args.file!r}: no results file and no progress file there, "
                        "expected the -o path of `orderless run`")
    print(json.dumps(st, indent=2) if args.json else render(st))
    return 0


def _list(as_json: bool) -> int:
    from dataclasses import asdict

    from sweep.remote.registry import load_entries, registry_path
    entries = load_entries()
    if as_json:
        print(json.dumps([asdict(e) for e in entries], indent=2))
    elif not entries:
        print(f"no sweeps submitted yet (registry {registry_path()})")
    else:
        print(f"{'sweep id':<44} {'remote':<12} {'submitted':<25} state")
        for e in entries:
            print(f"{e.id:<44} {e.remote:<12} {e.submitted:<25} {e.state}")
    return 0


def _remote(sweep_id: str, as_json: bool) -> int:
    from sweep.remote.registry import find
    from sweep.remote.ops import remote_status
    entry = find(sweep_id)
    st = remote_status(entry)
    out = {"id": entry.id, "remote": entry.remote, "destination": entry.destination,
           "folder": entry.folder, "driver": {"start": entry.start, "job": entry.job,
                                              "queue_state": st.queue, "running": st.running},
           "status": st.status, "log_tail": st.log_tail}
    if as_json:
        print(json.dumps(out, indent=2))
        return 0
    how = f"batch job {entry.job}" if entry.start == "sbatch" else f"process {entry.job}"
    print(f"sweep      {entry.id} on {entry.remote} ({entry.destination}:{entry.folder})")
    print(f"driver     {how}: {st.queue}")
    if st.status is not None:
        print(render(st.status))
    elif not st.folder_exists:
        print("results    the sweep's folder is gone from the remote")
    else:
        print("results    none yet (the driver has not started writing)"
              + (f"; its log ends: {st.log_tail.splitlines()[-1]}" if st.log_tail else ""))
    return 0
