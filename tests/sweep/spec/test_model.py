"""The job spec model: defaults, hashing, precedence, the markdown reference, and at least
twenty bad inputs that each give a one-line error and a non-zero exit (common practice:
errors name the field, echo the value and say what was expected)."""

import numpy as np
import pytest
import yaml

from sweep.cli.main import main
from sweep.errors import UserError
from sweep.spec.model import parse_spec
from sweep.spec.doc import markdown_reference
from sweep.spec.run import RunSpec, resolve_run
from tests.sweep.conftest import ocb_grid

GOOD = {"scenario": {"dims": [2, 2, 2, 2]},
        "family": {"kind": "ensemble", "measure": "wishart"},
        "compute": {"samples": 3}}


def _with(path, value, base=GOOD):
    data = yaml.safe_load(yaml.safe_dump(base))
    node = data
    for key in path[:-1]:
        node = node.setdefault(key, {})
    node[path[-1]] = value
    return data


STABLE_HASH = "83173c892da4c7fb7c35ce82df775f454d70d2d4e7fce458edd351885ace77fb"

BAD_SPECS = [
    (_with(["surprise"], 1), "unknown key 'surprise'"),
    (_with(["compute", "sampels"], 3), "unknown key 'compute.sampels'"),
    (_with(["scenario", "dims"], [2, 2, 2]), "expected an even number"),
    (_with(["scenario", "dims"], [2, 0, 2, 2]), "expected dimensions >= 1"),
    (_with(["scenario", "dims"], "2x2"), "scenario.dims=\"2x2\""),
    (_with(["scenario", "d_past"], 0), "scenario.d_past=0"),
    (_with(["scenario", "names"], ["A"]), "expected 2"),
    (_with(["family", "kind"], "magic"), "family"),
    (_with(["family", "measure"], "haar"), "family.ensemble.measure=\"haar\""),
    (_with(["family", "u"], 1.5), "family.ensemble.u=1.5"),
    (_with(["family", "rank"], 0), "family.ensemble.rank=0"),
    (_with(["family", "order"], [0, 0]), "family.order=[0, 0]"),
    (_with(["compute", "samples"], 0), "compute.samples=0"),
    (_with(["compute", "robustness"], ["log"]), "compute.robustness.0=\"log\""),
    (_with(["compute", "solver"], "MOSEK"), "compute.solver=\"MOSEK\""),
    (_with(["compute", "eps"], -1), "compute.eps=-1"),
    (_with(["compute", "seed"], -5), "compute.seed=-5"),
    (_with(["compute", "game"], {"name": "lugano_game"}), "3-party game"),
    (_with(["grid"], [{"param": "colour", "values": [1]}]), "grid.0.param='colour'"),
    (_with(["grid"], [{"param": "u"}]), "give either values or all of start, stop, num"),
    (_with(["grid"], [{"param": "weight", "values": [0.5, 2.0]}]),
     "grid.0: weight=2.0 is invalid"),
    (_with(["grid"], [{"param": "weight", "start": 0.5, "stop": 1.5, "num": 10 ** 9}]),
     "grid.0: weight=1.5 is invalid"),
    (_with(["grid"], [{"param": "rank", "start": 1, "stop": 4, "num": 7}]),
     "gives steps of 0.5, expected integers"),
    # a grid over a parameter the measure ignores would repeat one point (issue 12)
    (_with(["family"], {"kind": "ensemble", "measure": "valid_direction"},
           _with(["grid"], [{"param": "memory_dim", "values": [2, 3]}])),
     "grid.0.param='memory_dim' is ignored by measure 'valid_direction'"),
    (_with(["family", "u"], 0.5), "family.u=0.5 is ignored by measure 'wishart'"),
    (_with(["grid"], [{"param": "d", "values": [2, 3]}],
           {"family": {"kind": "named", "name": "quantum_switch"}}),
     "would change the scenario"),
    (_with(["grid"], [{"param": "rank", "values": [1.5]}]), "expected integers"),
    ({"family": {"kind": "ensemble", "measure": "comb"}}, "scenario is missing"),
    (_with(["compute", "samples"], 4, ocb_grid([0.5])), "is deterministic; expected 1"),
    (_with(["scenario"], {"dims": [2, 2]}, ocb_grid([0.5])), "do not match process 'ocb'"),
    (_with(["family", "d"], 3, ocb_grid([0.5])), "only a parameter of quantum_switch"),
    (_with(["run", "cluster"], "address"), "needs run.address"),
    (_with(["run", "cluster"], "jobqueue"), "needs a run.jobqueue section"),
    (_with(["run", "jobqueue"], {"system": "condor"}), "run.jobqueue.system=\"condor\""),
    (_with(["compute"], {"robustness": [], "validity": False}), "compute asks for nothing"),
    ({"family": {"kind": "files", "paths": ["x.h5"]}, "scenario": {"dims": [2, 2, 2, 2]}},
     "family.dataset is missing"),
]


def _one_line_error(capsys, argv, needle):
    code = main(argv)
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1, err
    assert needle in err, err
    return err


