"""Causal structures: spans, free-parameter counts, and the N >= 4 nesting."""

import numpy as np
import pytest

from workers.operators.basis import pattern_sizes
from workers.operators.masks import valid_mask
from workers.operators.scenario import Scenario
from workers.structures.causal import build_structure, pattern_systems


def _span_and_free(s, method):
    sizes = pattern_sizes(s.subsystem_dims)
    systems = pattern_systems(build_structure(s, method), list(sizes))
    span = sum(sizes[p] for p, v in systems.items() if v.spanned)
    free = sum(sizes[p] * v.null.shape[1] for p, v in systems.items() if v.spanned)
    return span, free


@pytest.mark.parametrize("dims,dp,df", [([2, 2, 2, 2], 1, 1), ([2] * 6, 1, 1),
                                        ([2, 2, 2, 2], 2, 2), ([2, 1] * 4, 1, 1)])
def test_span_is_valid_subspace(dims, dp, df):
    """Separable processes span the whole valid subspace (1° is interior; Araujo et al.
    2015), for every structure."""
    s = Scenario.from_dims(dims, dp, df)
    for method in ("sufficient", "necessary", "fixed_orders"):
        span, _ = _span_and_free(s, method)
        assert span == valid_mask(s).sum()


def test_bipartite_freedom_is_the_overlap():
    """For two qubit parties W^{A<B} is free exactly on the 16 patterns both orders allow
    (workers/THEORY.md §5 counting check)."""
    assert _span_and_free(Scenario.from_dims([2, 2, 2, 2]), "exact")[1] == 16


def test_nesting_of_freedom():
    """The necessary set relaxes the sufficient one for N = 4: more free parameters."""
    s4 = Scenario.from_dims([2, 2, 2, 1, 2, 1, 2, 1])
    assert _span_and_free(s4, "sufficient")[1] < _span_and_free(s4, "necessary")[1]


def test_exact_refused_for_four_parties():
    with pytest.raises(ValueError, match="N <= 3"):
        build_structure(Scenario.from_dims([2, 1] * 4), "exact")
