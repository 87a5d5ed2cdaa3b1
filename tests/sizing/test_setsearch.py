"""Set searches: greedy with swaps against exhaustive search."""

import numpy as np
import pytest
from sizingplants import random_plant

from dampctl.laws import dvf
from dampctl.sizing.screening import SetEvaluator, loop_template
from dampctl.sizing.setsearch import all_sets, search_exhaustive, search_greedy


def _evaluator(plant, modes):
    templates = [loop_template(plant, dvf.design(plant, [p.name], modes=modes, gain=1.0))
                 for p in plant.pairs if p.sensor.startswith("v")]
    return SetEvaluator(plant, templates, modes)


def test_greedy_with_swaps_equals_exhaustive_when_k_is_n_minus_one():
    # Every (n−1)-set is one swap away from any other, so greedy + swaps sees them all.
    plant = random_plant(11, n_modes=4, n_sites=5)
    ev = _evaluator(plant, [1, 2, 3, 4])
    exhaustive = ev.tune(all_sets(ev, range(5), 4))
    greedy = search_greedy(ev, range(5), 4)
    best = int(np.argmax(exhaustive.score))
    assert sorted(greedy.sets[0]) == sorted(exhaustive.sets[best])
    assert greedy.score[0] == pytest.approx(exhaustive.score[best], abs=1e-12)


@pytest.mark.parametrize("seed", [1, 2, 5])
def test_exhaustive_is_at_least_as_good_as_greedy(seed):
    plant = random_plant(seed, n_modes=5, n_sites=7)
    ev = _evaluator(plant, [1, 2, 3])
    sets = all_sets(ev, range(7), 3)
    exhaustive = search_exhaustive(ev, sets)
    greedy = search_greedy(ev, range(7), 3)
    both = np.array([exhaustive.sets[0], greedy.sets[0]])
    fine = ev.tune(both, rounds=10)
    assert fine.score[0] >= fine.score[1] - 1e-9
    # and the screened winner is the best of every set tuned the same way
    full = ev.tune(sets, rounds=10)
    assert fine.score[0] >= full.score.max() - 1e-6
