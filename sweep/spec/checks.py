"""Cross-field checks of a job spec, and the scenario and grid it resolves to.

Each check raises ``ValueError`` with a message that names the field path, echoes the value
and says what was expected; :func:`sweep.spec.model.parse_spec` turns it into one line.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from workers.operators.families import get_named
from workers.games.causal_games import get_game
from workers.operators.scenario import Scenario

if TYPE_CHECKING:  # pragma: no cover
    from .model import Spec

NON_AXIS_FIELDS = {"kind", "name", "measure", "order", "paths", "dataset"}
RANDOM_MEASURES = ("valid_direction", "wishart", "hs_volume", "comb", "comb_mixture")
# the parameters each ensemble's sampler reads (sweep.planning.plan.Plan.operator), besides weight
MEASURE_PARAMS = {"valid_direction": ("u",), "wishart": ("rank",), "hs_volume": ("steps",),
                  "comb": ("order", "memory_dim"), "comb_mixture": ("n_combs", "memory_dim")}


def used_params(fam) -> tuple[str, ...]:
    """The family fields that change its operators (the others are ignored by it)."""
    if fam.kind == "ensemble":
        return MEASURE_PARAMS[fam.measure] + ("weight",)
    if fam.kind == "named":
        return ("d", "weight") if fam.name == "quantum_switch" else ("weight",)
    return ("weight",)


def resolve_scenario(spec: "Spec") -> Scenario:
    """The scenario of the spec (for a named family, the process's own scenario)."""
    fam = spec.family
    if fam.kind == "named":
        params = {} if fam.d is None else {"d": fam.d}
        return get_named(fam.name, **params).scenario
    sc = spec.scenario
    return Scenario.from_dims(sc.dims, sc.d_past, sc.d_future, sc.names)


def _check_scenario(spec: "Spec") -> None:
    fam = spec.family
    if fam.kind != "named":
        if spec.scenario is None:
            raise ValueError(f"scenario is missing, expected scenario.dims for family kind "
                             f"{fam.kind!r}")
        return
    if fam.d is not None and fam.name != "quantum_switch":
        raise ValueError(f"family.d={fam.d} is only a parameter of quantum_switch, not "
                         f"{fam.name!r}")
    own = resolve_scenario(spec)
    sc = spec.scenario
    if sc is not None and (list(own.subsystem_dims) != [sc.d_past] + sc.dims + [sc.d_future]):
        raise ValueError(f"scenario dims={sc.dims} d_past={sc.d_past} d_future={sc.d_future} "
                         f"do not match process {fam.name!r} (subsystem dims "
                         f"{list(own.subsystem_dims)})")


def _what(fam) -> str:
    return {"ensemble": f"measure {getattr(fam, 'measure', '')!r}",
            "named": f"process {getattr(fam, 'name', '')!r}"}.get(fam.kind, "family kind 'files'")


def _check_ignored(spec: "Spec") -> None:
    """A family field set to a non-default value that its measure or process ignores."""
    fam = spec.family
    used = used_params(fam)
    for name, field in type(fam).model_fields.items():
        if name in NON_AXIS_FIELDS or name in used or name not in fam.model_fields_set:
            continue
        if getattr(fam, name) != field.default:
            raise ValueError(f"family.{name}={getattr(fam, name)!r} is ignored by {_what(fam)} "
                             f"(it uses {', '.join(used)}); expected it removed")


def _axis_samples(axis) -> list[float]:
    """The values of an axis worth validating: all listed values, or the two ends of a
    linspace (the field constraints are intervals, so the ends decide)."""
    if axis.values is not None:
        return list(axis.values)
    return [axis.start, axis.stop]


def _check_grid(spec: "Spec") -> None:
    fam = spec.family
    fields = type(fam).model_fields
    used = used_params(fam)
    seen: set[str] = set()
    for i, axis in enumerate(spec.grid):
        allowed = sorted(set(fields) - NON_AXIS_FIELDS)
        if axis.param not in allowed:
            raise ValueError(f"grid.{i}.param={axis.param!r} is not a numeric parameter of "
                             f"family kind {fam.kind!r}; expected one of {allowed}")
        axes = [p for p in used if p not in NON_AXIS_FIELDS and p != "d"]
        if axis.param == "d":
            raise ValueError(f"grid.{i}.param='d' would change the scenario between grid "
                             "points; expected one sweep per target dimension")
        if axis.param not in used:
            raise ValueError(f"grid.{i}.param={axis.param!r} is ignored by {_what(fam)}, so "
                             f"every grid point would be the same; expected one of {axes}")
        if axis.param in seen:
            raise ValueError(f"grid.{i}.param={axis.param!r} appears twice, expected each "
                             "parameter on one axis")
        seen.add(axis.param)
        integer = fields[axis.param].annotation in (int, int | None)
        if integer and axis.values is None and axis.num > 1:
            step = (axis.stop - axis.start) / (axis.num - 1)
            if step != int(step):
                raise ValueError(f"grid.{i}: start={axis.start}, stop={axis.stop}, "
                                 f"num={axis.num} gives steps of {step:g}, expected integers "
                                 f"for {axis.param!r}")
        for v in _axis_samples(axis):
            value = int(v) if integer else v
            if value != v:
                raise ValueError(f"grid.{i}.values contains {v!r}, expected integers for "
                                 f"{axis.param!r}")
            try:
                type(fam).model_validate({**fam.model_dump(), axis.param: value})
            except Exception as exc:  # the per-field message of pydantic
                first = exc.errors()[0]["msg"] if hasattr(exc, "errors") else str(exc)
                raise ValueError(f"grid.{i}: {axis.param}={v!r} is invalid: {first}") from None


def _check_family(spec: "Spec", scen: Scenario) -> None:
    fam, comp = spec.family, spec.compute
    random = fam.kind == "ensemble"
    if comp.samples > 1 and not random:
        raise ValueError(f"compute.samples={comp.samples} but family kind {fam.kind!r} is "
                         "deterministic; expected 1")
    if fam.kind == "ensemble" and fam.order is not None:
        if sorted(fam.order) != list(range(scen.n_parties)):
            raise ValueError(f"family.order={fam.order}, expected a permutation of "
                             f"0..{scen.n_parties - 1}")
    if fam.kind == "files" and any(p.endswith((".h5", ".hdf5")) for p in fam.paths) \
            and not fam.dataset:
        raise ValueError("family.dataset is missing, expected the HDF5 dataset name for "
                         f"paths {fam.paths}")


def _check_game(spec: "Spec", scen: Scenario) -> None:
    game = spec.compute.game
    if game is None:
        return
    if scen.d_past != 1 or scen.d_future != 1:
        raise ValueError(f"compute.game={game.name!r} needs a scenario without global past "
                         f"and future, got d_past={scen.d_past}, d_future={scen.d_future}")
    n = len(get_game(game.name).parties)
    if n != scen.n_parties:
        raise ValueError(f"compute.game={game.name!r} is a {n}-party game but the scenario "
                         f"has {scen.n_parties} parties")


def check_spec(spec: "Spec") -> None:
    """Every cross-field rule of the spec (called by the model validator)."""
    _check_scenario(spec)
    scen = resolve_scenario(spec)
    _check_ignored(spec)
    _check_grid(spec)
    _check_family(spec, scen)
    _check_game(spec, scen)
    if not spec.compute.robustness and not spec.compute.validity and spec.compute.game is None:
        raise ValueError("compute asks for nothing: robustness=[], validity=false and no game; "
                         "expected at least one quantity")
