"""The Hilbert-Schmidt (Lebesgue) volume measure on the valid process operators.

The valid process operators of a scenario form a convex body K = {W >= 0} in the affine space
1° + V, where V is the *traceless valid subspace*: Hermitian, traceless, L_V(H) = H
(workers/THEORY.md §2).  Its real dimension n is the number of allowed product-basis elements
minus one.  ``hs_volume`` samples K with density proportional to the HS (Lebesgue) volume of
1° + V by the billiard walk (Gryazina & Polyak 2014; workers/THEORY.md §8), the chain started
at 1° and run for ``steps`` steps.  One step from X:

1. draw a direction d uniformly on the HS unit sphere of V: d = H(g)/|H(g)| with
   H(g) = (1/D) sum_alpha g_alpha sigma_alpha over the allowed non-identity elements and
   g_alpha i.i.d. standard normal.  The product basis has Tr(sigma_alpha sigma_beta) =
   D delta_alpha_beta for every alpha (workers/operators/basis.py), so g -> H(g) is 1/sqrt(D) times
   an isometry of R^n onto V, H(g) is an isotropic Gaussian in V and d is uniform;
2. draw a path length L ~ Exp(mean tau), tau = |1°|_HS unless given;
3. move along d; on hitting the PSD boundary at Y (null vector w: Y w = 0) reflect specularly
   inside V, d <- d - 2 <d, N> N / <N, N> with N = P_V(w w^dagger) the boundary normal;
   continue until the length L is used up.  The hit time from Y along d is -1/mu_min for the
   pencil d v = mu Y v (LAPACK zhegvx, the lowest pair only; its vector is w).  A step with
   more than ``max_reflections`` reflections leaves X where it was.

The billiard kernel is symmetric (reversibility of billiard trajectories), so the uniform law
on K is its stationary law; every sample is its own chain from its own generator, so samples
are independent, and ``steps`` sets how close each one's law is to the uniform one (mixing
evidence in workers/THEORY.md §8).  ``aux`` is the radial fraction r = |W - 1°| / |W* - 1°|,
W* the boundary point on the ray from 1° through W: under the uniform law P(r <= x) = x^n for
every direction (checked by the tests).

Why not "uniform direction from 1°, radius t_max U^(1/n)": that law has volume density
proportional to t_max(direction)^(-n), not constant, unless K is a ball (workers/THEORY.md §8).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.linalg import lapack

from .basis import from_coefficients_stack, to_coefficients
from .masks import valid_mask
from .scenario import Scenario
from .validity import project_valid, white_noise

DEFAULT_STEPS = 100             # billiard steps per sample (workers/THEORY.md §8)
MAX_REFLECTIONS = 5000          # a step with more reflections stays put (keeps the symmetry)
SYNTHESIS_MAX_ENTRIES = 100_000  # up to this size, directions come from a stored matrix
SHIFT = 1e-9                    # first base shift (units of tau) off a boundary point


@lru_cache(maxsize=32)
def direction_indices(scenario: Scenario) -> np.ndarray:
    """Flat product-basis indices of the allowed non-identity elements (a basis of V)."""
    mask = valid_mask(scenario).copy()
    mask[0] = False
    out = np.flatnonzero(mask)
    out.setflags(write=False)
    return out


def subspace_dimension(scenario: Scenario) -> int:
    """n: the real dimension of the traceless valid subspace V (and of the body K)."""
    return int(direction_indices(scenario).size)


def default_tau(scenario: Scenario) -> float:
    """The mean path length: |1°|_HS = sqrt(D) / d_I, the size of the white-noise process."""
    return float(np.sqrt(scenario.dim) / scenario.d_in_total)


class _Geometry:
    """Per-scenario constants of the walk: D, n, the basis indices of V and, for small
    scenarios, the matrix of g -> vec(H(g)) (one product instead of one tensor contraction
    per subsystem)."""

    def __init__(self, scenario: Scenario) -> None:
        self.scenario, self.dims = scenario, scenario.subsystem_dims
        self.D, self.idx = scenario.dim, direction_indices(scenario)
        self.n = int(self.idx.size)
        self.S = None
        if self.n * self.D ** 2 <= SYNTHESIS_MAX_ENTRIES:
            self.S = self._by_contraction(np.eye(self.n)).reshape(self.n, self.D ** 2)

    def _by_contraction(self, g: np.ndarray) -> np.ndarray:
        c = np.zeros((g.shape[0], self.D ** 2))
        c[:, self.idx] = g
        return from_coefficients_stack(c, self.dims)

    def directions(self, g: np.ndarray) -> np.ndarray:
        H = self._by_contraction(g) if self.S is None else (g @ self.S).reshape(-1, self.D,
                                                                               self.D)
        return (H + np.conj(np.swapaxes(H, -1, -2))) / 2

    def coefficients(self, A: np.ndarray) -> np.ndarray:
        if self.S is None:
            return to_coefficients(A, self.dims)[self.idx]
        return self.D * (self.S @ A.T.reshape(-1)).real


@lru_cache(maxsize=32)
def _geometry(scenario: Scenario) -> _Geometry:
    return _Geometry(scenario)


def directions(scenario: Scenario, g: np.ndarray) -> np.ndarray:
    """H(g_k) = (1/D) sum_alpha g[k, alpha] sigma_alpha for each row of g (shape (k, n)),
    exactly Hermitian.  <H(g), H(g')>_HS = g . g' / D (module doc)."""
    geo = _geometry(scenario)
    g = np.atleast_2d(np.asarray(g, dtype=float))
    if g.shape[1] != geo.n:
        raise ValueError(f"direction coefficients have {g.shape[1]} columns, expected "
                         f"n={geo.n} for {scenario.describe()}")
    return geo.directions(g)


def direction_coefficients(scenario: Scenario, A: np.ndarray) -> np.ndarray:
    """g with H(g) = P_V(A), the HS-orthogonal projection of a Hermitian A onto V:
    g_alpha = Re Tr(sigma_alpha A) over the allowed non-identity elements."""
    return _geometry(scenario).coefficients(np.asarray(A))


@dataclass(frozen=True)
class Walk:
    """A chain's end point and its bookkeeping: reflections, steps that stayed put (too many
    reflections, or a boundary corner the shifted base could not leave)."""

    point: np.ndarray
    reflections: int
    stays: int


def _lowest_pair(d: np.ndarray, B: np.ndarray) -> tuple[float, np.ndarray] | None:
    """Lowest eigenpair of the pencil d v = mu B v (None when B is not positive definite)."""
    w, z, m, _, info = lapack.zhegvx(d, B, itype=1, jobz="V", range="I", il=1, iu=1)
    if info != 0 or m < 1:
        return None
    return float(w[0]), z[:, 0]


def _hit(d: np.ndarray, Y: np.ndarray, on_boundary: bool, tau: float
         ) -> tuple[float, np.ndarray] | None:
    """Distance along d from Y to the PSD boundary and the null vector there.

    From a boundary point the pencil is taken at Y + c d (c small, d points inward), which
    lies on the same line, so the distance is c - 1/mu_min exactly."""
    c = 0.0 if not on_boundary else SHIFT * tau
    while c <= 1e-4 * tau:
        pair = _lowest_pair(d, Y + c * d)
        if pair is not None and pair[0] < 0:
            return c - 1.0 / pair[0], pair[1]
        c = SHIFT * tau if c == 0.0 else 10.0 * c
    return None


def billiard_walk(scenario: Scenario, rng: np.random.Generator, steps: int,
                  tau: float | None = None, max_reflections: int = MAX_REFLECTIONS) -> Walk:
    """The billiard walk of the module doc from 1° for ``steps`` steps.

    Per step the generator draws ``standard_normal(n)`` (the direction) then
    ``standard_exponential()`` (the length, times tau).
    """
    if steps < 0:
        raise ValueError(f"hs_volume: steps={steps!r}, expected an integer >= 0")
    geo = _geometry(scenario)
    n, D = geo.n, geo.D
    tau = default_tau(scenario) if tau is None else float(tau)
    X = white_noise(scenario).copy()
    reflections = stays = 0
    if n == 0:
        return Walk(X, 0, 0)
    unit = np.sqrt(D)
    for _ in range(steps):
        g = rng.standard_normal(n)
        g *= unit / np.linalg.norm(g)                 # |H(g)|_HS = 1
        left = tau * rng.standard_exponential()
        Y, d, k, on_boundary = X, geo.directions(g[None])[0], 0, False
        while True:
            hit = _hit(d, Y, on_boundary, tau)
            if hit is None or k > max_reflections:
                Y, stays = X, stays + 1
                break
            t, w = hit
            if left < t:
                Y = Y + left * d
                break
            Y, left = Y + t * d, left - t
            nu = geo.coefficients(np.outer(w, w.conj()))
            g = g - 2.0 * (g @ nu) / (nu @ nu) * nu    # specular reflection in V
            d, k, on_boundary = geo.directions(g[None])[0], k + 1, True
        reflections += k
        X = Y
    return Walk(X, reflections, stays)


def radial_fraction(scenario: Scenario, W: np.ndarray) -> float:
    """r = |W - 1°| / |W* - 1°| with W* the PSD boundary on the ray from 1° through W.

    1° = 1/d_I, so W* = 1° + (W - 1°)/r with r = -d_I lambda_min(W - 1°) (0 at W = 1°).
    """
    lam = float(np.linalg.eigvalsh(W - white_noise(scenario))[0])
    return max(0.0, -lam * scenario.d_in_total)


def finish(scenario: Scenario, X: np.ndarray) -> np.ndarray:
    """A chain's end point with the rounding drift off the valid affine space removed."""
    W = project_valid(scenario, X)
    W = W + (scenario.d_out_total - np.trace(W).real) / scenario.dim * np.eye(scenario.dim)
    return (W + W.conj().T) / 2
