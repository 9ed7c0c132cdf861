"""Continuous local-unitary symmetries of a process operator, found and verified numerically.

Every robustness SDP of workers/THEORY.md §§4-5 is invariant under local unitaries
``g = u_P ⊗ u_1 ⊗ ... ⊗ u_F`` (one unitary per subsystem, acting by conjugation): they
commute with every trace-and-replace map, keep every support pattern, and fix 1° and the
valid subspace.  If the process itself is invariant, ``g W g^† = W`` for all g in a compact
group G, then averaging any feasible decomposition over G gives a feasible decomposition
with the same objective, so the leaves (and Omega, and the dual blocks) may be taken in the
commutant of G: an exact reduction, never a relaxation (the standard argument for
group-invariant SDPs; Gatermann & Parrilo, J. Pure Appl. Algebra 192, 95 (2004)).

This module finds the Lie algebra of the connected group of such symmetries: the local
Hermitian generators ``h = sum_s h_s`` (``h_s`` traceless on subsystem s) with
``[h, W] = 0``.  That is a linear condition, so the algebra is the null space of one small
matrix (one column per traceless local basis element); it is closed under commutators
(Jacobi identity), and commutators of local generators are local.  A generator is kept only
if its commutator with W vanishes to :data:`TOLERANCE` relative to ``||W||_F`` (measured
directly, not through the null-space computation): the reduction is used only when the
symmetry is there to rounding accuracy.  A process with no symmetry (every random sample)
costs one SVD of a (sum_s (d_s^2 - 1)) x 2 D^2 matrix.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from workers.operators.basis import local_basis

TOLERANCE = 1e-10  # relative size of [h, W] below which h counts as a symmetry


@dataclass(frozen=True, eq=False)
class LocalSymmetry:
    """An orthonormal basis of the local symmetry algebra of a process.

    Attributes
    ----------
    dims
        Subsystem dimensions of the scenario.
    generators
        Per generator, one traceless Hermitian matrix per subsystem (zeros where it acts
        trivially); ``sum_s Tr(h_s^2) = 1``.
    residual
        Largest relative commutator ``||[h, W]||_F / ||W||_F`` over the generators.
    key
        A digest of the algebra (not of its basis): equal keys give the same reduction.
    """

    dims: tuple[int, ...]
    generators: tuple[tuple[np.ndarray, ...], ...]
    residual: float
    key: str

    @property
    def dimension(self) -> int:
        return len(self.generators)

    def __eq__(self, other: object) -> bool:  # the algebra, not its basis
        return isinstance(other, LocalSymmetry) and (self.dims, self.key) == (other.dims, other.key)

    def __hash__(self) -> int:
        return hash((self.dims, self.key))

    def on_space(self, small: Sequence[int]) -> list[np.ndarray]:
        """The generators as matrices on a space where some subsystems have dimension 1
        (:mod:`workers.structures.leaf_spaces`): a leaf ``X ⊗ 1_T`` is invariant iff X is invariant
        under the generators' parts on the kept subsystems."""
        out = []
        for gen in self.generators:
            H = np.zeros((int(np.prod(small)),) * 2, dtype=complex)
            for s, (d, r) in enumerate(zip(self.dims, small)):
                if r == d and d > 1 and np.any(gen[s]):
                    H += local_operator(gen[s], tuple(small), s)
            out.append(H)
        return out


def local_operator(h: np.ndarray, dims: tuple[int, ...], s: int) -> np.ndarray:
    """``1 ⊗ h ⊗ 1`` with h on subsystem s (dense)."""
    left = int(np.prod(dims[:s]))
    right = int(np.prod(dims[s + 1:]))
    return np.kron(np.kron(np.eye(left), h), np.eye(right))


def _local_generators(dims: tuple[int, ...]) -> tuple[list[tuple[int, np.ndarray]], list[int]]:
    """Traceless local basis elements with Tr(g^2) = 1, and their subsystem of each."""
    out, where = [], []
    for s, d in enumerate(dims):
        if d > 1:
            g = local_basis(d)[1:] / np.sqrt(d)
            out.append((s, g))
            where += [s] * len(g)
    return out, where


