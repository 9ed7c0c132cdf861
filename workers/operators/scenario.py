"""Scenarios: parties, their input/output dimensions, and the subsystem order.

The one subsystem order used everywhere in orderless is

    P, A1_I, A1_O, A2_I, A2_O, ..., AN_I, AN_O, F

where P is the global past (an output-only system) and F the global future (an input-only
system).  Both are always present in the subsystem list; a scenario without them has
``d_past = 1`` / ``d_future = 1``, and a one-dimensional system changes nothing in the matrix.
Following workers/THEORY.md §1, P is treated as a party with ``d_in = 1`` and F as a party with
``d_out = 1`` wherever that removes a special case.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import Sequence

import numpy as np

INPUT = "I"
OUTPUT = "O"


@dataclass(frozen=True)
class Party:
    """One party with an input space of dimension ``d_in`` and an output space ``d_out``."""

    name: str
    d_in: int
    d_out: int

    def __post_init__(self) -> None:
        for field in ("d_in", "d_out"):
            value = getattr(self, field)
            if not isinstance(value, (int, np.integer)) or value < 1:
                raise ValueError(f"party {self.name!r}: {field}={value!r}, expected an integer >= 1")


@dataclass(frozen=True)
class Subsystem:
    """One tensor factor: its label, dimension, kind ('I' input or 'O' output), owner index.

    ``owner`` is the party index (0-based), -1 for the global past and ``n_parties`` for the
    global future.
    """

    label: str
    dim: int
    kind: str
    owner: int


@dataclass(frozen=True)
class Scenario:
    """Parties plus optional global past and future, in the documented subsystem order."""

    parties: tuple[Party, ...]
    d_past: int = 1
    d_future: int = 1

    def __post_init__(self) -> None:
        if len(self.parties) < 1:
            raise ValueError("scenario: parties is empty, expected at least one party")
        names = [p.name for p in self.parties]
        if len(set(names)) != len(names):
            raise ValueError(f"scenario: party names {names} are not unique")
        for field in ("d_past", "d_future"):
            value = getattr(self, field)
            if not isinstance(value, (int, np.integer)) or value < 1:
                raise ValueError(f"scenario: {field}={value!r}, expected an integer >= 1")

    @classmethod
    def from_dims(
        cls,
        dims: Sequence[int],
        d_past: int = 1,
        d_future: int = 1,
        names: Sequence[str] | None = None,
    ) -> "Scenario":
        """Build a scenario from ``dims = (dI1, dO1, dI2, dO2, ...)``.

        Parameters
        ----------
        dims
            Input then output dimension for each party, in party order.
        d_past, d_future
            Dimensions of the global past P and global future F (1 = absent).
        names
            Party names; default ``A, B, C, ...``.
        """
        dims = [int(d) for d in dims]
        if len(dims) == 0 or len(dims) % 2:
            raise ValueError(
                f"dims={dims} has {len(dims)} entries, expected an even number "
                "(input then output dimension for each party)"
            )
        n = len(dims) // 2
        if names is None:
            names = default_names(n)
        if len(names) != n:
            raise ValueError(f"names={list(names)} has {len(names)} entries, expected {n}")
        parties = tuple(Party(str(nm), dims[2 * k], dims[2 * k + 1]) for k, nm in enumerate(names))
        return cls(parties, int(d_past), int(d_future))

    @property
    def n_parties(self) -> int:
        return len(self.parties)

    @cached_property
    def subsystems(self) -> tuple[Subsystem, ...]:
        """All tensor factors in the documented order, P first and F last."""
        subs = [Subsystem("P", self.d_past, OUTPUT, -1)]
        for k, p in enumerate(self.parties):
            subs.append(Subsystem(f"{p.name}_I", p.d_in, INPUT, k))
            subs.append(Subsystem(f"{p.name}_O", p.d_out, OUTPUT, k))
        subs.append(Subsystem("F", self.d_future, INPUT, self.n_parties))
        return tuple(subs)

    @cached_property
    def subsystem_dims(self) -> tuple[int, ...]:
        return tuple(s.dim for s in self.subsystems)

    @property
    def dim(self) -> int:
        """Dimension of the Hilbert space the process operator acts on."""
        return int(np.prod(self.subsystem_dims))

    @property
    def d_in_total(self) -> int:
        """Product of all input dimensions, F included (the 1/d_I of white noise)."""
        return int(np.prod([p.d_in for p in self.parties])) * self.d_future

    @property
    def d_out_total(self) -> int:
        """Product of all output dimensions, P included: the trace of a valid process."""
        return int(np.prod([p.d_out for p in self.parties])) * self.d_past

    def input_index(self, k: int) -> int:
        """Position of party k's input in :attr:`subsystems`."""
        return 1 + 2 * k

    def output_index(self, k: int) -> int:
        """Position of party k's output in :attr:`subsystems`."""
        return 2 + 2 * k

    @property
    def past_index(self) -> int:
        return 0

    @property
    def future_index(self) -> int:
        return 1 + 2 * self.n_parties

    def party_index(self, name: str) -> int:
        for k, p in enumerate(self.parties):
            if p.name == name:
                return k
        raise ValueError(f"party {name!r} not in scenario; known: {[p.name for p in self.parties]}")

    def permuted(self, order: Sequence[int]) -> "Scenario":
        """The scenario with parties listed in ``order`` (a permutation of 0..N-1)."""
        order = list(order)
        if sorted(order) != list(range(self.n_parties)):
            raise ValueError(f"order={order} is not a permutation of 0..{self.n_parties - 1}")
        return Scenario(tuple(self.parties[k] for k in order), self.d_past, self.d_future)

    def describe(self) -> str:
        """Short human-readable description, e.g. ``A(2->2) B(2->2)``."""
        parts = [f"{p.name}({p.d_in}->{p.d_out})" for p in self.parties]
        if self.d_past > 1:
            parts.insert(0, f"P({self.d_past})")
        if self.d_future > 1:
            parts.append(f"F({self.d_future})")
        return " ".join(parts)


def default_names(n: int) -> list[str]:
    """``A, B, C, ...`` then ``A1, A2, ...`` beyond 26 parties."""
    if n <= 26:
        return [chr(ord("A") + k) for k in range(n)]
    return [f"A{k + 1}" for k in range(n)]


def permute_operator(scenario: Scenario, W: np.ndarray, order: Sequence[int]) -> np.ndarray:
    """Reorder the tensor factors of ``W`` so that it belongs to ``scenario.permuted(order)``."""
    dims = scenario.subsystem_dims
    n = len(dims)
    perm = [0]
    for k in order:
        perm += [1 + 2 * k, 2 + 2 * k]
    perm.append(n - 1)
    T = W.reshape(dims + dims)
    T = T.transpose(perm + [n + p for p in perm])
    D = scenario.dim
    return T.reshape(D, D)