@pytest.mark.parametrize("data,needle", BAD_SPECS, ids=[n for _, n in BAD_SPECS])
def test_bad_spec_gives_one_line_error(data, needle, write_spec, tmp_path, capsys):
    """Each bad field: exit 2 and one line naming the field and echoing the value."""
    _one_line_error(capsys, ["run", write_spec(data), "-o", str(tmp_path / "o.h5")], needle)


def test_bad_files(write_spec, tmp_path, capsys):
    """Bad files and bad dims in files: one line each, exit 2 (common practice)."""
    out = str(tmp_path / "o.h5")
    _one_line_error(capsys, ["run", str(tmp_path / "none.yaml"), "-o", out], "does not exist")
    _one_line_error(capsys, ["run", write_spec("family: [unclosed"), "-o", out], "not valid YAML")
    _one_line_error(capsys, ["run", write_spec("- 1\n- 2\n"), "-o", out], "expected a mapping")
    np.save(tmp_path / "w.npy", np.eye(8))
    files = {"scenario": {"dims": [2, 2, 2, 2]}, "family": {"kind": "files",
             "paths": ["w.npy"]}, "run": {"cluster": "serial"}}
    _one_line_error(capsys, ["run", write_spec(files), "-o", out], "expected (16, 16)")
    files["family"]["paths"] = ["missing.npy"]
    _one_line_error(capsys, ["run", write_spec(files), "-o", out], "missing.npy' does not exist")
    (tmp_path / "junk.h5").write_text("not hdf5")
    _one_line_error(capsys, ["run", write_spec(ocb_grid([1.0])), "-o",
                             str(tmp_path / "junk.h5")], "exists but is not an HDF5 file")
    _one_line_error(capsys, ["summary", str(tmp_path / "nothing.h5")], "does not exist")
    _one_line_error(capsys, ["run", write_spec(ocb_grid([1.0])), "-o", out, "--profile",
                             "big"], "no profile file found")


def test_profile_file_used_as_spec(tmp_path, capsys):
    """job_specs/profiles.yaml given as the spec: told it is a profile file, one line."""
    from pathlib import Path
    profiles = Path(__file__).resolve().parents[3] / "job_specs" / "profiles.yaml"
    _one_line_error(capsys, ["run", str(profiles), "-o", str(tmp_path / "o.h5")],
                    "is a profile file (top-level 'profiles'), not a job spec; use it as "
                    f"`--profiles {profiles} --profile NAME`")
    assert not (tmp_path / "o.h5").exists()


def test_spec_hash_is_stable():
    """Files written by earlier versions are resumed only if the hash of an unchanged spec
    stays the same: this value was computed by schema 3 (before issue 12)."""
    assert parse_spec(GOOD).spec_hash() == STABLE_HASH



def test_added_family_field_enters_the_hash_only_when_set():
    """`steps` (hs_volume, added after schema 3) at its default leaves the hash of older
    specs alone; set, it distinguishes the walks."""
    base = {"scenario": {"dims": [2, 2, 2, 2]},
            "family": {"kind": "ensemble", "measure": "hs_volume"},
            "compute": {"samples": 4}}
    unset = parse_spec(base)
    assert "steps" not in unset.science()["family"]
    stepped = parse_spec({**base, "family": {**base["family"], "steps": 30}})
    assert stepped.science()["family"]["steps"] == 30
    assert unset.spec_hash() != stepped.spec_hash()

def test_spec_hash_ignores_run_and_tracks_science():
    """The hash identifies results, so where they ran must not change it (design choice)."""
    a = parse_spec(GOOD)
    b = parse_spec(_with(["run"], {"cluster": "local", "workers": 7}))
    c = parse_spec(_with(["compute", "seed"], 1))
    assert a.spec_hash() == b.spec_hash() != c.spec_hash()
    assert parse_spec(yaml.safe_load(a.to_yaml())) == a


def test_precedence_cli_over_profile_over_spec(tmp_path):
    """Precedence CLI > profile > spec > default, resolved in one function."""
    prof = tmp_path / "p.yaml"
    prof.write_text(yaml.safe_dump({"profiles": {"big": {"workers": 6, "samples_per_task": 3}}}))
    spec_run = RunSpec(workers=2, samples_per_task=5, progress=False)
    r = resolve_run(spec_run, {"profile": "big", "workers": 9}, str(prof))
    assert (r.workers, r.samples_per_task, r.progress, r.cluster) == (9, 3, False, "local")
    assert resolve_run(RunSpec(), {"address": "tcp://h:1"}).cluster == "address"
    with pytest.raises(UserError, match="profile 'tiny' not in"):
        resolve_run(spec_run, {"profile": "tiny"}, str(prof))


def test_markdown_reference_lists_every_field():
    """The reference is generated from the model, so every field appears in it."""
    from sweep.spec.model import ComputeSpec, EnsembleFamily
    text = markdown_reference()
    for model in (ComputeSpec, EnsembleFamily, RunSpec):
        for name in model.model_fields:
            assert f"`{name}`" in text
