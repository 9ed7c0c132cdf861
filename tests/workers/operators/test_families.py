"""Named processes and random combs are valid; combs obey their order's pattern mask."""

import itertools

import numpy as np
import pytest

from workers.operators.basis import to_coefficients
from workers.operators.families import (get_named, lugano_process, ocb_process, quantum_switch,
                              random_comb, white_noise_mixture)
from workers.operators.masks import comb_mask
from workers.operators.scenario import Scenario
from workers.operators.validity import check_validity


@pytest.mark.parametrize("proc", [ocb_process(), quantum_switch(2), lugano_process()],
                         ids=lambda p: p.name)
def test_named_processes_valid(proc):
    """OCB (Oreshkov, Costa, Brukner 2012), quantum switch (Chiribella et al. 2013; Araujo et
    al. 2015), Lugano (Baumeler & Wolf 2016) are valid process operators."""
    rep = check_validity(proc.scenario, proc.matrix)
    assert rep.valid, rep.problems()


@pytest.mark.slow
def test_qutrit_switch_valid():
    """The quantum switch with a qutrit target (2916 x 2916) is valid (Araujo et al. 2015)."""
    p = quantum_switch(3)
    assert check_validity(p.scenario, p.matrix).valid


def test_switch_is_rank_one_with_trace_d_out():
    """W = |w><w| with <w|w> = 2 d^3 = d_O (workers/THEORY.md §6)."""
    p = quantum_switch(2)
    assert np.linalg.matrix_rank(p.matrix, tol=1e-9) == 1
    assert np.trace(p.matrix).real == pytest.approx(16)


SCENARIOS = [([2, 2, 2, 2], 1, 1), ([2, 3, 3, 2], 2, 2), ([2, 2, 2, 2, 2, 2], 1, 1),
             ([2, 1, 3, 2, 2, 2], 2, 1)]


@pytest.mark.parametrize("dims,dp,df", SCENARIOS)
def test_random_combs_valid_and_ordered(dims, dp, df, rng):
    """A comb of order pi lies in pi's pattern mask (workers/THEORY.md §3) and is valid."""
    s = Scenario.from_dims(dims, dp, df)
    for order in itertools.permutations(range(s.n_parties)):
        W = random_comb(s, order, rng)
        assert check_validity(s, W).valid
        c = to_coefficients(W, s.subsystem_dims)
        assert np.abs(c[~comb_mask(s, order)]).max() < 1e-10


def test_white_noise_mixture_bounds():
    p = ocb_process()
    with pytest.raises(ValueError, match="weight p=1.5"):
        white_noise_mixture(p.scenario, p.matrix, 1.5)


def test_registry_lists_names():
    with pytest.raises(ValueError, match="known:.*ocb"):
        get_named("nope")
