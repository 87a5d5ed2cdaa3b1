"""The gain search on objectives whose optimum is known in closed form."""

import numpy as np
import pytest

from dampctl.laws._tuning import search_gains


def test_maximum_of_a_peaked_objective():
    # score(g) = 1 − (log10 g − 0.3)²: maximum 1 at g = 10^0.3
    # (the search keeps the smallest gains within 0.1 % of the best objective: |x| <= 0.032)
    result = search_gains(lambda g: 1 - (np.log10(g[:, 0]) - 0.3) ** 2, np.ones(1))
    assert abs(np.log10(result.gains[0]) - 0.3) <= np.sqrt(1e-3) + 1e-9
    assert result.score >= 1 - 1e-3
    assert result.reached


def test_smallest_gain_reaching_a_target_on_a_monotone_objective():
    # score(g) = g/(1 + g): the target 0.2 is reached first at g = 0.25
    result = search_gains(lambda g: g[:, 0] / (1 + g[:, 0]), np.ones(1), target=0.2)
    assert result.gains[0] == pytest.approx(0.25, rel=2e-3)
    assert result.gains[0] >= 0.25 * (1 - 1e-12)
    miss = search_gains(lambda g: g[:, 0] / (1 + g[:, 0]) * 0.1, np.ones(1), target=0.2)
    assert not miss.reached


def test_loop_refinement_moves_each_loop_to_its_own_optimum():
    # two loops with optima at different gains: min of two peaked terms
    def score(g):
        return np.minimum(1 - (np.log10(g[:, 0]) - 0.0) ** 2, 1 - (np.log10(g[:, 1]) - 0.4) ** 2)

    result = search_gains(score, np.ones(2))
    assert result.score > 0.99
    np.testing.assert_allclose(np.log10(result.gains), [0.0, 0.4], atol=0.08)


def test_unstable_everywhere_keeps_minus_infinity():
    result = search_gains(lambda g: np.full(g.shape[0], -np.inf), np.ones(1))
    assert result.score == -np.inf
