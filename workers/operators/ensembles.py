"""Random ensembles of process operators (workers/THEORY.md §8), each with its measure named.

Every sampler is a pure function ``sampler(scenario, rng, **params) -> Sample`` taking a
:class:`~workers.operators.scenario.Scenario` and a seeded :class:`numpy.random.Generator`; the same
generator state gives the same operator.  ``Sample.aux`` carries the one number that
characterises the draw (documented per sampler), so a sweep can store it next to the verdict.

Measures
--------
``valid_direction``
    H = (1/D) sum_alpha g_alpha sigma_alpha over the *allowed, non-identity* product-basis
    elements alpha of the valid subspace (workers/THEORY.md §2), g_alpha i.i.d. standard normal;
    H is Hermitian, traceless and satisfies L_V(H) = H.  The PSD boundary along H is
    t_max = (1/d_I) / (-lambda_min(H)) (exact: 1° is proportional to the identity), and
    W = 1° + u t_max H.  u is fixed, or uniform on [0, 1]; aux = u.  u = 1 lies on the boundary.
``wishart``
    G is a D x k complex Ginibre matrix (i.i.d. standard complex normal entries), X = G G^dagger
    (complex Wishart, rank k); X is projected onto the valid subspace (zeroing forbidden
    coefficients) and rescaled to trace d_O, giving X_v.  Then W = (1 - q) X_v + q 1° with the
    smallest q in [0, 1] making W PSD: q = max(0, -lambda / (1/d_I - lambda)), lambda =
    lambda_min(X_v).  aux = q.
``hs_volume``
    Uniform with respect to Hilbert-Schmidt (Lebesgue) volume on the valid set {W >= 0,
    Tr W = d_O, L_V(W) = W}, by a billiard walk from 1° of ``steps`` steps along
    HS-isotropic directions of the traceless valid subspace (:mod:`workers.operators.hs_volume`,
    workers/THEORY.md §8; default ``steps`` = 100).
    aux = the radial fraction r of W (distance from 1° over the distance to the PSD boundary
    along the same ray), whose law under the uniform measure is P(r <= x) = x^n.
``comb``
    A causally ordered comb of Haar-random isometries with a memory of ``memory_dim``
    (:func:`workers.operators.families.random_comb`); the order is given or uniform over the N!
    permutations.  Causally separable by construction.  aux = index of the order in
    lexicographic order of permutations.
``comb_mixture``
    sum_j w_j C_j of ``n_combs`` independent ``comb`` draws (each its own uniform order) with
    weights w ~ Dirichlet(1, ..., 1).  Causally separable (a mixture of fixed orders).  aux = the
    largest weight.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from .basis import from_coefficients, to_coefficients
from .families import random_comb
from .hs_volume import DEFAULT_STEPS, billiard_walk, finish, radial_fraction
from .masks import valid_mask
from .scenario import Scenario
from .validity import white_noise


@dataclass(frozen=True)
class Sample:
    """A sampled operator and the number that characterises the draw (see module doc)."""

    matrix: np.ndarray
    aux: float


def _hermitian_from(scenario: Scenario, coefficients: np.ndarray) -> np.ndarray:
    return from_coefficients(coefficients, scenario.subsystem_dims)


def valid_direction(scenario: Scenario, rng: np.random.Generator, u: float | None = None
                    ) -> Sample:
    """1° + u t_max H along a Gaussian traceless valid direction H (module doc).

    Parameters
    ----------
    u
        Fraction of the distance to the PSD boundary in [0, 1]; None draws it uniformly.
    """
    if u is not None and not 0.0 <= u <= 1.0:
        raise ValueError(f"valid_direction: u={u!r}, expected a number in [0, 1] or None")
    mask = valid_mask(scenario).copy()
    mask[0] = False  # the identity: the direction is traceless
    c = np.zeros(mask.shape)
    c[mask] = rng.standard_normal(int(mask.sum()))
    H = _hermitian_from(scenario, c)
    frac = float(rng.uniform()) if u is None else float(u)
    lam = float(np.linalg.eigvalsh(H)[0])
    if lam >= 0:  # only when the valid subspace has no traceless direction (all dims 1)
        return Sample(white_noise(scenario), frac)
    t_max = (1.0 / scenario.d_in_total) / (-lam)
    return Sample(white_noise(scenario) + frac * t_max * H, frac)


def wishart(scenario: Scenario, rng: np.random.Generator, rank: int | None = None) -> Sample:
    """Projected complex Wishart operator mixed with 1° just enough to be PSD (module doc).

    Parameters
    ----------
    rank
        Columns k of the Ginibre matrix, 1 <= k (default D, full rank).
    """
    D = scenario.dim
    k = D if rank is None else int(rank)
    if k < 1:
        raise ValueError(f"wishart: rank={rank!r}, expected an integer >= 1")
    G = rng.standard_normal((D, k)) + 1j * rng.standard_normal((D, k))
    c = to_coefficients(G @ G.conj().T, scenario.subsystem_dims)
    c[~valid_mask(scenario)] = 0.0
    X = _hermitian_from(scenario, c)
    X *= scenario.d_out_total / np.trace(X).real
    lam = float(np.linalg.eigvalsh(X)[0])
    inv = 1.0 / scenario.d_in_total
    q = 0.0 if lam >= 0 else -lam / (inv - lam)
    return Sample((1 - q) * X + q * white_noise(scenario), q)


def hs_volume(scenario: Scenario, rng: np.random.Generator, steps: int | None = None
              ) -> Sample:
    """Hilbert-Schmidt-uniform valid process operator by the billiard walk (module doc).

    Parameters
    ----------
    steps
        Billiard-walk steps from 1°, >= 0 (None: :data:`workers.operators.hs_volume.DEFAULT_STEPS`).
    """
    n_steps = DEFAULT_STEPS if steps is None else int(steps)
    if n_steps < 0:
        raise ValueError(f"hs_volume: steps={steps!r}, expected an integer >= 0 or None")
    W = finish(scenario, billiard_walk(scenario, rng, n_steps).point)
    return Sample(W, radial_fraction(scenario, W))


def _orders(n: int) -> list[tuple[int, ...]]:
    return list(itertools.permutations(range(n)))


def comb(scenario: Scenario, rng: np.random.Generator, order: Sequence[int] | None = None,
         memory_dim: int = 2) -> Sample:
    """A Haar-random causally ordered comb, of the given or a uniformly random order."""
    orders = _orders(scenario.n_parties)
    if order is None:
        idx = int(rng.integers(len(orders)))
    else:
        key = tuple(int(k) for k in order)
        if key not in orders:
            raise ValueError(f"comb: order={list(order)}, expected a permutation of "
                             f"0..{scenario.n_parties - 1}")
        idx = orders.index(key)
    return Sample(random_comb(scenario, orders[idx], rng, memory_dim=memory_dim), float(idx))


def comb_mixture(scenario: Scenario, rng: np.random.Generator, n_combs: int = 2,
                 memory_dim: int = 2) -> Sample:
    """Dirichlet(1..1) mixture of ``n_combs`` random combs of random orders (module doc)."""
    if n_combs < 1:
        raise ValueError(f"comb_mixture: n_combs={n_combs!r}, expected an integer >= 1")
    weights = rng.dirichlet(np.ones(n_combs))
    W = sum(w * comb(scenario, rng, None, memory_dim).matrix for w in weights)
    return Sample(W, float(weights.max()))


SAMPLERS: dict[str, Callable[..., Sample]] = {
    "valid_direction": valid_direction,
    "wishart": wishart,
    "hs_volume": hs_volume,
    "comb": comb,
    "comb_mixture": comb_mixture,
}

SEPARABLE_BY_CONSTRUCTION = ("comb", "comb_mixture")


def get_sampler(measure: str) -> Callable[..., Sample]:
    """The sampler for ``measure``; the error lists the known measures."""
    if measure not in SAMPLERS:
        raise ValueError(f"measure={measure!r}, expected one of {sorted(SAMPLERS)}")
    return SAMPLERS[measure]
