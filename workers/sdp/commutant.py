"""Block-diagonalisation of the commutant of a compact Lie algebra of Hermitian matrices.

A unitary representation of a compact connected group splits the space into isotypic parts,
``C^n = ⊕_w C^{d_w} ⊗ C^{m_w}`` (irrep of dimension d_w, multiplicity m_w).  An operator
commutes with the group iff it is ``⊕_w 1_{d_w} ⊗ Z_w`` in an adapted basis, and it is PSD
iff every ``Z_w`` (m_w x m_w) is.  So a PSD block of side n becomes blocks of sides m_w.

The adapted basis is built from the Lie algebra alone (Fulton & Harris, Representation
Theory, §§14-15): a generic element H0 of the algebra picks a maximal torus and a positive
system (the eigenvectors of ad H0 with positive eigenvalue are the raising operators); the
vectors that every raising operator annihilates are the highest-weight vectors, and those of
equal H0-eigenvalue span one multiplicity space C^{m_w}.  Each irrep copy is then generated
from its highest-weight vector by the algebra, with the same recipe for every copy, so that
the copies' bases correspond.  Everything is checked afterwards (orthonormality, dimension
count, and that operators of the claimed form commute with every generator); a decomposition
that fails a check is refused (None), and the caller solves the unreduced problem.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

CHECK = 1e-9  # relative residual allowed in the structural checks
GAP = 1e-6  # highest weights closer than this (relative) count as equal


@dataclass(frozen=True)
class Isotypic:
    """One isotypic part: ``Q[:, i, k]`` is basis vector i of irrep copy k."""

    d: int
    m: int
    Q: np.ndarray


@dataclass(frozen=True)
class Commutant:
    """The commutant of a representation on C^n as a list of isotypic parts."""

    n: int
    parts: tuple[Isotypic, ...]

    @property
    def sizes(self) -> tuple[int, ...]:
        """Side of the block Z_w of each part."""
        return tuple(p.m for p in self.parts)

    @property
    def dimension(self) -> int:
        """Real dimension of the Hermitian commutant: sum of m_w^2."""
        return sum(p.m ** 2 for p in self.parts)

    def blocks(self, X: np.ndarray) -> list[np.ndarray]:
        """The blocks Z_w of an operator of the commutant (stacks (..., n, n) allowed)."""
        out = []
        for p in self.parts:
            B = p.Q[:, 0, :]
            out.append(B.conj().T @ X @ B)
        return out

    def operator(self, blocks, scale_by_dimension: bool = False) -> np.ndarray:
        """``⊕_w 1 ⊗ Z_w`` as an n x n matrix (each block divided by d_w if asked)."""
        X = np.zeros((self.n, self.n), dtype=complex)
        for p, Z in zip(self.parts, blocks):
            QZ = np.einsum("nim,mk->nik", p.Q, np.asarray(Z) / (p.d if scale_by_dimension else 1))
            X += QZ.reshape(self.n, -1) @ p.Q.reshape(self.n, -1).conj().T
        return X

    def units(self, part: int) -> np.ndarray:
        """Frobenius-orthonormal Hermitian m x m matrices spanning the part's blocks, shape
        (m^2, m, m): diagonal units, then symmetric and antisymmetric pairs."""
        m = self.parts[part].m
        out = []
        for k in range(m):
            for l in range(k, m):
                Z = np.zeros((m, m), dtype=complex)
                if k == l:
                    Z[k, k] = 1.0
                    out.append(Z)
                    continue
                Z[k, l] = Z[l, k] = 1 / np.sqrt(2)
                A = np.zeros((m, m), dtype=complex)
                A[k, l], A[l, k] = -1j / np.sqrt(2), 1j / np.sqrt(2)
                out += [Z, A]
        return np.array(out)

    def hermitian_basis(self, part: int) -> np.ndarray:
        """Hilbert-Schmidt orthonormal operators ``1 ⊗ Z_u / sqrt(d)`` of the part, one per
        unit of :meth:`units`: shape (m^2, n, n)."""
        p = self.parts[part]
        out = []
        for k in range(p.m):  # O_kl = sum_i q_ik q_il^dagger, the operator of unit E_kl
            for l in range(k, p.m):
                O = p.Q[:, :, k] @ p.Q[:, :, l].conj().T
                if k == l:
                    out.append(O)
                    continue
                out += [(O + O.conj().T) / np.sqrt(2), 1j * (O.conj().T - O) / np.sqrt(2)]
        return np.array(out) / np.sqrt(p.d)


def trivial(n: int) -> Commutant:
    """No symmetry: one part, the whole matrix as its block."""
    return Commutant(n, (Isotypic(1, n, np.eye(n, dtype=complex)[:, None, :]),))


def _pair(a: np.ndarray, b: np.ndarray) -> complex:
    """Tr(a b) without forming the product."""
    return complex(np.sum(a * b.T))


def _orthonormal(gens: list[np.ndarray]) -> list[np.ndarray]:
    if not gens:
        return []
    G = np.array([[_pair(a, b).real for b in gens] for a in gens])
    lam, V = np.linalg.eigh(G)
    keep = lam > 1e-12 * max(lam[-1], 1e-300)
    return [sum(V[i, k] * gens[i] for i in range(len(gens))) / np.sqrt(lam[k])
            for k in np.nonzero(keep)[0]]


def _highest_weights(H: list[np.ndarray], H0: np.ndarray) -> np.ndarray | None:
    """Orthonormal basis (columns) of the vectors killed by every raising operator."""
    n = H0.shape[0]
    comms = [H0 @ Hi - Hi @ H0 for Hi in H]
    A = np.array([[_pair(Hj, C) for C in comms] for Hj in H])
    closure = max(np.linalg.norm(C - sum(a * Hj for a, Hj in zip(A[:, i], H)))
                  for i, C in enumerate(comms))
    if closure > CHECK * max(1.0, np.linalg.norm(H0)):
        return None  # not closed under commutators: not a Lie algebra
    beta, E = np.linalg.eig(A)
    if np.max(np.abs(beta.imag), initial=0.0) > CHECK * max(1.0, np.max(np.abs(beta))):
        return None
    top = max(1.0, float(np.max(np.abs(beta.real), initial=0.0)))
    raising = [sum(E[i, k] * H[i] for i in range(len(H))) for k in range(len(beta))
               if beta[k].real > 1e-8 * top]
    if not raising:
        return np.eye(n, dtype=complex)
    _, sv, Vt = np.linalg.svd(np.vstack(raising))
    sv = np.concatenate([sv, np.zeros(n - len(sv))])
    return Vt[sv <= CHECK * sv[0]].conj().T


def _copies(H: list[np.ndarray], B: np.ndarray) -> np.ndarray:
    """Irrep copies generated from the highest-weight vectors (columns of B), same recipe."""
    # greedy closure on the first copy: always add the candidate H_i v_k with the largest
    # part outside the current span (pivoting keeps the replayed recipe well conditioned)
    first = [B[:, 0]]
    pool = {(0, i): H[i] @ B[:, 0] for i in range(len(H))}
    recipe = []
    scale = max(np.abs(h).sum(axis=1).max() for h in H)  # >= the spectral norms
    while pool:
        basis = np.array(first)
        best, best_norm, best_vec = None, 0.0, None
        for (k, i), u in pool.items():
            co = basis.conj() @ u
            r = u - co @ basis
            co2 = basis.conj() @ r
            r = r - co2 @ basis
            nr = np.linalg.norm(r)
            if nr > best_norm:
                best, best_norm, best_vec = (k, i, co + co2), nr, r
        if best_norm <= 1e-6 * scale:
            break
        del pool[best[:2]]
        first.append(best_vec / best_norm)
        recipe.append(best + (best_norm,))
        pool.update({(len(first) - 1, i): H[i] @ first[-1] for i in range(len(H))})
    n, m = B.shape
    Q = np.zeros((n, len(first), m), dtype=complex)
    Q[:, 0, :] = B
    for t, (k, i, co, norm) in enumerate(recipe):
        Q[:, t + 1, :] = (H[i] @ Q[:, k, :] - np.tensordot(co, Q[:, :t + 1, :], axes=(0, 1))) / norm
    # one Loewdin step with the first copy's Gram matrix, the same for every copy
    lam, V = np.linalg.eigh(np.einsum("ni,nj->ij", Q[:, :, 0].conj(), Q[:, :, 0]))
    L = V @ np.diag(lam ** -0.5) @ V.conj().T
    return np.einsum("nik,ij->njk", Q, L)


def decompose(generators: list[np.ndarray], seed: int = 0) -> Commutant | None:
    """The commutant of the Lie algebra spanned by the Hermitian ``generators`` (n x n).

    Returns :func:`trivial` when there are no generators, None when a check fails.
    """
    H = _orthonormal([np.asarray(h, dtype=complex) for h in generators if np.any(h)])
    n = generators[0].shape[0] if generators else 0
    if not H:
        return trivial(n)
    rng = np.random.default_rng(seed)
    H0 = sum(c * h for c, h in zip(rng.standard_normal(len(H)), H))
    hw = _highest_weights(H, H0)
    if hw is None or hw.shape[1] == 0:
        return None
    ev, U = np.linalg.eigh(hw.conj().T @ H0 @ hw)
    scale = max(1.0, float(np.max(np.abs(ev))))
    cuts = np.flatnonzero(np.diff(ev) > GAP * scale) + 1
    parts = []
    for idx in np.split(np.arange(len(ev)), cuts):
        B = hw @ U[:, idx]
        Q = _copies(H, B)
        parts.append(Isotypic(Q.shape[1], Q.shape[2], Q))
    comm = Commutant(n, tuple(parts))
    return comm if _checks(comm, H, rng) else None


def _checks(comm: Commutant, H: list[np.ndarray], rng: np.random.Generator) -> bool:
    """Orthonormal adapted basis, dimensions adding up, claimed commutant commuting."""
    n = comm.n
    if sum(p.d * p.m for p in comm.parts) != n:
        return False
    Qall = np.concatenate([p.Q.reshape(n, -1) for p in comm.parts], axis=1)
    if np.max(np.abs(Qall.conj().T @ Qall - np.eye(n))) > CHECK * 10:
        return False
    blocks = []
    for p in comm.parts:
        Z = rng.standard_normal((p.m, p.m)) + 1j * rng.standard_normal((p.m, p.m))
        blocks.append(Z + Z.conj().T)
    X = comm.operator(blocks)
    size = np.linalg.norm(X)
    return all(np.linalg.norm(h @ X - X @ h) <= CHECK * 10 * size for h in H)
