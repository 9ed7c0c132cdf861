"""Local-unitary symmetry algebras of process operators (workers/sdp/symmetry.py)."""

import numpy as np

from tests.conftest import random_valid_process
from workers.operators.families import (lugano_process, ocb_process, quantum_switch,
                                       white_noise_mixture)
from workers.operators.scenario import Scenario
from workers.sdp.symmetry import find_local_symmetry, local_operator


def _full(sym, gen):
    return sum(local_operator(h, sym.dims, s) for s, h in enumerate(gen) if np.any(h))


def test_ocb_symmetry_is_the_three_z_rotations():
    """OCB = 1/4 [1 + (Z^AO Z^BI + Z^AI X^BI Z^BO)/sqrt2] (Oreshkov, Costa, Brukner 2012)
    commutes with Z on A_I, A_O and B_O (each Z term is untouched), and with nothing on B_I
    (it carries both Z and X): a 3-dimensional abelian algebra, nothing on B_I."""
    p = ocb_process()
    sym = find_local_symmetry(p.scenario.subsystem_dims, p.matrix)
    assert sym is not None and sym.dimension == 3
    bi = 3  # subsystem order P, A_I, A_O, B_I, B_O, F
    assert all(not np.any(gen[bi]) for gen in sym.generators)
    Z = np.diag([1.0, -1.0])
    for s in (1, 2, 4):  # each Z rotation lies in the algebra
        H = local_operator(Z, sym.dims, s)
        basis = np.array([_full(sym, g).ravel() for g in sym.generators]).T
        coef = np.linalg.lstsq(basis, H.ravel(), rcond=None)[0]
        assert np.allclose(basis @ coef, H.ravel(), atol=1e-10)


def test_generators_commute_with_the_process():
    """Every generator found commutes with W to rounding, for the quantum switch (Chiribella
    et al., PRA 88, 022318 (2013)) and the Lugano process (Baumeler & Wolf 2016)."""
    for p in (quantum_switch(), lugano_process()):
        sym = find_local_symmetry(p.scenario.subsystem_dims, p.matrix)
        assert sym is not None and sym.residual < 1e-12
        for gen in sym.generators:
            H = _full(sym, gen)
            assert np.linalg.norm(H @ p.matrix - p.matrix @ H) < 1e-11
            assert abs(sum(np.trace(h @ h).real for h in gen) - 1) < 1e-12


def test_lugano_is_invariant_under_every_diagonal_phase():
    """A diagonal W (the Lugano process is classical) commutes with Z on all six qubits."""
    p = lugano_process()
    assert find_local_symmetry(p.scenario.subsystem_dims, p.matrix).dimension == 6


def test_random_processes_and_near_symmetries_are_refused(rng):
    """A random valid process has no symmetry; neither has the switch perturbed by 1e-7
    (the reduction is used only when the symmetry holds to rounding accuracy)."""
    s = Scenario.from_dims([2, 2, 2, 2])
    assert find_local_symmetry(s.subsystem_dims, random_valid_process(s, rng)) is None
    p = quantum_switch()
    G = rng.standard_normal(p.matrix.shape) + 1j * rng.standard_normal(p.matrix.shape)
    W = p.matrix + 1e-7 * (G + G.conj().T)
    assert find_local_symmetry(p.scenario.subsystem_dims, W) is None


def test_key_names_the_algebra_not_the_process():
    """White noise added to OCB keeps its symmetry: same algebra, same key, equal objects."""
    p = ocb_process()
    dims = p.scenario.subsystem_dims
    a = find_local_symmetry(dims, p.matrix)
    b = find_local_symmetry(dims, white_noise_mixture(p.scenario, p.matrix, 0.7))
    assert a.key == b.key and a == b and hash(a) == hash(b)


def test_screen_agrees_with_the_full_search(rng):
    """may_be_symmetric is False exactly where find_local_symmetry finds nothing (on a
    stack mixing random processes and symmetric named ones)."""
    from workers.sdp.symmetry import may_be_symmetric

    s = Scenario.from_dims([2, 2, 2, 2])
    Ws = [random_valid_process(s, rng), ocb_process().matrix, random_valid_process(s, rng),
          white_noise_mixture(s, ocb_process().matrix, 0.5)]
    screen = may_be_symmetric(s.subsystem_dims, Ws)
    full = [find_local_symmetry(s.subsystem_dims, W) is not None for W in Ws]
    assert list(screen) == full == [False, True, False, True]
