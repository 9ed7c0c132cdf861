"""The comb shortcut agrees with the SDP it replaces, and never fires on nonseparable W."""

import itertools

import numpy as np
import pytest

from workers.operators.families import ocb_process, random_comb, white_noise_mixture
from workers.operators.scenario import Scenario
from workers.analysis.separability import analyse
from workers.analysis.shortcuts import comb_order
from workers.operators.validity import white_noise


def test_shortcut_agrees_with_sdp(rng):
    """Combs are separable with R_r = R_g = 0 (workers/THEORY.md §6) by the shortcut and by the SDP
    (force_solve)."""
    s = Scenario.from_dims([2, 2, 3, 2])
    for order in [(0, 1), (1, 0)]:
        W = random_comb(s, order, rng)
        assert comb_order(s, W) == order
        fast, slow = analyse(s, W), analyse(s, W, force_solve=True)
        assert fast.bounds["random"].upper_from.solver == "shortcut"
        assert slow.bounds["random"].upper_from.solver in ("IPM", "SCS")
        assert fast.verdict == slow.verdict == "separable"
        for kind in ("random", "generalized"):
            assert slow.robustness(kind) == pytest.approx(fast.robustness(kind), abs=1e-6)


def test_shortcut_not_taken_for_mixtures_or_nonseparable(rng):
    """A mixture of two orders is in neither mask; OCB and its noisy versions are in none."""
    s = Scenario.from_dims([2, 2, 2, 2])
    W = 0.5 * random_comb(s, (0, 1), rng) + 0.5 * random_comb(s, (1, 0), rng)
    assert comb_order(s, W) is None
    p = ocb_process()
    for w in (1.0, 0.9, 0.5):
        assert comb_order(p.scenario, white_noise_mixture(p.scenario, p.matrix, w)) is None


def test_white_noise_is_a_comb_of_every_order():
    s = Scenario.from_dims([2, 2, 2, 2, 2, 2])
    assert comb_order(s, white_noise(s)) in set(itertools.permutations(range(3)))
    assert analyse(s, white_noise(s)).verdict == "separable"
