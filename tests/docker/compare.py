"""Comparing two results files sample by sample."""

from __future__ import annotations

import json

import numpy as np

from sweep.storage.results import read_results

# Per-run facts rather than results: wall time, which run and which worker solved a sample.
NOT_COMPARED = ("solve_time", "solve_time_share", "run", "worker")


def sorted_samples(path) -> tuple[dict, np.ndarray]:
    """Root attributes and the samples table in index order."""
    attrs, samples, _ = read_results(path)
    return attrs, samples[np.argsort(samples["index"])]


def assert_same_results(path, reference) -> np.ndarray:
    """Every field of every sample of ``path`` equals ``reference``'s bit for bit (nan equal
    to nan), except :data:`NOT_COMPARED`; returns the samples of ``path``."""
    _, got = sorted_samples(path)
    _, want = sorted_samples(reference)
    assert got["index"].tolist() == want["index"].tolist()
    for field in got.dtype.names:
        if field in NOT_COMPARED:
            continue
        same = (np.array_equal(got[field], want[field], equal_nan=True)
                if got.dtype[field].kind == "f" else np.array_equal(got[field], want[field]))
        assert same, f"{field}: {got[field]} != {want[field]}"
    return got


def package_versions(path) -> dict[str, str]:
    """The package versions a results file records, without Python's own."""
    attrs, _ = sorted_samples(path)
    return {k: v for k, v in json.loads(attrs["versions"]).items() if k != "python"}
