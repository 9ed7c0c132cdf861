"""The billiard-walk pieces of the Hilbert-Schmidt volume measure (workers/THEORY.md §8)."""

import numpy as np
import pytest

from workers.operators.basis import to_coefficients_stack
from workers.operators.ensembles import hs_volume
from workers.operators.hs_volume import (_hit, billiard_walk, default_tau, direction_coefficients,
                               directions, radial_fraction, subspace_dimension)
from workers.operators.masks import valid_mask
from workers.operators.scenario import Scenario
from workers.operators.validity import white_noise

BI = Scenario.from_dims([2, 2, 2, 2])
QQ = Scenario.from_dims([2, 3, 3, 2])


def test_subspace_dimension_is_the_counting_formula():
    """n = (allowed basis elements) - 1: 88 - 1 for two qubit parties (workers/THEORY.md §2,
    counting check), 1900 - 1 for three (workers/THEORY.md §4, counting check)."""
    assert subspace_dimension(BI) == 87
    assert subspace_dimension(Scenario.from_dims([2] * 6)) == 1899
    assert default_tau(BI) == pytest.approx(np.linalg.norm(white_noise(BI)))


@pytest.mark.parametrize("scenario", [BI, QQ], ids=["qubits", "qubit-qutrit"])
def test_directions_are_traceless_valid_and_invertible(scenario, rng):
    """H(g) lies in the traceless valid subspace (no identity or forbidden coefficient,
    workers/THEORY.md §2), is exactly Hermitian, has HS norm |g|/sqrt(D), and the coefficient
    map inverts it: direction_coefficients(H(g)) = g."""
    g = rng.standard_normal((5, subspace_dimension(scenario)))
    H = directions(scenario, g)
    c = to_coefficients_stack(H, scenario.subsystem_dims)
    assert np.abs(c[:, 0]).max() < 1e-12
    assert np.abs(c[:, ~valid_mask(scenario)]).max() < 1e-12
    assert np.array_equal(H, np.conj(np.swapaxes(H, -1, -2)))
    norms = np.sqrt(np.einsum("kij,kji->k", H, H).real)
    assert np.allclose(norms, np.linalg.norm(g, axis=1) / np.sqrt(scenario.dim))
    assert np.allclose(direction_coefficients(scenario, H[0]), g[0])


def test_hit_reflection_and_next_hit(rng):
    """The hit time is where the smallest eigenvalue reaches 0 (checked by eigvalsh); the
    vector returned spans the kernel there; the specular reflection keeps |d| and flips the
    sign of <w, d w> (it points inward); the next hit from the boundary point is again on the
    boundary with the segment inside PSD (workers/THEORY.md §8)."""
    n = subspace_dimension(BI)
    X = billiard_walk(BI, np.random.default_rng(1), 3).point
    g = rng.standard_normal(n)
    g *= np.sqrt(BI.dim) / np.linalg.norm(g)
    d = directions(BI, g[None])[0]
    t, w = _hit(d, X, False, 1.0)
    Y = X + t * d
    scale = np.linalg.eigvalsh(X)[-1]
    assert abs(np.linalg.eigvalsh(Y)[0]) < 1e-12 * scale
    assert np.linalg.norm(Y @ w) < 1e-10
    nu = direction_coefficients(BI, np.outer(w, w.conj()))
    g2 = g - 2 * (g @ nu) / (nu @ nu) * nu
    d2 = directions(BI, g2[None])[0]
    assert np.linalg.norm(g2) == pytest.approx(np.linalg.norm(g))
    assert (w.conj() @ d @ w).real < 0 < (w.conj() @ d2 @ w).real
    assert (w.conj() @ d2 @ w).real == pytest.approx(-(w.conj() @ d @ w).real)
    s, _ = _hit(d2, Y, True, 1.0)
    assert s > 0
    assert abs(np.linalg.eigvalsh(Y + s * d2)[0]) < 1e-10 * scale
    assert np.linalg.eigvalsh(Y + 0.5 * s * d2)[0] > 0


def test_walk_is_seeded_and_counts_reflections():
    """One generator state, one chain (workers/THEORY.md §8, seeding); every step of a
    two-qubit-party walk reflects at least once on average (tau = |1°| reaches the boundary)."""
    a = billiard_walk(BI, np.random.default_rng(7), 20)
    b = billiard_walk(BI, np.random.default_rng(7), 20)
    c = billiard_walk(BI, np.random.default_rng(8), 20)
    assert np.array_equal(a.point, b.point) and a.reflections == b.reflections
    assert not np.allclose(a.point, c.point)
    assert a.reflections > 20 and a.stays == 0


def test_steps_with_too_many_reflections_stay_put():
    """A step past the reflection limit leaves the point unchanged (the rule that keeps the
    kernel symmetric, workers/THEORY.md §8): with paths far longer than the body and no
    reflection allowed, every step stays at 1°."""
    walk = billiard_walk(BI, np.random.default_rng(2), 4, tau=100.0, max_reflections=0)
    assert walk.stays == 4 and walk.reflections == 4
    assert np.array_equal(walk.point, white_noise(BI))


def test_zero_steps_is_white_noise_and_radial_fraction_scales():
    """steps = 0 stays at 1° (r = 0); r is linear along a ray and 1 on the boundary."""
    s = hs_volume(BI, np.random.default_rng(0), steps=0)
    assert np.allclose(s.matrix, white_noise(BI)) and s.aux == 0.0
    W = hs_volume(BI, np.random.default_rng(0), steps=5).matrix
    r = radial_fraction(BI, W)
    noise = white_noise(BI)
    assert radial_fraction(BI, noise + 0.5 * (W - noise)) == pytest.approx(r / 2)
    edge = noise + (W - noise) / r
    assert radial_fraction(BI, edge) == pytest.approx(1.0)
    assert abs(np.linalg.eigvalsh(edge)[0]) < 1e-12


def test_bad_steps_are_refused():
    """A negative chain length is a one-line ValueError naming the parameter (common
    practice)."""
    with pytest.raises(ValueError, match="steps=-1"):
        hs_volume(BI, np.random.default_rng(0), steps=-1)
