"""Cluster creation without a batch system: job scripts, the settings every cluster gets, the
wait for the first worker, the warm-up plugin, thread checks and the dashboard."""

import os
import re
import socket
import stat
import subprocess
import sys
import urllib.request
from pathlib import Path

import pytest
import yaml

from sweep.cli.main import main
from sweep.execution.cluster_jobqueue import jobqueue_cluster, worker_lifetime
from sweep.execution.clusters import CLUSTER_CONFIG, check_threads, config_environ, open_client
from sweep.errors import UserError
from sweep.execution.security import security_for
from sweep.spec.model import parse_spec
from sweep.spec.run import RunSpec, walltime_seconds

REPO = Path(__file__).resolve().parents[3]
OCB = {"family": {"kind": "named", "name": "ocb"},
       "grid": [{"param": "weight", "values": [0.5, 1.0]}],
       "run": {"progress": False}}


def _jobqueue_run(**jq):
    return RunSpec.model_validate({"cluster": "jobqueue", "jobqueue": {
        "system": "slurm", "cores": 4, "processes": 2, "memory": "8GB", "walltime": "00:30:00",
        "extra_directives": ["--constraint=cpu"], "prologue": ["module load python"], **jq}})


def test_slurm_job_script_carries_the_spec():
    """dask-jobqueue's SLURMCluster.job_script() (its documented API) holds cores, memory,
    walltime, the extra directives, the prologue, one BLAS thread, the cluster settings, a
    worker lifetime inside the walltime and the node's host name; nothing is submitted."""
    pytest.importorskip("dask_jobqueue")
    run = _jobqueue_run()
    with jobqueue_cluster(run, start=False, worker_env=config_environ(CLUSTER_CONFIG)) as c:
        script = c.job_script()
    for text in ("#SBATCH --cpus-per-task=4", "00:30:00", "#SBATCH --constraint=cpu",
                 "module load python", "export MKL_NUM_THREADS=1", "--lifetime 1575s",
                 "--lifetime-stagger 75s", "--no-dashboard", "--host $(hostname)",
                 "--dashboard-address $(hostname):0",
                 "export DASK_DISTRIBUTED__ADMIN__TICK__INTERVAL=1s",
                 "export DASK_DISTRIBUTED__WORKER__PROFILE__ENABLED=False"):
        assert text in script, text
    assert "tls" not in script  # TLS is chosen by open_client (security_for), not here


def test_tls_job_script_uses_private_certificate_files(tmp_path):
    """With TLS (the jobqueue default) the workers connect with tls:// and read the temporary
    certificates from files of mode 0600 in run.jobqueue.shared_directory."""
    pytest.importorskip("dask_jobqueue")
    run = _jobqueue_run(shared_directory=str(tmp_path), interface="lo")
    assert run.tls()
    with jobqueue_cluster(run, security_for(run), start=False) as c:
        script = c.job_script()
        assert c.scheduler_address.startswith("tls://127.0.0.1:")
        files = list(tmp_path.iterdir())
        assert len(files) == 3 and all(str(f) in script for f in files)
        assert all(stat.S_IMODE(f.stat().st_mode) == 0o600 for f in files)
    for text in ("--protocol tls://", "--tls-ca-file", "--tls-key", "--interface lo"):
        assert text in script, text
    assert "$(hostname)" not in script  # the interface decides the workers' address


def test_worker_lifetime_leaves_before_the_walltime():
    """Every worker leaves between min(5 min, walltime/4) and half that before the walltime."""
    for walltime in ("00:00:20", "00:30:00", "01:00:00", "1-00:00:00"):
        total = walltime_seconds(walltime)
        margin = min(300, total / 4)
        life, stagger = worker_lifetime(walltime)
        assert life - stagger == pytest.approx(total - margin)
        assert life + stagger == pytest.approx(total - margin / 2)
    assert walltime_seconds("2-01:02:03") == 2 * 86400 + 3723
    with pytest.raises(ValueError, match="HH:MM:SS"):
        walltime_seconds("1h")


