"""A batched primal-dual interior-point method for small complex SDPs that share A and c.

The compiled robustness problems of :mod:`workers.sdp.conic` have the form

    minimise c.x   s.t.  S = B - sum_i x_i A_i  ⪰ 0      (blockwise Hermitian matrices)

with A and c fixed per scenario and only the matrix B depending on the process.  Its dual is

    maximise -<B, Y>   s.t.  <A_i, Y> = -c_i,  Y ⪰ 0.

This module solves many such problems at once (one numpy array axis over the samples), so
the Python work of every iteration is shared by the whole batch.  The method is the
infeasible primal-dual path-following method with the HKM search direction and Mehrotra's
predictor-corrector (Helmberg, Rendl, Vanderbei & Wolkowicz, SIAM J. Optim. 6, 342 (1996);
Kojima, Shindoh & Hara, SIAM J. Optim. 7, 86 (1997); Monteiro, SIAM J. Optim. 7, 663 (1997);
Mehrotra, SIAM J. Optim. 2, 575 (1992); in the form of Todd, Toh & Tütüncü, SIAM J. Optim.
8, 769 (1998)).  Each iteration forms the Schur complement
``M_ij = Re Tr(A_i Y A_j S^-1)`` densely: it is meant for problems with up to a few hundred
variables and blocks up to ~32 x 32 (bipartite scenarios, small tripartite ones); larger
problems go to SCS.

Every sample ends with the same evidence as a first-order solve: status, iterations,
primal and dual residuals (infinity norms, as SCS reports them) and the duality gap.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import batched_linalg as bl
from .backend_types import BatchFigures

STEP = 0.95  # fraction of the step to the boundary of the cone


@dataclass(frozen=True)
class SdpData:
    """The fixed part of a batch of SDPs: per block the matrices A_i, and the cost c.

    Attributes
    ----------
    A
        Per block k an array (m, n_k, n_k) of Hermitian matrices A_i.
    c
        Cost vector (m,).
    """

    A: tuple[np.ndarray, ...]
    c: np.ndarray

    @property
    def m(self) -> int:
        return int(self.c.shape[0])

    @property
    def sizes(self) -> tuple[int, ...]:
        return tuple(int(a.shape[1]) for a in self.A)


@dataclass(frozen=True)
class IpmSolution(BatchFigures):
    """Per-sample results of :func:`solve_batch` (arrays over the batch axis; ``converged``:
    stopping criteria met at (eps_abs, eps_rel))."""

    x: np.ndarray                 # (batch, m)
    S: tuple[np.ndarray, ...]     # per block (batch, n, n): B - sum x_i A_i (as iterated)
    Y: tuple[np.ndarray, ...]     # per block (batch, n, n): the dual matrices
    failed: np.ndarray            # bool: numerical breakdown before convergence


# Products with the shared data A keep a batch axis of length-1 rows, (B, 1, k) @ (k, m):
# numpy then multiplies sample by sample instead of making one (B x k) GEMM, whose blocking
# (and rounding) would depend on the batch size.  A sample's arithmetic is its own.

def _pair(A: np.ndarray, M: np.ndarray) -> np.ndarray:
    """Re Tr(A_i M_b) for a stack A (m, n, n) and a batch M (B, n, n): shape (B, m)."""
    m, n = A.shape[0], A.shape[1]
    # Tr(A_i M) = sum_{jk} A_i[j, k] M[k, j]
    rows = np.swapaxes(M, -1, -2).reshape(M.shape[0], 1, n * n)
    return (rows @ A.reshape(m, n * n).T)[:, 0, :].real


def _combine(A: np.ndarray, y: np.ndarray) -> np.ndarray:
    """sum_i y_bi A_i: shape (B, n, n)."""
    m, n = A.shape[0], A.shape[1]
    return (y.astype(complex)[:, None, :] @ A.reshape(m, n * n)).reshape(-1, n, n)


class _State:
    """Iterates of the active samples."""

    def __init__(self, data: SdpData, B: tuple[np.ndarray, ...]) -> None:
        nb = B[0].shape[0]
        self.y = np.zeros((nb, data.m))
        self.X, self.Z = [], []
        a_norm = max(np.sqrt(np.max(np.sum(np.abs(a.reshape(a.shape[0], -1)) ** 2, axis=1)))
                     for a in data.A)
        c_max = float(np.max(np.abs(data.c))) if data.m else 0.0
        for Bk in B:
            n = Bk.shape[-1]
            b_norm = np.linalg.norm(Bk.reshape(nb, -1), axis=1)
            xi = max(10.0, np.sqrt(n), np.sqrt(n) * (1 + c_max) / (1 + a_norm))
            eta = np.maximum(max(10.0, np.sqrt(n), a_norm), b_norm)
            self.X.append(np.broadcast_to(xi * np.eye(n), (nb, n, n)).astype(complex))
            self.Z.append(eta[:, None, None] * np.eye(n)[None].astype(complex))

    def copy(self) -> "_State":
        new = object.__new__(_State)
        new.y, new.X, new.Z = self.y.copy(), [x.copy() for x in self.X], [z.copy() for z in self.Z]
        return new

    def take(self, keep: np.ndarray) -> None:
        self.y = self.y[keep]
        self.X = [x[keep] for x in self.X]
        self.Z = [z[keep] for z in self.Z]


def _residuals(data: SdpData, B, st: _State):
    """Rp (B, m) = -c - A(X);  Rd_k = B_k - Z_k - sum y_i A_i."""
    AX = sum(_pair(a, x) for a, x in zip(data.A, st.X))
    Rp = -data.c[None, :] - AX
    Rd = [b - z - _combine(a, st.y) for a, b, z in zip(data.A, B, st.Z)]
    return Rp, Rd, AX


def _measures(data: SdpData, B, st: _State, Rp, Rd, AX):
    """SCS-style accuracy figures of the current iterates."""
    res_pri = np.max([np.abs(r).reshape(r.shape[0], -1).max(axis=1) for r in Rd], axis=0)
    res_dual = np.abs(Rp).max(axis=1) if data.m else np.zeros(len(st.y))
    pobj = np.sum(st.y * data.c, axis=1)
    dobj = -sum(np.einsum("bij,bji->b", b, x).real for b, x in zip(B, st.X))
    gap = np.abs(pobj - dobj)
    scale_p = np.max([np.abs(b).reshape(b.shape[0], -1).max(axis=1) for b in B]
                     + [np.abs(z).reshape(z.shape[0], -1).max(axis=1) for z in st.Z], axis=0)
    scale_d = np.maximum(np.abs(data.c).max(initial=0.0), np.abs(AX).max(axis=1, initial=0.0))
    return res_pri, res_dual, pobj, dobj, gap, scale_p, scale_d


def solve_batch(data: SdpData, B: tuple[np.ndarray, ...], eps_abs: float = 1e-8,
                eps_rel: float = 1e-8, max_iters: int = 100) -> IpmSolution:
    """Solve the batch of SDPs with blocks ``B[k]`` of shape (batch, n_k, n_k).

    Samples leave the active set as soon as they meet the stopping criteria
    ``res_pri <= eps_abs + eps_rel * scale`` (likewise ``res_dual`` and ``gap``), so a
    batch costs what its slowest sample costs, with the per-iteration Python work shared.
    A sample whose Newton system breaks down numerically (a singular Schur complement or a
    lost Cholesky factor near a degenerate optimum) leaves with its last iterate and
    ``failed`` set; its figures say how accurate that iterate is.
    """
    B = tuple(bl.herm(np.asarray(b, dtype=complex)) for b in B)
    nb = B[0].shape[0]
    n_total = sum(data.sizes)
    out = _Outputs(data, nb)
    st = _State(data, B)
    active = np.arange(nb)
    for it in range(max_iters + 1):
        Rp, Rd, AX = _residuals(data, B, st)
        meas = _measures(data, B, st, Rp, Rd, AX)
        res_pri, res_dual, pobj, dobj, gap, scale_p, scale_d = meas
        done = ((res_pri <= eps_abs + eps_rel * scale_p)
                & (res_dual <= eps_abs + eps_rel * scale_d)
                & (gap <= eps_abs + eps_rel * np.maximum(np.abs(pobj), np.abs(dobj))))
        final = done | (it == max_iters)
        out.record(active, st, meas, it, final, done)
        if final.all():
            break
        keep = ~final
        st.take(keep)
        active, Rp, Rd = active[keep], Rp[keep], [r[keep] for r in Rd]
        B = tuple(b[keep] for b in B)
        meas = tuple(v[keep] for v in meas)
        before = st.copy()
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            bad = _step(data, st, Rp, Rd, n_total)  # a diverging sample is flagged, not raised
        if bad.any():
            out.record(active, before, meas, it, bad, np.zeros(len(bad), dtype=bool), True)
            st.take(~bad)
            active, B = active[~bad], tuple(b[~bad] for b in B)
            if not len(active):
                break
    return out.solution()


def _step(data: SdpData, st: _State, Rp, Rd, n_total: int) -> np.ndarray:
    """One Mehrotra predictor-corrector step with the HKM direction (updates ``st``).

    Returns the mask of samples whose step broke down (their rows of ``st`` are garbage).
    """
    nb = len(st.y)
    bad = np.zeros(nb, dtype=bool)
    Lx, Lz = [], []
    for x, z in zip(st.X, st.Z):
        L, b = bl.cholesky(x)
        Lx.append(L)
        bad |= b
        L, b = bl.cholesky(z)
        Lz.append(L)
        bad |= b
    Lx_inv = [np.linalg.inv(L) for L in Lx]
    Lz_inv = [np.linalg.inv(L) for L in Lz]
    Zinv = [bl.dagger(L) @ L for L in Lz_inv]
    M = sum(_schur(a, lx, lzi) for a, lx, lzi in zip(data.A, Lx, Lz_inv))
    mu = _mu(st.X, st.Z, n_total)
    XRdZ = [bl.herm(x @ r @ zi) for x, r, zi in zip(st.X, Rd, Zinv)]
    base = Rp + sum(_pair(a, h) for a, h in zip(data.A, XRdZ))

    def direction(sigma_mu, corr):
        nonlocal bad
        rhs = base.copy()
        rc = []
        for k, (a, x, zi) in enumerate(zip(data.A, st.X, Zinv)):
            r = sigma_mu[:, None, None] * zi - x
            if corr is not None:
                r = r - corr[0][k] @ corr[1][k] @ zi
            rc.append(r)
            rhs -= _pair(a, bl.herm(r))
        dy, b = bl.spd_solve(M, rhs)
        bad |= b
        dZ = [r - _combine(a, dy) for a, r in zip(data.A, Rd)]
        dX = [bl.herm(r - x @ dz @ zi) for r, x, dz, zi in zip(rc, st.X, dZ, Zinv)]
        return dy, dX, dZ

    def steps(dX, dZ):
        ap = np.min([bl.max_steps(li, d) for li, d in zip(Lx_inv, dX)], axis=0)
        ad = np.min([bl.max_steps(li, d) for li, d in zip(Lz_inv, dZ)], axis=0)
        return ap, ad

    dy, dX, dZ = direction(np.zeros(nb), None)
    ap, ad = steps(dX, dZ)
    ap, ad = np.minimum(1.0, STEP * ap), np.minimum(1.0, STEP * ad)
    mu_aff = _mu([x + ap[:, None, None] * d for x, d in zip(st.X, dX)],
                 [z + ad[:, None, None] * d for z, d in zip(st.Z, dZ)], n_total)
    sigma = np.clip(np.nan_to_num((mu_aff / mu) ** 3), 0.0, 1.0)
    dy, dX, dZ = direction(sigma * mu, (dX, dZ))
    ap, ad = steps(dX, dZ)
    gamma = 0.9 + 0.09 * np.minimum(np.minimum(ap, ad), 1.0)
    ap, ad = np.minimum(1.0, gamma * ap), np.minimum(1.0, gamma * ad)
    st.y = st.y + ad[:, None] * dy
    st.X = [x + ap[:, None, None] * d for x, d in zip(st.X, dX)]
    st.Z = [z + ad[:, None, None] * d for z, d in zip(st.Z, dZ)]
    return bad | ~np.isfinite(ap) | ~np.isfinite(ad) | ~np.isfinite(st.y).all(axis=1)


def _schur(A: np.ndarray, Lx: np.ndarray, Lz_inv: np.ndarray) -> np.ndarray:
    """One block's part of the Schur complement M_ij = Re Tr(A_i X A_j Z^-1).

    With X = L_x L_x^H and Z^-1 = L_z^-H L_z^-1 it is the real Gram matrix of the
    G_i = L_z^-1 A_i L_x (as vectors of real and imaginary parts): symmetric PSD by
    construction.
    """
    nb, m = Lx.shape[0], A.shape[0]
    G = (Lz_inv[:, None] @ A[None] @ Lx[:, None]).reshape(nb, m, -1)
    Gr = np.concatenate([G.real, G.imag], axis=2)
    return Gr @ np.swapaxes(Gr, 1, 2)


def _mu(X, Z, n_total: int) -> np.ndarray:
    """Complementarity measure sum_k Tr(X_k Z_k) / n per sample."""
    return sum(np.einsum("bij,bji->b", x, z).real for x, z in zip(X, Z)) / n_total


class _Outputs:
    """Collects each sample's final iterate when it leaves the active set."""

    def __init__(self, data: SdpData, nb: int) -> None:
        nan = np.full(nb, np.nan)
        self.x = np.zeros((nb, data.m))
        self.S = [np.zeros((nb, n, n), dtype=complex) for n in data.sizes]
        self.Y = [np.zeros((nb, n, n), dtype=complex) for n in data.sizes]
        self.vals = {k: nan.copy() for k in ("pobj", "dobj", "res_pri", "res_dual", "gap")}
        self.iterations = np.zeros(nb, dtype=np.int64)
        self.converged = np.zeros(nb, dtype=bool)
        self.failed = np.zeros(nb, dtype=bool)

    def record(self, active, st: _State, meas, it: int, final: np.ndarray, done,
               failed: bool = False) -> None:
        """Store the iterate and figures of ``active[final]`` (they leave the batch)."""
        idx = active[final]
        self.x[idx] = st.y[final]
        for k in range(len(self.S)):
            self.S[k][idx] = st.Z[k][final]
            self.Y[k][idx] = st.X[k][final]
        for key, v in zip(("res_pri", "res_dual", "pobj", "dobj", "gap"), meas[:5]):
            self.vals[key][idx] = v[final]
        self.iterations[idx] = it
        self.converged[idx] = done[final]
        self.failed[idx] = failed

    def solution(self) -> IpmSolution:
        v = self.vals
        return IpmSolution(pobj=v["pobj"], dobj=v["dobj"], res_pri=v["res_pri"],
                           res_dual=v["res_dual"], gap=v["gap"], iterations=self.iterations,
                           converged=self.converged, x=self.x, S=tuple(self.S),
                           Y=tuple(self.Y), failed=self.failed)
