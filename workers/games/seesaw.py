"""Lower bounds on a process's value in a causal game by see-saw over the instruments.

Conventions (workers/THEORY.md §7).  Party k has input space A_I (dim ``d_in``) and output
space A_O (dim ``d_out``); W acts on A1_I A1_O A2_I A2_O ... in that order (no global past or
future here: contract them beforehand).  Party k's instrument is an array of Choi operators
``M[x, a]`` on A_I ⊗ A_O, shape ``(n_x, n_a, d, d)`` with ``d = d_in * d_out``, each M[x, a] ⪰ 0
and ``Tr_{A_O} sum_a M[x, a] = 1_{A_I}`` for every x.  The behaviour is

    p(a_1..a_N | x_1..x_N) = Tr[W (M^1[x_1, a_1] ⊗ ... ⊗ M^N[x_N, a_N])]

with no transpose.  The set of such instruments is closed under transposition, so the optimal
value does not depend on whether one reads the Choi operators with or without a transpose; the
explicit instruments of workers/THEORY.md §7 are real symmetric, so there the question does not
arise.  The see-saw fixes all parties but one, whose best instrument is then an SDP (built once
per party with cvxpy Parameters, DPP), and cycles; each step can only raise the value.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import cvxpy as cp
import numpy as np

from .causal_games import Game

SOLVERS = ("CLARABEL", "SCS")


@dataclass(frozen=True, eq=False)
class SeesawResult:
    """Best value found by see-saw, over several seeded starts.

    ``instruments[k]`` has shape ``(n_x, n_a, d, d)``; ``history`` holds the value after each
    round (one SDP per party) of the best start; ``converged`` says whether that start stopped
    on the tolerance rather than on ``max_iter``.
    """

    value: float
    instruments: tuple[np.ndarray, ...]
    history: np.ndarray
    n_starts: int
    best_start: int
    converged: bool
    solver: str


def _party_dims(W: np.ndarray, dims: Sequence[tuple[int, int]], game: Game) -> list[int]:
    """Validate W against dims and the game; return d_in * d_out per party."""
    if len(dims) != game.n_parties:
        raise ValueError(f"dims={list(dims)!r} has {len(dims)} parties, game {game.name!r} "
                         f"has {game.n_parties}")
    sizes = [int(d_in) * int(d_out) for d_in, d_out in dims]
    total = int(np.prod(sizes))
    if W.shape != (total, total):
        raise ValueError(f"dims={list(dims)!r} multiply to {total} but W is "
                         f"{'x'.join(map(str, W.shape))}")
    if not np.allclose(W, W.conj().T, atol=1e-9):
        raise ValueError("W is not Hermitian: expected a process operator")
    return sizes


def _subscripts(n: int, skip: int | None) -> tuple[str, list[str], str]:
    """einsum pieces: W's indices, each instrument's, and the (x, a, row, col) letters."""
    letters = iter("abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ")
    rows, cols, xs, outs = ([next(letters) for _ in range(n)] for _ in range(4))
    w = "".join(rows) + "".join(cols)
    inst = [xs[j] + outs[j] + cols[j] + rows[j] for j in range(n) if j != skip]
    coef = "".join(outs) + "".join(xs)
    if skip is not None:
        coef += "->" + xs[skip] + outs[skip] + rows[skip] + cols[skip]
    return w, inst, coef


def behaviour(W: np.ndarray, instruments: Sequence[np.ndarray],
              dims: Sequence[tuple[int, int]]) -> np.ndarray:
    """The behaviour p[a_1..a_N, x_1..x_N] = Tr[W ⊗_k M^k[x_k, a_k]] (real part)."""
    sizes = [int(d_in) * int(d_out) for d_in, d_out in dims]
    shapes = [np.shape(m) for m in instruments]
    if len(shapes) != len(sizes) or any(len(s) != 4 or s[2:] != (d, d)
                                        for s, d in zip(shapes, sizes)):
        raise ValueError(f"instruments have shapes {shapes}, expected one (n_x, n_a, d, d) "
                         f"array per party with d = {sizes}")
    w, inst, coef = _subscripts(len(sizes), None)
    tensor = np.asarray(W).reshape(sizes + sizes)
    p = np.einsum(",".join([w] + inst) + "->" + coef, tensor, *instruments, optimize=True)
    return p.real


def process_value(W: np.ndarray, instruments: Sequence[np.ndarray],
                  dims: Sequence[tuple[int, int]], game: Game) -> float:
    """The game's value (winning probability) of W with the given instruments."""
    return game.value(behaviour(W, instruments, dims))