def test_cluster_config_names_existing_dask_settings():
    """dask.config.set accepts any key silently, so a misspelt setting would do nothing:
    every key of CLUSTER_CONFIG must be one of distributed's own (its defaults name it)."""
    import dask
    import distributed  # noqa: F401 - loads distributed's defaults into dask.config

    for key in CLUSTER_CONFIG:
        dask.config.get(key)  # raises KeyError for a key distributed does not define


def test_config_environ_sets_the_cluster_config_in_a_new_process(tmp_path):
    """The environment of a batch job or job step carries CLUSTER_CONFIG: a fresh Python
    process with it reads every value back from dask's configuration (a mapping is merged
    into dask's default one, as dask merges configuration from the environment)."""
    code = ("import json, dask, distributed; from sweep.execution.clusters import CLUSTER_CONFIG; "
            "print(json.dumps({k: dask.config.get(k) for k in CLUSTER_CONFIG}))")
    env = {**os.environ, **config_environ(CLUSTER_CONFIG), "DASK_CONFIG": str(tmp_path)}
    out = subprocess.run([sys.executable, "-c", code], env=env, cwd=REPO, check=True,
                         capture_output=True, text=True).stdout
    seen = yaml.safe_load(out)
    for key, value in CLUSTER_CONFIG.items():
        if isinstance(value, dict):
            assert value.items() <= seen[key].items(), key
        else:
            assert seen[key] == value, key


def test_scheduler_without_workers_fails_within_start_timeout():
    """An existing scheduler with no workers: a one-line error after run.start_timeout
    instead of a silent wait."""
    from distributed import LocalCluster
    with LocalCluster(n_workers=0, processes=False, protocol="tcp://", host="127.0.0.1",
                      dashboard_address="127.0.0.1:0") as sched:
        run = RunSpec(cluster="address", address=sched.scheduler_address, start_timeout=1)
        with pytest.raises(UserError, match="no worker joined .* within run.start_timeout=1 s"):
            with open_client(run):
                pass


@pytest.mark.parametrize("address, says", [
    ("notanaddress", "run.address='notanaddress': not a scheduler address"),
    ("tcp://127.0.0.1:{port}", "cannot reach the scheduler")])
def test_bad_scheduler_address_is_a_one_line_error(address, says, write_spec, capsys, tmp_path):
    """Not an address, or nothing listening there: one line, exit 2 (within the connect
    timeout, min(run.start_timeout, 30 s))."""
    with socket.socket() as s:  # a free port on loopback, closed again: nobody listens
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    address, says = address.format(port=port), says.format(port=port)
    spec = write_spec({**OCB, "run": {"progress": False, "start_timeout": 2}})
    code = main(["run", spec, "-o", str(tmp_path / "x.h5"), "--scheduler", address])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1, err
    assert says in err


@pytest.mark.cluster
def test_threads_beyond_cores_are_reported(monkeypatch, capsys):
    """External workers are not pinned by the tool: dask threads x BLAS threads beyond the
    host's cores give a one-line warning; one pinned thread per core gives none."""
    from distributed import Client, LocalCluster
    for var in ("OMP_NUM_THREADS", "MKL_NUM_THREADS", "OPENBLAS_NUM_THREADS"):
        monkeypatch.setenv(var, "1")
    cores = len(os.sched_getaffinity(0))
    for threads, warned in ((1, False), (cores + 1, True)):
        with LocalCluster(n_workers=1, threads_per_worker=threads, processes=False,
                          dashboard_address="127.0.0.1:0") as c, Client(c) as client:
            check_threads(client)
        err = capsys.readouterr().err
        assert (f"run {threads} threads" in err) is warned, err
        if warned:
            assert err.startswith("orderless: warning: workers on ") and err.count("\n") == 1


@pytest.mark.cluster
def test_every_worker_is_warmed_up_when_it_joins():
    """The warm-up plugin compiles the spec's problems on the workers present and on a worker
    that joins later."""
    spec = parse_spec(OCB)

    def cached():
        from sweep.planning.task import plan_from_json
        from workers.analysis.robustness import get_problem
        return plan_from_json.cache_info().currsize, get_problem.cache_info().currsize

    with open_client(RunSpec(workers=1), spec.model_dump_json()) as client:
        client.cluster.scale(2)
        client.wait_for_workers(2, timeout=60)
        client.run(lambda: None)  # every worker has finished registering
        counts = client.run(cached)
    assert len(counts) == 2 and all(n_plans >= 1 and n_problems >= 1
                                    for n_plans, n_problems in counts.values())


