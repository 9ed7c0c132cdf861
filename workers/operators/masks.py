"""Support-pattern masks: which product-basis patterns each linear constraint allows.

A pattern is a bitmask over :attr:`Scenario.subsystems` (bit s set = nontrivial on s).
Every trace-and-replace condition of workers/THEORY.md §§2-4 keeps or kills whole patterns, so
each constraint is a predicate on patterns, evaluated here on integer arrays.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from .basis import pattern_codes
from .scenario import Scenario


def party_bits(scenario: Scenario, k: int) -> int:
    """Bitmask of party k's input and output (the A^k := A_I^k A_O^k of workers/THEORY.md)."""
    return (1 << scenario.input_index(k)) | (1 << scenario.output_index(k))


def valid_patterns(scenario: Scenario, codes: np.ndarray) -> np.ndarray:
    """Patterns allowed in a valid process operator (workers/THEORY.md §2).

    Allowed iff the identity, or some party has it nontrivial on its input and trivial on its
    output, or it is nontrivial on the global future F.  (Araujo et al., NJP 17, 102001 (2015).)
    """
    codes = np.asarray(codes)
    ok = codes == 0
    for k in range(scenario.n_parties):
        i_bit, o_bit = 1 << scenario.input_index(k), 1 << scenario.output_index(k)
        ok |= ((codes & i_bit) != 0) & ((codes & o_bit) == 0)
    ok |= (codes & (1 << scenario.future_index)) != 0
    return ok


def time_ordered_subsystems(scenario: Scenario, order: Sequence[int]) -> list[int]:
    """Subsystem positions in time order ``P, A_I^{k1}, A_O^{k1}, ..., F`` for an order."""
    seq = [scenario.past_index]
    for k in order:
        seq += [scenario.input_index(k), scenario.output_index(k)]
    seq.append(scenario.future_index)
    return seq


def comb_patterns(scenario: Scenario, order: Sequence[int], codes: np.ndarray) -> np.ndarray:
    """Patterns allowed in a comb with the fixed causal order ``order`` (workers/THEORY.md §3).

    Allowed iff the identity or the last subsystem (in time order) on which the pattern is
    nontrivial is an input.
    """
    codes = np.asarray(codes)
    last_kind = np.full(codes.shape, "", dtype=object)
    for s in time_ordered_subsystems(scenario, order):
        hit = (codes & (1 << s)) != 0
        last_kind[hit] = scenario.subsystems[s].kind
    return (codes == 0) | (last_kind == "I")


def all_patterns(scenario: Scenario) -> np.ndarray:
    """Distinct patterns that occur for this scenario's dimensions (sorted)."""
    return np.unique(pattern_codes(scenario.subsystem_dims))


def valid_mask(scenario: Scenario) -> np.ndarray:
    """Boolean mask over all D^2 basis elements: allowed in a valid process."""
    return valid_patterns(scenario, pattern_codes(scenario.subsystem_dims))


def comb_mask(scenario: Scenario, order: Sequence[int]) -> np.ndarray:
    """Boolean mask over all D^2 basis elements: allowed in a comb of the given order."""
    return comb_patterns(scenario, order, pattern_codes(scenario.subsystem_dims))
