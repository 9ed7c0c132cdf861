"""A matrix-free first-order solver for the random robustness, in the product basis.

For four qubit parties the conic matrix A of :mod:`workers.conic` would hold ~36 million
nonzeros (every null-space parameter is a Pauli string with 128 entries in each leaf it
touches), which with SCS's copies and factorisation does not fit a laptop.  Here A is never
formed.  The problem

    minimise r   s.t.  W_j ⪰ 0,   (W_j) in the affine set of the structure for W + r 1°

is split into the PSD cone K (one eigendecomposition per leaf) and the affine set, whose
projection is exact and cheap in the product basis: per basis element alpha the leaves'
coefficients only have to satisfy the small system C_p x = h_p t_alpha of its pattern
(:mod:`workers.layout`), a weighted least-squares projection precomputed once per pattern.
The splitting is Douglas-Rachford (ADMM; Eckstein & Bertsekas, Math. Program. 55, 293
(1992)) on s = X + U, accelerated by type-II Anderson acceleration with a safeguard (Walker &
Ni, SIAM J. Numer. Anal. 49, 1715 (2011); as SCS does, O'Donoghue, SIAM J. Optim. 31, 1999
(2021)), with the penalty rho balanced between the residuals.

At a fixed point, Y = Pi_K(s) are the leaves and S = rho (Y - s) ⪰ 0 the dual PSD blocks
(the causal witness, Araujo et al., NJP 17, 102001 (2015)); both go through the same exact
certificates as every other solver's.  Memory is a few copies of the leaves.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from .basis import from_coefficients_stack, to_coefficients_stack
from .layout import Layout
from .leaf_spaces import selection


@dataclass(frozen=True)
class AdmmSolution:
    """Leaves, dual blocks (reduced spaces) and the accuracy figures of one solve."""

    r: float
    leaves: tuple[np.ndarray, ...]
    duals: tuple[np.ndarray, ...]
    pobj: float
    dobj: float
    res_pri: float
    res_dual: float
    gap: float
    iterations: int
    converged: bool
    solve_time: float


class Coordinates:
    """Leaves as stacks of reduced matrices and as coefficient rows sorted by pattern.

    Leaves whose reduced spaces have the same sequence of kept dimensions form one stack (for
    four qubit parties: all 24 leaves are 7-qubit matrices), so eigendecompositions and basis
    changes run on whole stacks.  Coefficient rows are kept in pattern order (``order``
    sorts the D^2 basis elements by pattern code), so each pattern's projection reads a
    contiguous slice.  Row convention: W_j = (1/D) sum_alpha c_j,alpha sigma_alpha.
    """

    def __init__(self, layout: Layout) -> None:
        dims = layout.scenario.subsystem_dims
        self.D, self.m = layout.scenario.dim, layout.n_blocks
        self.sizes = layout.block_sizes
        self.order = np.argsort(layout.codes, kind="stable")
        rank = np.empty_like(self.order)
        rank[self.order] = np.arange(len(self.order))
        groups: dict[tuple[int, ...], list[int]] = {}
        for j, small in enumerate(layout.spaces):
            groups.setdefault(tuple(d for d in small if d > 1), []).append(j)
        self.stacks = []  # (kept dims, leaf indices, sorted positions (k, n^2), scale)
        for kept, members in groups.items():
            pos = np.array([rank[selection(dims, layout.spaces[j]).indices] for j in members])
            n = int(np.prod(kept)) if kept else 1
            self.stacks.append((kept or (1,), np.array(members), pos, n))

    def zeros(self) -> list[np.ndarray]:
        return [np.zeros((len(mem), n, n), dtype=complex) for _, mem, _, n in self.stacks]

    def to_rows(self, mats: list[np.ndarray]) -> np.ndarray:
        out = np.zeros((self.m, self.D ** 2))
        for (kept, mem, pos, n), X in zip(self.stacks, mats):
            out[mem[:, None], pos] = to_coefficients_stack(X, kept) * (self.D / n)
        return out

    def to_mats(self, rows: np.ndarray) -> list[np.ndarray]:
        return [from_coefficients_stack(rows[mem[:, None], pos] * (n / self.D), kept)
                for kept, mem, pos, n in self.stacks]

    def blocks(self, mats: list[np.ndarray]) -> list[np.ndarray]:
        """Per leaf block, its reduced matrix (undoing the stacking)."""
        out: list[np.ndarray] = [np.zeros(0)] * self.m
        for (_, mem, _, _), X in zip(self.stacks, mats):
            for k, j in enumerate(mem):
                out[j] = X[k]
        return out


class AffineProjector:
    """prox of f(X) = r + I_A(X, r): the weighted projection onto the structure's affine set.

    The Frobenius norm of the leaves is sum_j w_j |c_j|^2 with w_j = n_j / D^2.  Per
    pattern with null basis N the feasible coefficients are part * t + N z, and the weighted
    projection of v is c = G v + g t with G = N (N^T W N)^-1 N^T W and g = (1 - G) part.
    The identity pattern carries r (t_0 = w_0 + r noise_0) and is solved with it.
    """

    def __init__(self, layout: Layout, noise: np.ndarray, coords: Coordinates) -> None:
        D = layout.scenario.dim
        self.weights = np.array(layout.block_sizes, dtype=float) / D ** 2
        Wt = np.diag(self.weights)
        codes = layout.codes[coords.order]
        bounds = np.flatnonzero(np.diff(codes)) + 1
        starts, ends = np.r_[0, bounds], np.r_[bounds, len(codes)]
        self.groups = []  # (slice, G, g) on the pattern-sorted coefficient axis
        for a, b in zip(starts, ends):
            sysm = layout.systems[int(codes[a])]
            N = sysm.null
            G = N @ np.linalg.pinv(N.T @ Wt @ N) @ N.T @ Wt if N.shape[1] else \
                np.zeros((len(self.weights),) * 2)
            self.groups.append((slice(a, b), G, sysm.particular - G @ sysm.particular))
        ident = layout.systems[0]  # alpha = 0 sorts first: variables y = (r, z)
        self.part0 = ident.particular
        self.B0 = np.column_stack([ident.particular * noise[0], ident.null])

    def prox(self, v: np.ndarray, w: np.ndarray, rho: float) -> tuple[np.ndarray, float]:
        """argmin r + (rho/2) sum_j w_j |c_j - v_j|^2 over the affine set: (c, r)."""
        c = np.empty_like(v)
        for sl, G, g in self.groups[1:]:
            c[:, sl] = G @ v[:, sl] + g[:, None] * w[sl]
        Wt = self.weights
        a = self.part0 * w[0]
        M = self.B0.T @ (Wt[:, None] * self.B0)
        rhs = self.B0.T @ (Wt * (v[:, 0] - a))
        rhs[0] -= 1.0 / rho
        y = np.linalg.lstsq(M, rhs, rcond=None)[0]
        c[:, 0] = a + self.B0 @ y
        return c, float(y[0])


def _psd_split(s: list[np.ndarray]) -> list[np.ndarray]:
    """Pi_K(s) for every stack (eigenvalues clipped at 0)."""
    out = []
    for X in s:
        lam, V = np.linalg.eigh((X + np.swapaxes(X, 1, 2).conj()) / 2)
        out.append((V * np.maximum(lam, 0.0)[:, None, :]) @ np.swapaxes(V, 1, 2).conj())
    return out


def _flat(mats: list[np.ndarray]) -> np.ndarray:
    return np.concatenate([m.view(float).ravel() for m in mats])


def _unflat(v: np.ndarray, like: list[np.ndarray]) -> list[np.ndarray]:
    out, k = [], 0
    for m in like:
        size = 2 * m.size
        out.append(v[k:k + size].view(complex).reshape(m.shape).copy())
        k += size
    return out


class _Anderson:
    """Type-II Anderson acceleration of a fixed-point map, memory ``m`` (ring buffers)."""

    def __init__(self, m: int, size: int) -> None:
        self.m, self.n = m, 0
        self.dS, self.dG = np.zeros((m, size)), np.zeros((m, size))
        self.prev: tuple[np.ndarray, np.ndarray] | None = None

    def reset(self) -> None:
        self.n, self.prev = 0, None

    def step(self, s: np.ndarray, g: np.ndarray) -> np.ndarray:
        """Next point from s and its residual g = T(s) - s."""
        if self.prev is not None:
            k = self.n % self.m
            np.subtract(s, self.prev[0], out=self.dS[k])
            np.subtract(g, self.prev[1], out=self.dG[k])
            self.n += 1
        self.prev = (s, g)
        used = min(self.n, self.m)
        if used == 0:
            return s + g
        dG, dS = self.dG[:used], self.dS[:used]
        gram = dG @ dG.T
        gram += 1e-10 * np.trace(gram) / used * np.eye(used)
        gamma = np.linalg.solve(gram, dG @ g)
        return s + g - (dS + dG).T @ gamma


CHECK_EVERY = 10  # iterations between evaluations of the stopping criteria
REBALANCE_EVERY = 50  # iterations between adaptations of rho


def solve_random(layout: Layout, w: np.ndarray, noise: np.ndarray, eps_abs: float = 1e-6,
                 eps_rel: float = 1e-6, max_iters: int = 20_000, time_limit: float | None = None,
                 memory: int = 8, projector: AffineProjector | None = None,
                 coords: Coordinates | None = None) -> AdmmSolution:
    """Random robustness of the process with coefficients ``w`` (see module docstring).

    ``noise`` are the coefficients of 1°; ``projector`` and ``coords`` may be passed to reuse
    the per-pattern projections across processes of one scenario.
    """
    t0 = time.perf_counter()
    coords = coords or Coordinates(layout)
    proj = projector or AffineProjector(layout, noise, coords)
    w = w[coords.order]
    rho = 1.0
    s = coords.zeros()
    aa = _Anderson(memory, sum(2 * x.size for x in s))
    best = None
    for it in range(1, max_iters + 1):
        Y = _psd_split(s)
        c, r = proj.prox(coords.to_rows([2 * y - x for y, x in zip(Y, s)]), w, rho)
        X = coords.to_mats(c)
        g = [x - y for x, y in zip(X, Y)]
        res = float(np.sqrt(sum(np.vdot(d, d).real for d in g)))
        if best is not None and res > 2.0 * best[0] and it < max_iters:
            # the accelerated point made things worse: back to the last plain step
            aa.reset()
            s = best[1]
            continue
        best = (res, [si + gi for si, gi in zip(s, g)])
        out_of_time = time_limit is not None and time.perf_counter() - t0 > time_limit
        if it % CHECK_EVERY == 0 or it == max_iters or out_of_time:
            fig = _figures(layout, coords, w, Y, s, r, rho, res)
            done = fig["done"](eps_abs, eps_rel)
            if done or out_of_time or it == max_iters:
                return _solution(coords, fig, Y, s, rho, it, done, t0)
            if it % REBALANCE_EVERY == 0:
                rho, s = _rebalance(fig, rho, Y, s, aa)
        s = _unflat(aa.step(_flat(s), _flat(g)), s)
    raise AssertionError("unreachable: the last iteration returns")


def _figures(layout, coords, w, Y, s, r, rho, res) -> dict:
    """Residuals and objectives of the current iterate (SCS-style figures)."""
    S = [rho * (y - x) for y, x in zip(Y, s)]
    dual = coords.to_rows(S)
    P = layout.particular[:, coords.order]
    sizes = np.array(coords.sizes, dtype=float)[:, None]
    dobj = -float(np.sum(P * dual * w[None, :] * sizes) / coords.D ** 2)
    norm_y = float(np.sqrt(sum(np.vdot(y, y).real for y in Y)))
    norm_s = float(np.sqrt(sum(np.vdot(x, x).real for x in S)))
    gap = abs(r - dobj)

    def done(eps_abs: float, eps_rel: float) -> bool:
        return (res <= eps_abs + eps_rel * norm_y and rho * res <= eps_abs + eps_rel * norm_s
                and gap <= eps_abs + eps_rel * max(abs(r), abs(dobj)))

    return {"r": r, "dobj": dobj, "res_pri": res, "res_dual": rho * res, "gap": gap,
            "done": done, "norm_y": norm_y, "norm_s": norm_s}


def _rebalance(fig, rho, Y, s, aa):
    """Residual balancing: scale rho by 2 when one relative residual is 10x the other."""
    rel_p = fig["res_pri"] / max(fig["norm_y"], 1e-300)
    rel_d = fig["res_dual"] / max(fig["norm_s"], 1e-300)
    factor = 2.0 if rel_p > 10 * rel_d else 0.5 if rel_d > 10 * rel_p else 1.0
    if factor == 1.0:
        return rho, s
    aa.reset()
    # s = Y + U with U the scaled dual lambda / rho: keep lambda, rescale U
    return rho * factor, [y + (x - y) / factor for y, x in zip(Y, s)]


def _solution(coords, fig, Y, s, rho, it, converged, t0) -> AdmmSolution:
    duals = [rho * (y - x) for y, x in zip(Y, s)]
    return AdmmSolution(fig["r"], tuple(coords.blocks(Y)), tuple(coords.blocks(duals)),
                        fig["r"], fig["dobj"], fig["res_pri"], fig["res_dual"], fig["gap"], it,
                        converged, time.perf_counter() - t0)
