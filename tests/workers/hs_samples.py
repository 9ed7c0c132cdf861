"""Shared, cached Hilbert-Schmidt-volume samples for the measure tests (one draw per session).

Seeds follow the sweep's rule: sample i uses ``SeedSequence(root, spawn_key=(i,))``.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from workers.operators.ensembles import hs_volume
from workers.operators.scenario import Scenario

N_SAMPLES = 2000
TEST_STEPS = 24                        # billiard steps per sample in the default-suite tests (mixed by ~12)
TWO_QUBIT_STATES = (2, 1, 2, 1)        # A_I, B_I qubits, no outputs: W is any 2-qubit state
QUBIT_CHANNELS = (1, 2, 2, 1)          # A_O -> B_I: W is the Choi operator of a qubit channel


@lru_cache(maxsize=None)
def samples(dims: tuple[int, ...], n: int = N_SAMPLES, steps: int | None = TEST_STEPS,
            root: int = 17) -> tuple[np.ndarray, np.ndarray]:
    """(operators (n, D, D), radial fractions (n,)) of ``hs_volume``."""
    scenario = Scenario.from_dims(list(dims))
    drawn = [hs_volume(scenario, np.random.default_rng(np.random.SeedSequence(
        root, spawn_key=(i,))), steps) for i in range(n)]
    return np.array([s.matrix for s in drawn]), np.array([s.aux for s in drawn])


def partial_transpose(W: np.ndarray) -> np.ndarray:
    """Partial transpose on the second qubit of a stack of two-qubit operators."""
    return W.reshape(-1, 2, 2, 2, 2).transpose(0, 1, 4, 3, 2).reshape(-1, 4, 4)


def ginibre_states(n: int, N: int, seed: int) -> np.ndarray:
    """n Hilbert-Schmidt-distributed N x N density matrices G G^dagger / Tr(G G^dagger), G an
    N x N complex Ginibre matrix (Zyczkowski & Sommers, J. Phys. A 34, 7111 (2001)): an
    independent construction of the same measure."""
    rng = np.random.default_rng(seed)
    G = rng.standard_normal((n, N, N)) + 1j * rng.standard_normal((n, N, N))
    R = G @ np.conj(np.swapaxes(G, -1, -2))
    return R / np.trace(R, axis1=1, axis2=2).real[:, None, None]