def effective_operators(W: np.ndarray, instruments: Sequence[np.ndarray],
                        dims: Sequence[tuple[int, int]], game: Game, k: int) -> np.ndarray:
    """F[x, a] on party k's space with value = sum_{x,a} Tr(F[x, a] M^k[x, a]).

    The other parties' instruments are contracted with W and weighted by the game's
    coefficients; ``instruments[k]`` is ignored.
    """
    sizes = [int(d_in) * int(d_out) for d_in, d_out in dims]
    w, inst, coef = _subscripts(len(sizes), k)
    others = [m for j, m in enumerate(instruments) if j != k]
    tensor = np.asarray(W).reshape(sizes + sizes)
    return np.einsum(",".join([w] + inst + [coef]), tensor, *others, game.coefficients,
                     optimize=True)


def normalise_instrument(M: np.ndarray, d_in: int, d_out: int) -> np.ndarray:
    """Make M[x, a] exactly valid: clip negative eigenvalues, then rescale the input side.

    With S_x = Tr_{A_O} sum_a M[x, a], the congruence (S_x^{-1/2} ⊗ 1) M (S_x^{-1/2} ⊗ 1) keeps
    each operator PSD and makes the sum trace-preserving.
    """
    vals, vecs = np.linalg.eigh(M)
    M = (vecs * np.clip(vals, 0.0, None)[..., None, :]) @ vecs.conj().swapaxes(-1, -2)
    total = M.sum(axis=1).reshape(-1, d_in, d_out, d_in, d_out)
    S = np.einsum("xiojo->xij", total) + 1e-14 * np.eye(d_in)
    s_vals, s_vecs = np.linalg.eigh(S)
    T = (s_vecs / np.sqrt(s_vals)[:, None, :]) @ s_vecs.conj().swapaxes(-1, -2)
    T = np.einsum("xij,op->xiojp", T, np.eye(d_out)).reshape(len(S), d_in * d_out, -1)
    return T[:, None] @ M @ T.conj().swapaxes(-1, -2)[:, None]


def random_instrument(rng: np.random.Generator, n_x: int, n_a: int, d_in: int, d_out: int,
                      real: bool = False) -> np.ndarray:
    """Random valid instrument: Ginibre PSD operators made valid by :func:`normalise_instrument`."""
    d = d_in * d_out
    G = rng.normal(size=(n_x, n_a, d, d))
    if not real:
        G = G + 1j * rng.normal(size=(n_x, n_a, d, d))
    return normalise_instrument(G @ G.conj().swapaxes(-1, -2), d_in, d_out)


class _PartySDP:
    """max sum_{x,a} Tr(F[x,a] M[x,a]) over party k's instruments, compiled once (DPP)."""

    def __init__(self, n_x: int, n_a: int, d_in: int, d_out: int, real: bool) -> None:
        d = d_in * d_out
        kind = {"symmetric": True} if real else {"hermitian": True}
        self.shape, self.real = (n_x, n_a, d, d), real
        self.M = [[cp.Variable((d, d), **kind) for _ in range(n_a)] for _ in range(n_x)]
        flat = [m for row in self.M for m in row]
        parts = [cp.vec(m if real else cp.real(m), order="F") for m in flat]
        self.g_re = cp.Parameter(len(flat) * d * d)
        objective = self.g_re @ cp.hstack(parts)
        if not real:
            self.g_im = cp.Parameter(len(flat) * d * d)
            objective = objective - self.g_im @ cp.hstack([cp.vec(cp.imag(m), order="F")
                                                           for m in flat])
        constraints = [m >> 0 for m in flat]
        constraints += [cp.partial_trace(sum(row), [d_in, d_out], axis=1) == np.eye(d_in)
                        for row in self.M]
        self.problem = cp.Problem(cp.Maximize(objective), constraints)

    def solve(self, F: np.ndarray, solver: str, options: dict[str, float]) -> np.ndarray:
        """Best instrument against effective operators F[x, a] (shape (n_x, n_a, d, d))."""
        G = np.swapaxes(F, -1, -2).reshape((-1,) + self.shape[2:])
        G = np.stack([g.flatten(order="F") for g in G]).ravel()
        self.g_re.value = G.real
        if not self.real:
            self.g_im.value = G.imag
        self.problem.solve(solver=solver, **options)
        if self.problem.status not in ("optimal", "optimal_inaccurate"):
            raise RuntimeError(f"see-saw SDP ended with status {self.problem.status!r}")
        return np.array([[m.value for m in row] for row in self.M])


