"""A batched matrix-free splitting solver for the robustness SDPs, in the product basis.

The problem ``minimise objective(X)  s.t.  X in K (PSD blocks), X in A (the structure's
affine set for the process)`` is split into the cone K (one eigendecomposition per block)
and the affine set, whose weighted projection is exact and cheap per support pattern
(:mod:`workers.sdp.splitting_data`).  The iteration is Douglas-Rachford (ADMM; Eckstein &
Bertsekas, Math. Program. 55, 293 (1992)) on ``s = X + U``:

    Y = Pi_K(s),   X = prox_{f/rho}(2Y - s),   s <- s + X - Y,

accelerated by type-II Anderson acceleration with a safeguard (Walker & Ni, SIAM J. Numer.
Anal. 49, 1715 (2011); as in SCS, O'Donoghue, SIAM J. Optim. 31, 1999 (2021)), with the
penalty rho balanced between the relative residuals.  At a fixed point Y = X are the blocks
and ``Z = rho (Y - s) ⪰ 0`` the dual blocks (a causal witness, Araujo et al., NJP 17, 102001
(2015)).  Many processes are iterated at once: every array has a leading sample axis, every
product with shared data is one call per sample, and the eigendecompositions are per matrix,
so a sample's result does not depend on the rest of its batch.  A sample leaves the batch
when it converges.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from .backend_types import BatchFigures
from .splitting_data import SplitProblem

CHECK_EVERY = 10
REBALANCE_EVERY = 50
# up to this side the projection is one product V max(L, 0) V^H per matrix (one batched
# call is cheaper than grouping by eigenvector count: 59 vs 103 us for six 32 x 32)
FULL_PRODUCT_MAX = 64
# Anderson memory: 20 (three qubit parties: memory 10 took 540 iterations where 20 took
# 300); for blocks of side >= 128 memory 10 (four qubit parties: 5-8% fewer iterations
# than 20 on three seeded samples, and each step reads half the buffer)
MEMORY, LARGE_MEMORY, LARGE_SIDE = 20, 10, 128


@dataclass(frozen=True)
class SplitSolution(BatchFigures):
    """Per-sample results (arrays over the batch) and the final states."""

    primal: np.ndarray   # (B, size): blocks Y (coefficients)
    dual: np.ndarray     # (B, size): blocks Z = rho (Y - s)
    solve_time: float
    state: np.ndarray    # (B, size): the final s, to start a related problem from
    rho: np.ndarray


def _rebuild_from_smaller_side(M: np.ndarray, lam: np.ndarray, V: np.ndarray) -> np.ndarray:
    """``M - V_- L_- V_-^H`` or ``V_+ L_+ V_+^H`` per matrix, whichever uses fewer
    eigenvectors; matrices are grouped by their count of negative eigenvalues."""
    n = M.shape[-1]
    neg = np.sum(lam < 0, axis=1)
    P = np.empty_like(M)
    for k in np.unique(neg):
        rows = np.flatnonzero(neg == k)
        if k <= n // 2:
            Vk = V[rows, :, :k]
            P[rows] = M[rows] - np.matmul(Vk * lam[rows, None, :k],
                                          np.swapaxes(Vk, 1, 2).conj())
        else:
            Vk = V[rows, :, k:]
            P[rows] = np.matmul(Vk * lam[rows, None, k:], np.swapaxes(Vk, 1, 2).conj())
    return P


def cone(prob: SplitProblem, s: np.ndarray) -> np.ndarray:
    """Pi_K(s): every block's matrix with its negative eigenvalues set to zero.

    Small matrices (side <= FULL_PRODUCT_MAX) are rebuilt as ``V max(L, 0) V^H``; larger
    ones from their side with fewer eigenvectors, ``M - V_- L_- V_-^H`` or ``V_+ L_+
    V_+^H`` (eigenvalues come sorted, so both are column ranges), grouped by that count.
    Either way each matrix's arithmetic is its own.
    """
    Y = np.empty_like(s)
    D = prob.layout.scenario.dim
    B = s.shape[0]
    for tr, cols in prob.stacks:
        n = tr.n
        M = tr.to_matrices(s[:, cols].reshape(-1, n * n)) * (n / D)
        lam, V = np.linalg.eigh(M)
        if n <= FULL_PRODUCT_MAX:
            P = np.matmul(V * np.maximum(lam, 0.0)[:, None, :], np.swapaxes(V, 1, 2).conj())
        else:
            P = _rebuild_from_smaller_side(M, lam, V)
        Y[:, cols] = (tr.to_coefficients(P) * (D / n)).reshape(B, -1)
    return Y


def affine(prob: SplitProblem, v: np.ndarray, w: np.ndarray, rho: np.ndarray
           ) -> tuple[np.ndarray, np.ndarray]:
    """prox_{f/rho}(v): the weighted projection of v onto the affine set of each process
    (coefficients w), shifted along the objective; returns (x, objective values)."""
    x = np.empty_like(v)
    for grp in prob.groups:
        vg = v[:, grp.gather]  # (B, m, k)
        xg = np.matmul(grp.G, vg) + grp.g[None, :, None] * w[:, None, grp.alphas]
        x[:, grp.gather] = xg
    idn = prob.identity
    a_w = idn.a[None, :] * w[:, :1]
    u = np.matmul((v[:, idn.positions] - a_w)[:, None, :], idn.K.T)[:, 0, :] \
        - idn.k[None, :] / rho[:, None]
    x[:, idn.positions] = a_w + np.matmul(u[:, None, :], idn.F.T)[:, 0, :]
    return x, np.sum(u * idn.q[None, :], axis=1)


class _Anderson:
    """Type-II Anderson acceleration per sample with memory m.

    Ring buffers hold the last m differences of residuals (dG) and of points plus residuals
    (dSG = dS + dG); the Gram matrix dG dG^T is updated one row and column per step.
    Unused slots are zero and get a unit diagonal in the Gram matrix.
    """

    def __init__(self, m: int, batch: int, size: int) -> None:
        self.m = m
        self.dG = np.zeros((batch, m, size))
        self.dSG = np.zeros((batch, m, size))
        self.gram = np.zeros((batch, m, m))
        self.count = np.zeros(batch, dtype=np.int64)
        self.prev_s = np.zeros((batch, size))
        self.prev_g = np.zeros((batch, size))
        self.has_prev = np.zeros(batch, dtype=bool)

    def take(self, keep: np.ndarray) -> None:
        for name in ("dG", "dSG", "gram", "count", "prev_s", "prev_g", "has_prev"):
            setattr(self, name, getattr(self, name)[keep])

    def reset(self, which: np.ndarray) -> None:
        self.count[which] = 0
        self.has_prev[which] = False
        self.dG[which] = 0.0
        self.dSG[which] = 0.0
        self.gram[which] = 0.0

    def step(self, s: np.ndarray, g: np.ndarray) -> np.ndarray:
        rows = np.flatnonzero(self.has_prev)
        if len(rows):
            # the Gram column from the whole buffer as it is (a view, no copy of the ring
            # buffers), then the slot being replaced gets dg . dg; rows without a previous
            # point compute and discard theirs, so every row's arithmetic is the same
            dg = g - self.prev_g
            k = self.count % self.m
            col = np.matmul(self.dG, dg[:, :, None])[:, :, 0]  # (B, m)
            col[np.arange(len(s)), k] = np.sum(dg * dg, axis=1)
            k = k[rows]
            self.dG[rows, k] = dg[rows]
            self.dSG[rows, k] = s[rows] - self.prev_s[rows] + dg[rows]
            self.gram[rows, k, :] = col[rows]
            self.gram[rows, :, k] = col[rows]
            self.count[rows] += 1
        self.prev_s[:], self.prev_g[:] = s, g
        self.has_prev[:] = True
        used = np.minimum(self.count, self.m)
        out = s + g
        if not used.any():
            return out
        slot = np.arange(self.m)[None, :] < used[:, None]
        reg = 1e-10 * np.trace(self.gram, axis1=1, axis2=2) / np.maximum(used, 1)
        diag = np.where(slot, reg[:, None], 1.0)
        gram = self.gram + diag[:, :, None] * np.eye(self.m)[None]
        rhs = np.matmul(self.dG, g[:, :, None])[:, :, 0] * slot
        gamma = np.linalg.solve(gram, rhs[:, :, None])[:, :, 0]
        return out - np.matmul(gamma[:, None, :], self.dSG)[:, 0, :]


def _figures(prob: SplitProblem, w, Y, s, x, obj, rho):
    """Residuals, objectives and scales per sample (Frobenius norms of the blocks)."""
    sq = np.sqrt(prob.weights)[None, :]
    Z = rho[:, None] * (Y - s)
    res = np.sqrt(np.sum(((x - Y) * sq) ** 2, axis=1))
    norm_y = np.sqrt(np.sum((Y * sq) ** 2, axis=1))
    norm_z = np.sqrt(np.sum((Z * sq) ** 2, axis=1))
    dobj = np.zeros(len(w))
    for j in range(prob.n_leaf_blocks):
        b = prob.blocks[j]
        sl = slice(b.offset, b.offset + b.n ** 2)
        part = prob.layout.particular[j, b.alphas]
        dobj -= b.weight * np.sum(Z[:, sl] * part[None, :] * w[:, b.alphas], axis=1)
    gap = np.abs(obj - dobj)
    return res, rho * res, norm_y, norm_z, dobj, gap, Z


def _rebalance(it: int, rel_p: np.ndarray, rel_d: np.ndarray, ratio: np.ndarray) -> np.ndarray:
    """Factor for rho per sample: early on (checks at 10, 20, 40, ... iterations) rho jumps
    to ||Z|| / ||Y||, which balances the primal and dual iterates; later it moves by 2 when
    one relative residual is 10 times the other (residual balancing)."""
    if it <= 160 and (it // CHECK_EVERY) & (it // CHECK_EVERY - 1) == 0:
        return np.where((ratio > 2) | (ratio < 0.5), np.clip(ratio, 1e-3, 1e3), 1.0)
    if it % REBALANCE_EVERY:
        return np.ones_like(rel_p)
    return np.where(rel_p > 10 * rel_d, 2.0, np.where(rel_d > 10 * rel_p, 0.5, 1.0))


def solve_batch(prob: SplitProblem, w: np.ndarray, eps_abs: float = 1e-6,
                eps_rel: float = 1e-6, max_iters: int = 20_000,
                time_limit: float | None = None, memory: int | None = None,
                start: tuple[np.ndarray, np.ndarray] | None = None) -> SplitSolution:
    """Solve for every row of ``w`` (the processes' coefficient vectors, shape (B, D^2)).

    ``memory`` (Anderson) defaults to MEMORY, or LARGE_MEMORY when a block's side is at
    least LARGE_SIDE.

    ``start`` = (state, rho) of a solve of a problem with the same blocks (another causal
    structure for the same processes) starts the iteration there instead of at the affine
    projection of zero.
    """
    t0 = time.perf_counter()
    w = np.atleast_2d(np.asarray(w, dtype=float))
    nb = w.shape[0]
    out = {k: np.full(nb, np.nan) for k in ("pobj", "dobj", "res_pri", "res_dual", "gap")}
    iters = np.zeros(nb, dtype=np.int64)
    conv = np.zeros(nb, dtype=bool)
    primal = np.zeros((nb, prob.size))
    dual = np.zeros((nb, prob.size))
    active = np.arange(nb)
    if start is not None:
        s, rho = np.array(start[0], dtype=float), np.array(start[1], dtype=float)
    else:
        rho = np.ones(nb)
        s, _ = affine(prob, np.zeros((nb, prob.size)), w, rho)
    final_s, final_rho = np.zeros((nb, prob.size)), np.ones(nb)
    if memory is None:
        memory = LARGE_MEMORY if max(b.n for b in prob.blocks) >= LARGE_SIDE else MEMORY
    aa = _Anderson(memory, nb, prob.size)
    best = np.full(nb, np.inf)
    best_s = s.copy()
    wa = w
    sq = np.sqrt(prob.weights)[None, :]
    for it in range(1, max_iters + 1):
        Y = cone(prob, s)
        x, obj = affine(prob, 2 * Y - s, wa, rho)
        g = x - Y
        res = np.sqrt(np.sum((g * sq) ** 2, axis=1))
        worse = res > 2.0 * best
        improved = res < best
        best = np.where(improved, res, best)
        best_s[improved] = s[improved] + g[improved]
        out_of_time = time_limit is not None and time.perf_counter() - t0 > time_limit
        if it % CHECK_EVERY == 0 or it == max_iters or out_of_time:
            r_p, r_d, ny, nz, dobj, gap, Z = _figures(prob, wa, Y, s, x, obj, rho)
            done = ((r_p <= eps_abs + eps_rel * ny) & (r_d <= eps_abs + eps_rel * nz)
                    & (gap <= eps_abs + eps_rel * np.maximum(np.abs(obj), np.abs(dobj))))
            final = done | (it == max_iters) | out_of_time
            idx = active[final]
            for key, val in zip(("pobj", "dobj", "res_pri", "res_dual", "gap"),
                                (obj, dobj, r_p, r_d, gap)):
                out[key][idx] = val[final]
            iters[idx], conv[idx] = it, done[final]
            primal[idx], dual[idx] = Y[final], Z[final]
            final_s[idx], final_rho[idx] = s[final], rho[final]
            if final.all():
                break
            keep = ~final
            active, wa, s, g, Y = active[keep], wa[keep], s[keep], g[keep], Y[keep]
            rho, best, best_s, worse = rho[keep], best[keep], best_s[keep], worse[keep]
            aa.take(keep)
            factor = _rebalance(it, (r_p / np.maximum(ny, 1e-12))[keep],
                                (r_d / np.maximum(nz, 1e-12))[keep],
                                (nz / np.maximum(ny, 1e-12))[keep] / rho)
            change = factor != 1.0
            if change.any():
                # s = Y + U with U the scaled dual Z / rho: keep Z, rescale U
                s[change] = Y[change] + (s[change] - Y[change]) / factor[change, None]
                rho = rho * factor
                aa.reset(change)
                best[change] = np.inf
                continue
        if worse.any():  # the accelerated point made things worse: back to the best one
            aa.reset(worse)
        nxt = aa.step(s, g)
        nxt[worse] = best_s[worse]
        s = nxt
    return SplitSolution(out["pobj"], out["dobj"], out["res_pri"], out["res_dual"],
                         out["gap"], iters, conv, primal, dual, time.perf_counter() - t0,
                         final_s, final_rho)
