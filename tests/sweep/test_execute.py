"""Execution helpers: the batch-queue job script and the cluster settings."""

import pytest

from sweep.execute import jobqueue_cluster
from sweep.spec_run import RunSpec


def test_slurm_job_script_carries_the_spec(tmp_path):
    """dask-jobqueue's SLURMCluster.job_script() (its documented API) holds cores, memory,
    walltime, the extra directives, the prologue and one BLAS thread; nothing is submitted."""
    pytest.importorskip("dask_jobqueue")
    run = RunSpec.model_validate({"cluster": "jobqueue", "jobqueue": {
        "system": "slurm", "cores": 4, "processes": 2, "memory": "8GB", "walltime": "00:30:00",
        "extra_directives": ["--constraint=cpu"], "prologue": ["module load python"]}})
    cluster = jobqueue_cluster(run, start=False)
    try:
        script = cluster.job_script()
    finally:
        cluster.close()
    for text in ("#SBATCH --cpus-per-task=4", "00:30:00", "#SBATCH --constraint=cpu",
                 "module load python", "export MKL_NUM_THREADS=1"):
        assert text in script, text


def test_cluster_config_names_existing_dask_settings():
    """dask.config.set accepts any key silently, so a misspelt setting would do nothing:
    every key of CLUSTER_CONFIG must be one of distributed's own (its defaults name it)."""
    import dask
    import distributed  # noqa: F401 - loads distributed's defaults into dask.config

    from sweep.execute import CLUSTER_CONFIG

    for key in CLUSTER_CONFIG:
        dask.config.get(key)  # raises KeyError for a key distributed does not define