def _commutators(W: np.ndarray, dims: tuple[int, ...]) -> np.ndarray:
    """Real matrix whose column k is vec([g_k, W]) (real and imaginary parts)."""
    D = W.shape[0]
    T = W.reshape(dims + (D,))
    cols = []
    for s, g in _local_generators(dims)[0]:
        L = np.tensordot(g, T, axes=([2], [s]))  # (k, d_s, other subsystems..., D)
        L = np.moveaxis(L, 1, 1 + s).reshape(len(g), D, D)  # (g ⊗ 1) W
        C = L - np.swapaxes(L, 1, 2).conj()  # W g = ((g ⊗ 1) W)^dagger for Hermitian W
        cols.append(C.reshape(len(g), -1))
    C = np.concatenate(cols)
    return np.concatenate([C.real, C.imag], axis=1)


def may_be_symmetric(dims: Sequence[int], Ws, tol: float = TOLERANCE) -> np.ndarray:
    """A cheap screen over a stack of processes: False where no local generator can commute
    with W (the smallest eigenvalue of the commutators' Gram matrix exceeds the rounding
    floor), True where :func:`find_local_symmetry` has to look.  One tensor contraction per
    subsystem for the whole stack; each sample's Gram matrix is its own product."""
    dims = tuple(int(d) for d in dims)
    Ws = np.asarray(Ws, dtype=complex)
    if not len(Ws):
        return np.zeros(0, dtype=bool)
    B, D = Ws.shape[0], Ws.shape[1]
    T = Ws.reshape((B,) + dims + (D,))
    cols = []
    for s, g in _local_generators(dims)[0]:
        L = np.tensordot(g, T, axes=([2], [1 + s]))  # (k, d_s, B, other subsystems..., D)
        L = np.moveaxis(np.moveaxis(L, 2, 0), 2, 2 + s).reshape(B, len(g), D, D)
        cols.append((L - np.swapaxes(L, 2, 3).conj()).reshape(B, len(g), -1))
    if not cols:
        return np.zeros(B, dtype=bool)
    C = np.concatenate(cols, axis=1)
    C = np.concatenate([C.real, C.imag], axis=2)
    lam = np.linalg.eigvalsh(np.matmul(C, np.swapaxes(C, 1, 2)))
    norm2 = np.sum(np.abs(Ws.reshape(B, -1)) ** 2, axis=1)
    return lam[:, 0] <= np.maximum(1e-12 * lam[:, -1], tol ** 2 * norm2)


def find_local_symmetry(dims: Sequence[int], W: np.ndarray,
                        tol: float = TOLERANCE) -> LocalSymmetry | None:
    """The local symmetry algebra of the Hermitian operator W, or None if it has none.

    Parameters
    ----------
    dims
        Subsystem dimensions (the scenario's documented order).
    W
        Hermitian operator on the product space.
    tol
        A generator counts when ``||[h, W]||_F <= tol ||W||_F``.
    """
    dims = tuple(int(d) for d in dims)
    W = np.asarray(W, dtype=complex)
    norm = float(np.linalg.norm(W))
    if norm == 0.0 or not any(d > 1 for d in dims):
        return None
    M = _commutators(W, dims)
    # candidates from the Gram matrix (its rounding floor is ~1e-16 of its norm), then the
    # exact null directions from an SVD of M restricted to them (accurate to rounding)
    G = M @ M.T
    lam, V = np.linalg.eigh(G)
    cand = V[:, lam <= max(1e-12 * lam[-1], (tol * norm) ** 2)]
    if not cand.shape[1]:
        return None
    U, sv, _ = np.linalg.svd(cand.T @ M, full_matrices=False)
    null = (cand @ U[:, sv <= tol * norm]).T  # combinations v with v @ M = 0
    if not len(null):
        return None
    residual = float(np.max(np.linalg.norm(null @ M, axis=1)) / norm)
    if residual > tol:
        return None
    blocks, where = _local_generators(dims)
    where = np.array(where)
    gens = []
    for v in null:
        parts = []
        for s, d in enumerate(dims):
            sel = where == s
            parts.append(np.tensordot(v[sel], dict(blocks)[s], axes=1) if sel.any()
                         else np.zeros((d, d), dtype=complex))
        gens.append(tuple(parts))
    proj = np.round(null.T @ null, 8) + 0.0  # basis-independent; +0.0 drops signed zeros
    key = hashlib.sha256(repr(dims).encode() + proj.tobytes()).hexdigest()[:24]
    return LocalSymmetry(dims, tuple(gens), residual, key)
