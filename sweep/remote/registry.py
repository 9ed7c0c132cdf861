"""The local registry of submitted sweeps: one small JSON file in the user's state folder.

Location: ``$ORDERLESS_STATE_DIR/sweeps.json`` if that variable is set (tests use it), else
``$XDG_STATE_HOME/orderless/sweeps.json``, else ``~/.local/state/orderless/sweeps.json``.
Each entry records the sweep id, the remote's name and SSH destination, the remote folder,
spec and results paths there, how the driver was started (batch job id or process id), and
when.  The file is replaced atomically on every change; it holds no results.
"""

from __future__ import annotations

import json
import os
import tempfile
from dataclasses import asdict, dataclass, field
from pathlib import Path

from sweep.errors import UserError

REGISTRY_VERSION = 1


@dataclass
class SweepEntry:
    """One submitted sweep (see module doc)."""

    id: str
    remote: str
    destination: str
    folder: str
    spec: str
    results: str
    start: str
    job: str
    submitted: str
    local_spec: str
    ssh_options: list[str] = field(default_factory=list)
    setup: list[str] = field(default_factory=list)
    command: str = "orderless"
    state: str = "submitted"
    history: list[dict] = field(default_factory=list)


def state_dir() -> Path:
    """The folder of the registry (see module doc)."""
    if os.environ.get("ORDERLESS_STATE_DIR"):
        return Path(os.environ["ORDERLESS_STATE_DIR"])
    base = os.environ.get("XDG_STATE_HOME") or str(Path.home() / ".local" / "state")
    return Path(base) / "orderless"


def registry_path() -> Path:
    return state_dir() / "sweeps.json"


def load_entries() -> list[SweepEntry]:
    """All known sweeps, oldest first (empty if none was ever submitted)."""
    p = registry_path()
    if not p.exists():
        return []
    try:
        data = json.loads(p.read_text())
        return [SweepEntry(**e) for e in data["sweeps"]]
    except (ValueError, KeyError, TypeError) as exc:
        raise UserError(f"sweep registry {str(p)!r} is damaged ({exc}); expected the JSON "
                        "written by `orderless submit` (move it away to start afresh)") from None


def save_entries(entries: list[SweepEntry]) -> None:
    """Replace the registry atomically."""
    p = registry_path()
    p.parent.mkdir(parents=True, exist_ok=True)
    text = json.dumps({"version": REGISTRY_VERSION, "sweeps": [asdict(e) for e in entries]},
                      indent=2)
    fd, tmp = tempfile.mkstemp(dir=p.parent, prefix=".sweeps.", suffix=".tmp")
    with os.fdopen(fd, "w") as f:
        f.write(text)
    os.replace(tmp, p)


def find(sweep_id: str) -> SweepEntry:
    """The entry of ``sweep_id`` (a unique prefix is enough); the error lists known ids."""
    entries = load_entries()
    hits = [e for e in entries if e.id == sweep_id] or [e for e in entries
                                                          if e.id.startswith(sweep_id)]
    if len(hits) == 1:
        return hits[0]
    known = ", ".join(e.id for e in entries[-10:]) or "none"
    if not hits:
        raise UserError(f"sweep {sweep_id!r} is not in the registry {str(registry_path())!r}; "
                        f"known: {known}")
    raise UserError(f"sweep id {sweep_id!r} is ambiguous: {', '.join(e.id for e in hits)}")


def update(entry: SweepEntry) -> None:
    """Store ``entry``, replacing the one with its id (or appending it)."""
    entries = [e for e in load_entries() if e.id != entry.id]
    save_entries(entries + [entry])
