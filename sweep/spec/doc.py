"""The spec reference, printed from the pydantic models themselves (``python -m sweep.spec
--markdown``), so the documentation cannot drift from the schema."""

from __future__ import annotations

import inspect
import json

from pydantic import BaseModel
from pydantic_core import PydanticUndefined

from .model import (Axis, ComputeSpec, EnsembleFamily, FilesFamily, GameSpec, NamedFamily,
                   ScenarioSpec, Spec)
from .run import AllocationSpec, JobqueueSpec, RunSpec, SecuritySpec

SECTIONS: tuple[tuple[str, type[BaseModel]], ...] = (
    ("top level", Spec), ("scenario", ScenarioSpec), ("family (kind: named)", NamedFamily),
    ("family (kind: ensemble)", EnsembleFamily), ("family (kind: files)", FilesFamily),
    ("grid[] (one axis)", Axis), ("compute", ComputeSpec), ("compute.game", GameSpec),
    ("run", RunSpec), ("run.jobqueue", JobqueueSpec), ("run.allocation", AllocationSpec),
    ("run.security", SecuritySpec),
)


def _type_name(annotation: object) -> str:
    if "NamedFamily" in str(annotation):
        return "one of the family kinds below (by `kind`)"
    text = str(annotation).replace("typing.", "").replace("sweep.spec.run.", "")
    text = text.replace("sweep.spec.model.", "").replace("<class '", "").replace("'>", "")
    return text.replace("|", "&#124;")


def _default(field) -> str:
    if field.default is PydanticUndefined and field.default_factory is None:
        return "required"
    value = field.default_factory() if field.default_factory else field.default
    if isinstance(value, BaseModel):
        return "(defaults)"
    return f"`{json.dumps(value)}`"


def section(title: str, model: type[BaseModel]) -> str:
    doc = " ".join(inspect.cleandoc(model.__doc__ or "").split())
    lines = [f"### `{title}`", "", doc, "",
             "| key | type | default | meaning |", "|---|---|---|---|"]
    for name, field in model.model_fields.items():
        lines.append(f"| `{name}` | {_type_name(field.annotation)} | {_default(field)} | "
                     f"{field.description or ''} |")
    return "\n".join(lines)


def markdown_reference() -> str:
    """The whole spec reference as Markdown."""
    intro = ("Unknown keys are rejected; every error names the field path, echoes the value "
             "and says what was expected.  `run` does not enter the spec hash, so the same "
             "results file can be resumed on another cluster.")
    return "\n\n".join(["## Job spec reference", intro]
                       + [section(t, m) for t, m in SECTIONS])
