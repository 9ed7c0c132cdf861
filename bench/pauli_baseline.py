"""Random robustness over Pauli coefficients: the careful hand-written cvxpy formulation.

Each part of the decomposition is a vector of real coefficients on the Pauli strings
(``W_j = (1/D) sum_s x_s P_s``), so every trace-and-replace condition of the causal structure
says that certain coefficients, or certain sums of coefficients, vanish.  Strings a part can
never carry are not variables at all.  Positivity is imposed on the real embedding
``[[Re W_j, -Im W_j], [Im W_j, Re W_j]] ⪰ 0`` (2D x 2D), and the problem goes to SCS.  This
is the formulation a researcher writes for one paper; it shares no code with ``workers/``
(its Pauli strings, pattern rules and conditions are rebuilt here from the definitions).

Conditions (Wechs, Abbott, Branciard, NJP 21, 013027 (2019), tripartite case; Araujo et al.,
NJP 17, 102001 (2015), bipartite case), written on supports: a Pauli string is *nontrivial*
on a subsystem when its factor there is not the identity.

* bipartite, order (k, l): a string may appear in W^{k<l} only if it is the identity or its
  last nontrivial subsystem, in the time order A_I^k A_O^k A_I^l A_O^l, is an input;
* tripartite, leaf W_(k,l) (m the third party): (iii) trivial on A_O^m; (ii) no string
  nontrivial on A_O^l and trivial on A_I^m A_O^m; (i) on the sum W_(k) = W_(k,l) + W_(k,m), no
  string nontrivial on A_O^k and trivial on every system of l and m.

Subsystem order A1_I, A1_O, A2_I, A2_O, ...; each subsystem a qubit or trivial (d = 1).
White noise ``1° = 1 / d_I``.  The noise weight r is left free, so that a separable process
is given the (negative) amount by which it lies inside the set; the robustness is max(r, 0).
"""

from __future__ import annotations

import itertools
import time
from dataclasses import dataclass
from typing import Sequence

import cvxpy as cp
import numpy as np
import scipy.sparse as sp

_I = np.eye(2, dtype=complex)
_PAULI = (_I, np.array([[0, 1], [1, 0]], dtype=complex),
          np.array([[0, -1j], [1j, 0]]), np.array([[1, 0], [0, -1]], dtype=complex))


@dataclass(frozen=True)
class PauliResult:
    """Signed optimum r, cvxpy status, and the wall seconds of building + solving."""

    value: float
    status: str
    setup_time: float
    solve_time: float


def pauli_strings(dims: Sequence[int]) -> tuple[list[tuple[int, ...]], sp.csr_matrix]:
    """All strings (one letter 0..3 per qubit, 0 on trivial subsystems) and the sparse
    matrix whose column s is vec(P_s) (row-major), each P_s a signed permutation matrix."""
    letters = [range(4) if d == 2 else range(1) for d in dims]
    strings = list(itertools.product(*letters))
    D = int(np.prod(dims))
    rows, cols, vals = [], [], []
    for s, word in enumerate(strings):
        M = np.ones((1, 1), dtype=complex)
        for d, a in zip(dims, word):
            M = np.kron(M, _PAULI[a] if d == 2 else np.ones((1, 1)))
        r, c = np.nonzero(M)
        rows.append(r * D + c)
        cols.append(np.full(len(r), s))
        vals.append(M[r, c])
    vec = sp.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                        shape=(D * D, len(strings)))
    return strings, vec


def _nontrivial(word, systems) -> bool:
    return any(word[x] != 0 for x in systems)


def _tripartite_rules(words):
    """Allowed strings per leaf (k, l) and the strings whose sum over (k, l), (k, m) vanishes."""
    sys_of = {k: (2 * k, 2 * k + 1) for k in range(3)}
    allowed, first = {}, {}
    for k, l in itertools.permutations(range(3), 2):
        m = 3 - k - l
        allowed[(k, l)] = [s for s, w in enumerate(words)
                           if w[2 * m + 1] == 0  # (iii)
                           and not (w[2 * l + 1] != 0 and not _nontrivial(w, sys_of[m]))]  # (ii)
    for k in range(3):
        rest = [x for j in range(3) if j != k for x in sys_of[j]]
        first[k] = [s for s, w in enumerate(words)
                    if w[2 * k + 1] != 0 and not _nontrivial(w, rest)]  # (i)
    return allowed, first


def _bipartite_rules(words):
    allowed = {}
    for k, l in ((0, 1), (1, 0)):
        time_order = [2 * k, 2 * k + 1, 2 * l, 2 * l + 1]
        ok = []
        for s, w in enumerate(words):
            used = [x for x in time_order if w[x] != 0]
            if not used or used[-1] % 2 == 0:  # identity, or ends on an input
                ok.append(s)
        allowed[(k, l)] = ok
    return allowed, {}


def pauli_random_robustness(W: np.ndarray, dims: Sequence[int], eps: float = 1e-7,
                            max_iters: int = 200_000) -> PauliResult:
    """Signed random robustness of W (2 or 3 parties), a fresh cvxpy problem per call.

    Parameters
    ----------
    W
        Process operator on A1_I A1_O A2_I A2_O (A3_I A3_O).
    dims
        Dimension of each subsystem, each 1 or 2.
    eps
        SCS ``eps_abs`` and ``eps_rel``.
    """
    t0 = time.perf_counter()
    dims = tuple(int(d) for d in dims)
    if len(dims) not in (4, 6) or any(d not in (1, 2) for d in dims):
        raise ValueError(f"dims={dims}: expected 4 or 6 subsystems of dimension 1 or 2")
    D = int(np.prod(dims))
    W = np.asarray(W, dtype=complex)
    if W.shape != (D, D):
        raise ValueError(f"W has shape {W.shape}, expected {(D, D)} for dims={dims}")
    words, vec = pauli_strings(dims)
    # coefficients of W: w_s = Tr(P_s W) (P_s Hermitian, Tr(P_s P_t) = D delta)
    w = np.real(vec.T.conj() @ W.T.reshape(-1))
    d_in = int(np.prod(dims[0::2]))
    allowed, first = (_tripartite_rules if len(dims) == 6 else _bipartite_rules)(words)
    r = cp.Variable()
    parts, constraints = {}, []
    n_s = len(words)
    total = 0
    for key, idx in allowed.items():
        x = cp.Variable(len(idx))
        place = sp.csr_matrix((np.ones(len(idx)), (idx, np.arange(len(idx)))), shape=(n_s, len(idx)))
        full = place @ x  # coefficient vector over all strings
        parts[key] = full
        total = total + full
        M = vec[:, idx] @ x / D  # vec(W_j), complex
        re = cp.reshape(cp.real(M), (D, D), order="C")
        im = cp.reshape(cp.imag(M), (D, D), order="C")
        emb = cp.bmat([[re, -im], [im, re]])
        constraints.append((emb + emb.T) / 2 >> 0)
    for k, idx in first.items():
        others = [key for key in parts if key[0] == k]
        constraints.append(sum(parts[key] for key in others)[idx] == 0)
    noise = np.zeros(n_s)
    noise[0] = D / d_in  # Tr(1°) on the identity string
    constraints.append(total == w + r * noise)
    prob = cp.Problem(cp.Minimize(r), constraints)
    built = time.perf_counter()
    prob.solve(solver="SCS", eps_abs=eps, eps_rel=eps, max_iters=max_iters)
    done = time.perf_counter()
    compile_s = prob.compilation_time or 0.0
    value = float("nan") if r.value is None else float(r.value)
    return PauliResult(value, prob.status, built - t0 + compile_s, done - built - compile_s)
