"""``orderless status FILE.h5 [--json]``: is the sweep running, how far is it, what failed."""

from __future__ import annotations

import argparse
import json

from .units import human_seconds
from .status import run_status


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("status", help="state and progress of a sweep (also while it runs)")
    p.add_argument("file", help="HDF5 results file of `orderless run`")
    p.add_argument("--json", action="store_true", help="print one JSON object "
                   "(sweep.status.run_status)")
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


def run(args: argparse.Namespace) -> int:
    st = run_status(args.file)
    if st["state"] == "none":
        from .errors import UserError
        raise UserError(f"{args.file!r}: no results file and no progress file there, "
                        "expected the -o path of `orderless run`")
    print(json.dumps(st, indent=2) if args.json else render(st))
    return 0
