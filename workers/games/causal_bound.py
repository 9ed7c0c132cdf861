"""Causal bounds of games and inequalities by a linear program over deterministic strategies.

A deterministic strategy is a table ``outputs[x_1, ..., x_N]`` giving the joint output index
(C order over the parties' outputs) for each joint input.  It is *causal* when it can be
produced in a (possibly input-dependent) causal order, defined recursively: some party k
answers with a function of its own input only, and for every value of x_k the remaining
parties' table (which may depend on x_k) is causal.  For three parties this includes the
strategies where the order of the last two depends on the first party's input and output;
the definition is that of Oreshkov & Giarmatzi, NJP 18, 093020 (2016) and Abbott et al.,
PRA 94, 032131 (2016) for deterministic correlations.  The causal polytope is the convex hull
of these tables read as 0/1 behaviours p(a|x); the causal bound of a linear objective is its
maximum over the polytope, found by :func:`scipy.optimize.linprog` (HiGHS) over the convex
weights.  Check values (workers/THEORY.md §7): 112 strategies bipartite binary, 138,304
tripartite binary.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.optimize import linprog

from .causal_games import Game

MAX_TABLE_ENTRIES = 50_000_000


@dataclass(frozen=True, eq=False)
class DeterministicStrategy:
    """One deterministic causal strategy.

    ``outputs[x_1, ..., x_N, k]`` is party k's output on joint input x; ``description`` reads
    the table as a causal order with response functions.
    """

    outputs: np.ndarray
    description: str


@dataclass(frozen=True, eq=False)
class CausalBound:
    """Maximum of a game's objective over the causal polytope.

    ``value`` is the LP optimum, ``strategy`` an optimal deterministic strategy,
    ``n_strategies`` the number of distinct deterministic causal strategies (polytope
    vertices) and ``lp_status`` the HiGHS status message.
    """

    value: float
    strategy: DeterministicStrategy
    n_strategies: int
    lp_status: str


def _all_functions(n_domain: int, n_range: int) -> np.ndarray:
    """Every function {0..n_domain-1} -> {0..n_range-1}, shape (n_range**n_domain, n_domain)."""
    codes = np.arange(n_range ** n_domain)
    powers = n_range ** np.arange(n_domain - 1, -1, -1)
    return (codes[:, None] // powers[None, :]) % n_range


def _unique_tables(tables: np.ndarray, n_joint: int) -> np.ndarray:
    """Distinct rows of ``tables`` (shape (n, *inputs)), first-occurrence order kept."""
    flat = tables.reshape(len(tables), -1)
    if flat.shape[1] * np.log2(max(n_joint, 2)) < 62:
        codes = flat @ (n_joint ** np.arange(flat.shape[1], dtype=np.int64))
        _, first = np.unique(codes, return_index=True)
    else:
        _, first = np.unique(flat, axis=0, return_index=True)
    return tables[np.sort(first)]


def _tables_with_first(k: int, n_inputs: tuple[int, ...], n_outputs: tuple[int, ...]
                       ) -> np.ndarray:
    """Causal tables in which party k acts first (its output depends on x_k only)."""
    rest = tuple(j for j in range(len(n_inputs)) if j != k)
    rest_tables = causal_tables(tuple(n_inputs[j] for j in rest),
                                tuple(n_outputs[j] for j in rest))
    strides = np.cumprod((1,) + n_outputs[::-1])[-2::-1]
    rest_digits = np.stack(np.unravel_index(np.arange(int(np.prod([n_outputs[j] for j in rest]))),
                                            [n_outputs[j] for j in rest]))
    lookup = strides[list(rest)] @ rest_digits
    own = _all_functions(n_inputs[k], n_outputs[k]) * strides[k]
    choices = _all_functions(n_inputs[k], len(rest_tables))
    sub = lookup[rest_tables[choices]]
    shape_rest = sub.shape[2:]
    full = own[:, None, :, *([None] * len(shape_rest))] + sub[None]
    full = full.reshape((-1, n_inputs[k]) + shape_rest)
    return np.moveaxis(full, 1, 1 + k)


@lru_cache(maxsize=16)
def causal_tables(n_inputs: tuple[int, ...], n_outputs: tuple[int, ...]) -> np.ndarray:
    """All distinct deterministic causal strategies as joint-output tables.

    Parameters
    ----------
    n_inputs, n_outputs : tuple of int
        Alphabet sizes per party.

    Returns
    -------
    numpy.ndarray
        Read-only integer array of shape ``(n_strategies, *n_inputs)``.
    """
    n = len(n_inputs)
    n_joint = int(np.prod(n_outputs))
    if n == 1:
        tables = _all_functions(n_inputs[0], n_outputs[0])
    else:
        _check_size(n_inputs, n_outputs)
        tables = np.concatenate([_tables_with_first(k, n_inputs, n_outputs) for k in range(n)])
        tables = _unique_tables(tables, n_joint)
    tables.flags.writeable = False
    return tables


def _check_size(n_inputs: tuple[int, ...], n_outputs: tuple[int, ...]) -> None:
    """Refuse scenarios whose enumeration would not fit in memory (a rough upper estimate)."""
    estimate = float(np.prod(n_outputs)) ** float(np.prod(n_inputs))
    estimate = min(estimate, _count_upper(n_inputs, n_outputs)) * float(np.prod(n_inputs))
    if estimate > MAX_TABLE_ENTRIES:
        raise ValueError(f"n_inputs={n_inputs}, n_outputs={n_outputs}: enumerating the "
                         f"deterministic causal strategies needs ~{estimate:.3g} table entries, "
                         f"more than the limit {MAX_TABLE_ENTRIES}")


def _count_upper(n_inputs: tuple[int, ...], n_outputs: tuple[int, ...]) -> float:
    """Upper bound on the number of causal tables (sum over first parties, no deduplication)."""
    if len(n_inputs) == 1:
        return float(n_outputs[0]) ** n_inputs[0]
    total = 0.0
    for k in range(len(n_inputs)):
        rest_in = n_inputs[:k] + n_inputs[k + 1:]
        rest_out = n_outputs[:k] + n_outputs[k + 1:]
        total += (float(n_outputs[k]) * _count_upper(rest_in, rest_out)) ** n_inputs[k]
    return total


def table_scores(tables: np.ndarray, coefficients: np.ndarray) -> np.ndarray:
    """Objective ``sum_x coefficients[outputs(x), x]`` of each table, vectorised."""
    n_in = tables.shape[1:]
    flat_coef = coefficients.reshape(-1, int(np.prod(n_in)))
    flat = tables.reshape(len(tables), -1)
    return flat_coef[flat, np.arange(flat.shape[1])[None, :]].sum(axis=1)


def causal_bound(game: Game) -> CausalBound:
    """Maximum of ``game``'s objective over the causal polytope, by LP (HiGHS).

    The variables are convex weights on the deterministic causal strategies; the optimum of a
    linear objective sits on a vertex, returned as :class:`DeterministicStrategy`.
    """
    tables = causal_tables(game.n_inputs, game.n_outputs)
    scores = table_scores(tables, game.coefficients)
    n = len(tables)
    result = linprog(-scores, A_eq=np.ones((1, n)), b_eq=[1.0], bounds=(0, None),
                     method="highs")
    if result.status != 0:
        raise RuntimeError(f"causal-bound LP for game {game.name!r} failed: {result.message}")
    best = int(np.argmax(result.x))
    return CausalBound(float(-result.fun), strategy_from_table(tables[best], game), n,
                       str(result.message))


def strategy_from_table(table: np.ndarray, game: Game) -> DeterministicStrategy:
    """Per-party outputs of a joint-output table and a readable causal-order description."""
    outputs = np.stack(np.unravel_index(table, game.n_outputs), axis=-1)
    lines = _describe(outputs, list(range(game.n_parties)), game.parties, 0)
    return DeterministicStrategy(outputs, "\n".join(lines))


def _describe(outputs: np.ndarray, active: list[int], names: tuple[str, ...],
              depth: int) -> list[str]:
    """Recursive description: pick a party whose output ignores the others' inputs."""
    pad = "  " * depth
    if not active:
        return []
    for k in active:
        own = np.moveaxis(outputs[..., k], k, 0).reshape(outputs.shape[k], -1)
        if np.all(own == own[:, :1]):
            break
    else:
        raise ValueError("table is not a causal strategy: no party can act first")
    response = own[:, 0].tolist()
    when = "first" if depth == 0 else "next"
    lines = [f"{pad}{names[k]} acts {when}: outputs {response} on x_{names[k]} = 0, 1, ..."]
    rest = [j for j in active if j != k]
    for value in range(outputs.shape[k]) if rest else []:
        sub = np.take(outputs, [value], axis=k)
        lines.append(f"{pad}if x_{names[k]} = {value}:")
        lines += _describe(sub, rest, names, depth + 1)
    return lines
