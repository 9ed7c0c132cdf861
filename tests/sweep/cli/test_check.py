"""``orderless check`` as a new user would run it, on the named processes saved to .npy."""

import json
import subprocess
import sys

import numpy as np
import pytest

from sweep.cli.main import main
from workers.operators.families import lugano_process, ocb_process


def _run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def ocb_file(tmp_path):
    path = tmp_path / "ocb.npy"
    np.save(path, ocb_process().matrix)
    return path


def test_check_json_keys(ocb_file, capsys):
    """JSON keys of issue 2; values: OCB R_r = sqrt2 - 1, R_g = 3 - 2 sqrt2 (workers/THEORY.md §5)."""
    code, out, _ = _run(capsys, "check", str(ocb_file), "--dims", "2,2,2,2", "--json")
    assert code == 0
    d = json.loads(out)
    assert d["valid"] is True and d["verdict"] == "nonseparable"
    assert d["random_robustness"] == pytest.approx(np.sqrt(2) - 1, abs=1e-6)
    assert d["generalized_robustness"] == pytest.approx(3 - 2 * np.sqrt(2), abs=1e-6)
    assert d["witness_value"] == pytest.approx(1 - np.sqrt(2), abs=1e-6)
    # AUTO picks the batched interior point for bipartite qubits (workers.sdp.solver_ipm)
    assert d["solver"] == "IPM" and d["status"] == "optimal"
    assert {s["solver"] for s in d["solves"]} == {"IPM"}  # R_r: 17 variables, R_g: 104
    assert d["certified"] is True and d["certificate_kind"] == "witness"
    assert 0 < d["certificate_margin"] <= np.sqrt(2) - 1 + 1e-9
    assert d["certificate_margin"] == pytest.approx(np.sqrt(2) - 1, abs=1e-6)


def test_check_comb_certified_separable(tmp_path, capsys, rng):
    """A random comb (workers/THEORY.md §6: separable) gets a certified 'separable' verdict; a
    separable/nonseparable verdict never comes with certified false."""
    from workers.operators.families import random_comb
    from workers.operators.scenario import Scenario
    path = tmp_path / "comb.npy"
    np.save(path, random_comb(Scenario.from_dims([2, 2, 2, 2]), (1, 0), rng))
    code, out, _ = _run(capsys, "check", str(path), "--dims", "2,2,2,2", "--json")
    d = json.loads(out)
    assert code == 0 and d["verdict"] == "separable" and d["certified"] is True
    assert d["certificate_kind"] == "decomposition"


def test_check_text_output(ocb_file, capsys):
    code, out, _ = _run(capsys, "check", str(ocb_file), "--dims", "2,2,2,2")
    assert code == 0 and "nonseparable" in out and "0.414214" in out


def test_check_plain_text_matrix(tmp_path, capsys):
    """A plain-text matrix (one row per line) is read like the .npy file."""
    path = tmp_path / "lugano.txt"
    np.savetxt(path, lugano_process().matrix.real)
    code, out, _ = _run(capsys, "check", str(path), "--dims", "2,2,2,2,2,2", "--json",
                        "--quantities", "random", "--eps", "1e-6")
    assert code == 0 and json.loads(out)["verdict"] == "nonseparable"


def test_check_game(ocb_file, capsys):
    """OCB reaches (2+sqrt2)/4 > 3/4 in the OCB game (Oreshkov, Costa, Brukner 2012)."""
    code, out, _ = _run(capsys, "check", str(ocb_file), "--dims", "2,2,2,2", "--json",
                        "--quantities", "random", "--game", "ocb_guess")
    d = json.loads(out)
    assert code == 0 and d["violates"] is True
    assert d["causal_bound"] == pytest.approx(0.75, abs=1e-9)
    assert d["game_value"] == pytest.approx((2 + np.sqrt(2)) / 4, abs=1e-5)


BAD = [
    (["--dims", "2,2,2"], "even number"),
    (["--dims", "2,x,2,2"], "comma-separated integers"),
    (["--dims", "2,2,2,1"], "multiply to 8 but the operator is 16x16"),
    (["--dims", "2,2,2,2", "--past", "0"], "--past=0"),
    (["--dims", "2,2,2,2", "--quantities", "entropy"], "--quantities"),
    (["--dims", "2,2,2,2", "--game", "chess"], "unknown game|known"),
    (["--dims", "2,2,2,2", "--eps", "-1"], "eps_abs=-1"),
    (["--dims", "2,2,2,2", "--names", "A"], "--names"),
]


