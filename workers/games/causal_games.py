"""Causal games and causal inequalities as payoff tables.

A game (or, more generally, a Bell-style linear inequality) for N parties with classical inputs
x_k in {0..n_inputs[k]-1} and outputs a_k in {0..n_outputs[k]-1} is stored as

* ``prior[x_1, ..., x_N]``: the input distribution (non-negative, sums to one);
* ``payoff[a_1, ..., a_N, x_1, ..., x_N]``: what the parties earn on outputs a given inputs x
  (0/1 for a game: the winning predicate).

The figure of merit of a behaviour p(a|x) is

    value(p) = sum_{a, x} prior[x] * payoff[a, x] * p(a|x) = sum_{a, x} coefficients[a, x] p(a|x),

so a game's value is its winning probability.  A general coefficient table is the special case
of a uniform prior (see :meth:`Game.from_coefficients`).  Behaviours use the same axis layout
as ``payoff``: outputs first, then inputs, parties in order.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Callable

import numpy as np


@dataclass(frozen=True, eq=False)
class Game:
    """A causal game or linear causal inequality over classical inputs and outputs.

    Parameters
    ----------
    name : str
        Short identifier.
    parties : tuple of str
        Party names, in the order of the axes of ``prior`` and ``payoff``.
    n_inputs, n_outputs : tuple of int
        Alphabet sizes per party.
    prior : numpy.ndarray
        Input distribution, shape ``n_inputs``; non-negative, sums to one.
    payoff : numpy.ndarray
        Payoff table, shape ``n_outputs + n_inputs`` (outputs first).
    description : str
        Human-readable statement of the rules and the input/output encoding.
    """

    name: str
    parties: tuple[str, ...]
    n_inputs: tuple[int, ...]
    n_outputs: tuple[int, ...]
    prior: np.ndarray
    payoff: np.ndarray
    description: str = field(default="")

    def __post_init__(self) -> None:
        n = len(self.parties)
        for name in ("n_inputs", "n_outputs"):
            sizes = tuple(int(s) for s in getattr(self, name))
            if len(sizes) != n or min(sizes, default=1) < 1:
                raise ValueError(f"{name}={sizes!r}: expected {n} integers >= 1, one per party")
            object.__setattr__(self, name, sizes)
        prior = np.array(self.prior, dtype=float)
        payoff = np.array(self.payoff, dtype=float)
        if prior.shape != self.n_inputs:
            raise ValueError(f"prior has shape {prior.shape}, expected n_inputs={self.n_inputs}")
        if prior.min() < 0 or not np.isclose(prior.sum(), 1.0):
            raise ValueError(f"prior sums to {prior.sum()!r} (min {prior.min()!r}): expected a "
                             "probability distribution")
        if payoff.shape != self.n_outputs + self.n_inputs:
            raise ValueError(f"payoff has shape {payoff.shape}, expected n_outputs + n_inputs = "
                             f"{self.n_outputs + self.n_inputs}")
        prior.flags.writeable = False
        payoff.flags.writeable = False
        object.__setattr__(self, "parties", tuple(self.parties))
        object.__setattr__(self, "prior", prior)
        object.__setattr__(self, "payoff", payoff)

    @classmethod
    def from_coefficients(cls, name: str, parties: tuple[str, ...], coefficients: np.ndarray,
                          n_outputs: tuple[int, ...], description: str = "") -> Game:
        """Wrap a Bell-style coefficient table ``coefficients[a..., x...]`` as a Game.

        The prior is uniform and ``payoff = coefficients / prior``, so that
        :attr:`coefficients` returns the table unchanged.
        """
        coefficients = np.asarray(coefficients, dtype=float)
        n_in = coefficients.shape[len(n_outputs):]
        prior = np.full(n_in, 1.0 / max(int(np.prod(n_in)), 1))
        return cls(name, parties, n_in, tuple(n_outputs), prior, coefficients / prior.flat[0],
                   description)

    @property
    def n_parties(self) -> int:
        """Number of parties."""
        return len(self.parties)

    @property
    def coefficients(self) -> np.ndarray:
        """``prior[x] * payoff[a, x]``, shape ``n_outputs + n_inputs``."""
        return self.payoff * self.prior[(np.newaxis,) * self.n_parties]

    def value(self, behaviour: np.ndarray) -> float:
        """Figure of merit of a behaviour ``p[a..., x...]`` (winning probability for a game)."""
        behaviour = np.asarray(behaviour)
        if behaviour.shape != self.payoff.shape:
            raise ValueError(f"behaviour has shape {behaviour.shape}, expected "
                             f"{self.payoff.shape} (outputs then inputs)")
        return float(np.sum(self.coefficients * behaviour))


def _binary_game(name: str, parties: tuple[str, ...], n_inputs: tuple[int, ...],
                 wins: Callable[..., bool], description: str) -> Game:
    """Uniform-prior game with binary outputs from a winning predicate wins(*a, *x)."""
    n_outputs = (2,) * len(parties)
    shape = n_outputs + n_inputs
    table = np.zeros(shape)
    for index in np.ndindex(*shape):
        table[index] = float(wins(*index))
    prior = np.full(n_inputs, 1.0 / np.prod(n_inputs))
    return Game(name, parties, n_inputs, n_outputs, prior, table, description)


def ocb_guess() -> Game:
    """Guess-your-partner's-bit with a third bit choosing the guesser (OCB 2012).

    Source: Oreshkov, Costa, Brukner, Nat. Commun. 3, 1092 (2012); workers/THEORY.md §7.
    Alice's input is her bit x in {0,1}; Bob's input index is ``y = 2*b + b2`` for his bit b and
    the uniform choice bit b2 (b' in the paper).  Alice's output a is her guess of b, Bob's
    output is his guess of x.  Win iff (b2 = 0 and Bob's output = x) or (b2 = 1 and a = b).
    All eight inputs are equally likely.  In workers/THEORY.md §7's notation Alice's bit is called
    a and her guess x; the instruments there map onto this encoding one to one.
    """
    def wins(a: int, g: int, x: int, y: int) -> bool:
        b, b2 = divmod(y, 2)
        return (b2 == 0 and g == x) or (b2 == 1 and a == b)

    return _binary_game("ocb_guess", ("A", "B"), (2, 4), wins,
                        "inputs x (A's bit), y = 2*b + b' (B's bit b, guesser bit b'); "
                        "win iff (b'=0 and B outputs x) or (b'=1 and A outputs b)")


def both_guess() -> Game:
    """Both parties must guess each other's bit (Branciard et al., NJP 18, 013008 (2016)).

    Uniform bits x (Alice) and y (Bob); win iff a = y and b = x.
    """
    return _binary_game("both_guess", ("A", "B"), (2, 2),
                        lambda a, b, x, y: a == y and b == x,
                        "uniform bits x, y; win iff a = y and b = x")


def lugano_game() -> Game:
    """Tripartite game won with certainty by the Lugano process (workers/THEORY.md §§6-7).

    Uniform bits x, y, z for A, B, C; win iff a = (not y) and z, b = (not z) and x,
    c = (not x) and y (Baumeler & Wolf, NJP 18, 013036 (2016)).
    """
    def wins(a: int, b: int, c: int, x: int, y: int, z: int) -> bool:
        return a == ((1 - y) & z) and b == ((1 - z) & x) and c == ((1 - x) & y)

    return _binary_game("lugano_game", ("A", "B", "C"), (2, 2, 2), wins,
                        "uniform bits x, y, z; win iff a = ~y&z, b = ~z&x, c = ~x&y")


_GAMES: MappingProxyType[str, Callable[[], Game]] = MappingProxyType({
    "ocb_guess": ocb_guess,
    "both_guess": both_guess,
    "lugano_game": lugano_game,
})


def list_games() -> list[str]:
    """Names of the built-in games, sorted."""
    return sorted(_GAMES)


def get_game(name: str) -> Game:
    """Build the built-in game called ``name``.

    Raises
    ------
    ValueError
        If the name is unknown; the message lists the known names.
    """
    if name not in _GAMES:
        raise ValueError(f"game={name!r} is not a known game; known games: "
                         f"{', '.join(list_games())}")
    return _GAMES[name]()