def _hold(port: int):
    """Keep ``port`` on 127.0.0.1 busy, as another dask process would (None if taken)."""
    s = socket.socket()
    try:
        s.bind(("127.0.0.1", port))
    except OSError:
        s.close()
        return None
    s.listen()
    return s


def _run_with_8787_busy(*args: str) -> subprocess.CompletedProcess:
    """``orderless ARGS`` while port 8787 is in use, as when another dask process runs."""
    held = _hold(8787)
    try:
        return subprocess.run([sys.executable, "-m", "sweep.cli", *args], cwd=REPO,
                              capture_output=True, text=True, timeout=600,
                              env={**os.environ, "PYTHONWARNINGS": "default"})
    finally:
        if held is not None:
            held.close()


@pytest.mark.cluster
def test_plain_run_prints_no_library_warnings(write_spec, tmp_path):
    """`orderless run` on the local cluster while port 8787 is in use: no dashboard, so no
    dask warning about the port (or any other), only the tool's own output."""
    proc = _run_with_8787_busy("run", write_spec(OCB), "-o", str(tmp_path / "o.h5"),
                               "--workers", "1")
    assert proc.returncode == 0, proc.stderr
    assert proc.stderr == ""
    assert "2 computed" in proc.stdout


@pytest.mark.slow
def test_demo_prints_no_library_warnings(tmp_path):
    """The README's first command's demo: stderr holds nothing but the tool's own phase and
    progress lines (``orderless: ...``, or the bar on a terminal), no library warning."""
    proc = _run_with_8787_busy("demo", "-o", str(tmp_path / "demo.h5"))
    assert proc.returncode == 0, proc.stderr
    lines = re.sub(r"\[[#.]+\] \d+/\d+ [^\r\n]*", "", proc.stderr).splitlines()
    foreign = [ln for ln in lines if ln.strip() and not ln.startswith("orderless: ")]
    assert foreign == [], proc.stderr
    assert "orderless: solving:" in proc.stderr


@pytest.mark.cluster
def test_dashboard_on_request_prints_its_link(capsys):
    """run.dashboard: true starts dask's dashboard and prints a link that answers."""
    pytest.importorskip("bokeh")
    with open_client(RunSpec(workers=1, dashboard=True)) as client:
        link = client.dashboard_link
        with urllib.request.urlopen(link, timeout=30) as page:
            assert page.status == 200
    assert f"dashboard: {link}" in capsys.readouterr().err
    assert link.startswith("http://127.0.0.1:")


def test_every_shipped_profile_is_valid():
    """Each profile of job_specs/profiles.yaml resolves to a valid run section, one per kind
    of cluster (the slurm and allocation ones also run in
    tests/sweep/execution/test_slurm_readme.py)."""
    from sweep.spec.run import resolve_run
    path = REPO / "job_specs" / "profiles.yaml"
    names = yaml.safe_load(path.read_text())["profiles"]
    kinds = {resolve_run(RunSpec(), {"profile": n}, str(path)).cluster for n in names}
    assert kinds == {"local", "address", "jobqueue", "allocation"}


@pytest.mark.parametrize("module, run, extra", [
    ("dask_jobqueue", {"cluster": "jobqueue", "jobqueue": {"system": "slurm"}}, "jobqueue"),
    ("bokeh", {"dashboard": True}, "dashboard")])
def test_missing_extra_is_a_one_line_error_naming_it(module, run, extra, monkeypatch):
    """Without an optional package (None in sys.modules makes its import fail), the run stops
    with one line naming the extra to install."""
    monkeypatch.setitem(sys.modules, module, None)
    with pytest.raises(UserError, match=re.escape(f'pip install "orderless[{extra}]"')):
        with open_client(RunSpec.model_validate(run)):
            pass