@pytest.mark.parametrize("extra,message", BAD)
def test_bad_arguments_one_line_exit_2(ocb_file, capsys, extra, message):
    code, out, err = _run(capsys, "check", str(ocb_file), *extra)
    assert code == 2
    assert len(err.strip().splitlines()) == 1
    import re
    assert re.search(message, err), err


def _bad_files(tmp_path):
    W = ocb_process().matrix
    files = {}
    files["missing"] = (tmp_path / "nope.npy", "no such file")
    p = tmp_path / "pickled.npy"
    np.save(p, np.array([{"a": 1}], dtype=object), allow_pickle=True)
    files["pickle"] = (p, "not a plain .npy")
    p = tmp_path / "rect.npy"
    np.save(p, np.ones((16, 8)))
    files["rect"] = (p, "expected a square matrix")
    p = tmp_path / "nonherm.npy"
    np.save(p, W + 0.1j * np.kron(np.diag([1, -1]), np.eye(8)))
    files["nonherm"] = (p, "not Hermitian")
    p = tmp_path / "trace.npy"
    np.save(p, 2 * W)
    files["trace"] = (p, "trace 8, expected 4")
    p = tmp_path / "neg.npy"
    np.save(p, W + 0.3 * np.kron(np.diag([1, -1]), np.eye(8)))
    files["neg"] = (p, "not positive semidefinite")
    p = tmp_path / "garbage.txt"
    p.write_text("1 2\n3 banana\n")
    files["text"] = (p, "cannot read a number")
    p = tmp_path / "W.mat"
    p.write_text("x")
    files["suffix"] = (p, "unknown file type")
    p = tmp_path / "nan.npy"
    np.save(p, np.full((16, 16), np.nan))
    files["nan"] = (p, "non-finite")
    return files


def test_bad_files_one_line_exit_2(tmp_path, capsys):
    for key, (path, message) in _bad_files(tmp_path).items():
        code, out, err = _run(capsys, "check", str(path), "--dims", "2,2,2,2")
        assert code == 2, key
        assert len(err.strip().splitlines()) == 1, (key, err)
        assert message in err, (key, err)


def test_console_script_installed(ocb_file):
    """The console script exists and exits 2 on an invalid operator."""
    exe = [sys.executable, "-m", "sweep.cli"]
    r = subprocess.run(exe + ["check", str(ocb_file), "--dims", "2,2,3,2"], capture_output=True,
                       text=True)
    assert r.returncode == 2 and "multiply to" in r.stderr


def test_games_json(capsys):
    """Built-in games with causal bounds 3/4 (OCB 2012) and 1/2 (Branciard et al. 2016)."""
    code, out, _ = _run(capsys, "games", "--json")
    games = {g["name"]: g for g in json.loads(out)}
    assert code == 0
    assert games["ocb_guess"]["causal_bound"] == pytest.approx(0.75)
    assert games["both_guess"]["causal_bound"] == pytest.approx(0.5)
    assert all({"name", "parties", "causal_bound"} <= set(g) for g in games.values())


def test_check_announces_its_steps(ocb_file, capsys, monkeypatch):
    """What a long check is doing, on stderr, step by step (shown for checks estimated over
    10 s, such as the quantum switch; forced here), with the same answer on stdout."""
    from sweep.cli import check_steps
    monkeypatch.setattr(check_steps, "SHOW_ABOVE_S", 0.0)
    code, out, err = _run(capsys, "check", str(ocb_file), "--dims", "2,2,2,2", "--json")
    assert code == 0 and json.loads(out)["verdict"] == "nonseparable"
    steps = [line.removeprefix("orderless check: ") for line in err.splitlines()]
    assert steps[0].startswith("D = 16, random/exact IPM, blocks 8 x 2; generalized/exact IPM")
    assert steps[1].startswith("solving the random robustness (exact")
    assert steps[2].startswith("random robustness: IPM optimal, ")
    assert steps[3].startswith("solving the generalized robustness")
    assert steps[-1] == "certifying the verdict in exact arithmetic ..."
    code, out, err = _run(capsys, "check", str(ocb_file), "--dims", "2,2,2,2", "--quiet")
    assert code == 0 and err == ""
