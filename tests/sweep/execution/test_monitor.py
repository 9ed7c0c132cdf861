"""Signs of life: phases at once, a redrawn line on a terminal, plain periodic lines
otherwise, rate and ETA counted from the first task, and the progress file."""

import io
import json

from sweep.cli.main import main
from sweep.execution.monitor import Monitor
from sweep.storage.progress import ProgressFile, read_progress
from tests.sweep.conftest import cli, ocb_grid


class Terminal(io.StringIO):
    def isatty(self):
        return True


def test_terminal_redraws_and_pipe_prints_plain_lines(tmp_path):
    rows = [{"index": i, "status": "ok", "verdict": "separable"} for i in range(4)]
    tty, pipe = Terminal(), io.StringIO()
    for stream in (tty, pipe):
        mon = Monitor(8, True, stream=stream, interval=0.0)
        mon.phase("starting cluster", "local, 2 worker processes")
        assert stream.getvalue() == "orderless: starting cluster: local, 2 worker processes\n"
        mon.solving(2)
        mon.tick(force=True)
        assert "first results pending" in stream.getvalue()  # no rate before a result
        mon.add(rows, 4)
        mon.add([{**r, "index": r["index"] + 4} for r in rows], 4)
        mon.finish("complete")
    assert "\r[" in tty.getvalue() and "8/8 samples" in tty.getvalue()
    assert "\r" not in pipe.getvalue()
    lines = pipe.getvalue().splitlines()
    assert lines[1] == "orderless: solving: 8 samples in 2 tasks"
    assert lines[-1].startswith("orderless: 8/8 samples  ") and "samples/s  ETA 0 s" in lines[-1]


def test_progress_file_of_a_run(tmp_path, write_spec):
    """The progress file after a run: complete, with this run's counts, the run id of the
    file's run entry, and a rate; a failed sample shows as the last error."""
    out = tmp_path / "o.h5"
    assert main(["run", write_spec(ocb_grid([0.6, 0.9])), "-o", str(out)]) == 0
    prog = read_progress(out)
    import h5py
    with h5py.File(out, "r") as f:
        run = json.loads(f.attrs["runs"])[-1]
    assert prog["format"] == "orderless-progress" and prog["version"] == 1
    assert (prog["state"], prog["phase"], prog["run_id"]) == ("complete", "finished", run["id"])
    assert prog["computed"] == prog["to_compute"] == prog["stored"] == prog["n_samples"] == 2
    assert prog["statuses"] == {"ok": 2} and prog["verdicts"] == {"separable": 1,
                                                                 "nonseparable": 1}
    assert prog["rate"] > 0 and prog["last_error"] is None and prog["error"] is None
    pf = ProgressFile(out, {})
    mon = Monitor(1, False, pf)
    mon.add([{"index": 0, "status": "error", "message": "ValueError: x"}], 1)
    assert read_progress(out)["last_error"] == {"index": 0, "status": "error",
                                                "message": "ValueError: x"}


def test_phases_reach_a_log_file_at_once(tmp_path, write_spec):
    """stderr redirected (not a terminal): phases in order, then plain lines, no '\\r'."""
    code, out, err = cli("run", write_spec({**ocb_grid([0.6, 0.9]), "run": {
        "cluster": "serial"}}), "-o", tmp_path / "o.h5")
    assert code == 0 and "\r" not in err
    phases = [ln.split(":")[1].strip() for ln in err.splitlines()]
    assert phases == ["compiling", "solving", "2/2 samples  " + phases[-1].split("  ", 1)[1]]
