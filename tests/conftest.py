"""Shared fixtures: seeded generators and small random valid processes."""

from __future__ import annotations

import numpy as np
import pytest

from workers.operators.scenario import Scenario
from workers.operators.validity import project_valid, white_noise


@pytest.fixture
def rng() -> np.random.Generator:
    return np.random.default_rng(20261202)


def random_valid_process(scenario: Scenario, rng: np.random.Generator, strength: float = 0.9):
    """A random valid W: a random Hermitian direction projected onto the valid subspace,
    made traceless and added to 1° with a weight ``strength`` of the distance to the PSD
    boundary (test helper; the documented ensembles live in workers.operators.ensembles)."""
    D = scenario.dim
    G = rng.standard_normal((D, D)) + 1j * rng.standard_normal((D, D))
    H = project_valid(scenario, G + G.conj().T)
    H -= np.trace(H).real / D * np.eye(D)
    noise = white_noise(scenario)
    lam = np.linalg.eigvalsh(H)[0]
    t = strength * noise[0, 0].real / abs(lam)
    return noise + t * H