def _solver_options(solver: str, tol: float) -> dict[str, float]:
    """Map one tolerance onto the chosen solver's own option names."""
    if solver == "SCS":
        return {"eps_abs": tol, "eps_rel": tol, "max_iters": 100_000}
    return {"tol_gap_abs": tol, "tol_gap_rel": tol, "tol_feas": tol}


def _one_start(W: np.ndarray, dims: Sequence[tuple[int, int]], game: Game,
               sdps: list[_PartySDP], instruments: list[np.ndarray], max_iter: int,
               stop_tol: float, solver: str, options: dict[str, float]
               ) -> tuple[list[np.ndarray], list[float], bool]:
    """Cycle over the parties until a round improves the value by less than stop_tol.

    A step is kept only if it does not lower the exact value (after
    :func:`normalise_instrument`), so the history is non-decreasing.
    """
    value = process_value(W, instruments, dims, game)
    history = [value]
    for _ in range(max_iter):
        for k, sdp in enumerate(sdps):
            F = effective_operators(W, instruments, dims, game, k)
            trial = list(instruments)
            trial[k] = normalise_instrument(sdp.solve(F, solver, options), *dims[k])
            trial_value = process_value(W, trial, dims, game)
            if trial_value >= value:
                instruments, value = trial, trial_value
        history.append(value)
        if history[-1] - history[-2] < stop_tol:
            return instruments, history, True
    return instruments, history, False


def seesaw(W: np.ndarray, dims: Sequence[tuple[int, int]], game: Game, n_starts: int = 5,
           seed: int | np.random.SeedSequence = 0, max_iter: int = 100,
           stop_tol: float = 1e-7, solver: str = "CLARABEL", solver_tol: float = 1e-8
           ) -> SeesawResult:
    """Best value of ``game`` with process W found by see-saw from random instruments.

    Parameters
    ----------
    W : numpy.ndarray
        Process operator on A1_I A1_O ... AN_I AN_O (no global past or future).
    dims : sequence of (d_in, d_out)
        Per party.
    game : Game
        The game; its coefficients weight the behaviour.
    n_starts : int
        Random starts; start i uses child i of ``SeedSequence(seed)`` (a SeedSequence passed
        in is spawned from, which advances it).
    max_iter, stop_tol : int, float
        At most ``max_iter`` rounds per start; stop when a round gains less than ``stop_tol``.
    solver, solver_tol : str, float
        "CLARABEL" or "SCS", and the tolerance passed to it (gap/feasibility or eps).

    Returns
    -------
    SeesawResult
        A lower bound on the process's best value (instruments are exactly valid).
    """
    W = np.asarray(W)
    _party_dims(W, dims, game)
    if solver not in SOLVERS:
        raise ValueError(f"solver={solver!r}: expected one of {', '.join(SOLVERS)}")
    if n_starts < 1:
        raise ValueError(f"n_starts={n_starts!r}: expected an integer >= 1")
    real = not np.iscomplexobj(W) or bool(np.abs(W.imag).max() < 1e-12)
    W = W.real if real else W
    shapes = [(n_x, n_a, d_in, d_out) for n_x, n_a, (d_in, d_out)
              in zip(game.n_inputs, game.n_outputs, dims)]
    sdps = [_PartySDP(*shape, real) for shape in shapes]
    options = _solver_options(solver, solver_tol)
    root = seed if isinstance(seed, np.random.SeedSequence) else np.random.SeedSequence(seed)
    runs = []
    for child in root.spawn(n_starts):
        rng = np.random.default_rng(child)
        start = [random_instrument(rng, *shape, real=real) for shape in shapes]
        runs.append(_one_start(W, dims, game, sdps, start, max_iter, stop_tol, solver, options))
    best = int(np.argmax([run[1][-1] for run in runs]))
    instruments, history, converged = runs[best]
    return SeesawResult(history[-1], tuple(instruments), np.array(history), n_starts, best,
                        converged, solver)
