"""Shapers for a plant's modes: open loop, closed loop, kind choice and drift."""

import numpy as np
import pytest

from dampctl.analysis.closedloop import closed_loop_modes
from dampctl.analysis.robustness import drift_cases
from dampctl.errors import UsageError
from dampctl.laws import dvf
from dampctl.laws.shapers import shaper_for_mode
from dampctl.laws.shaping import design_shaper
from dampctl.model.components import Requirements
from dampctl.testing import chain_plant


def _chain():
    return chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)  # 76.3 and 148.5 Hz


def test_open_loop_shaper_cancels_both_modes():
    plant = _chain()
    result = design_shaper(plant, [1, 2], kind="zvd")
    shaper = result.shaper
    assert result.loop == "open" and shaper.modes == (1, 2)
    for k in range(2):
        assert shaper.residual(plant.freqs_hz[k], plant.dampings[k]) < 1e-12
        assert result.modes[k].freq_hz == pytest.approx(plant.freqs_hz[k])
    # the convolution of one ZVD per mode (Singer & Seering 1990)
    one = shaper_for_mode(plant.freqs_hz[0], 0.01, "zvd")
    two = shaper_for_mode(plant.freqs_hz[1], 0.01, "zvd")
    assert result.duration_s == pytest.approx(one.duration_s + two.duration_s, rel=1e-12)
    assert result.modes[0].band_percent[0] < 0 < result.modes[0].band_percent[1]


def test_closed_loop_shaper_uses_the_damped_modes():
    plant = _chain()
    design = dvf.design(plant, ["p1"], gain=60.0)
    matched = closed_loop_modes(plant, design)
    result = design_shaper(plant, [1, 2], design=design, kind="zv", drift=0.0)
    assert result.loop == "closed" and result.drift is None
    for k, mode in enumerate(result.modes):
        assert mode.freq_hz == pytest.approx(matched.freq_hz[k], rel=1e-12)
        assert mode.damping == pytest.approx(matched.damping[k], rel=1e-12)
        assert result.shaper.residual(mode.freq_hz, mode.damping) < 1e-12
    assert result.modes[0].damping > 0.02  # really the damped loop, not the plant's 1 %


def test_kind_chosen_for_an_insensitivity():
    plant = _chain()
    # ±2 %: ZV (±3.2 % undamped) is the shortest that covers it; ±10 %: ZVD (±14 %); ±30 %:
    # none, so the most insensitive is used and the miss reported
    assert design_shaper(plant, [1], insensitivity=0.02).shaper.kind == "zv"
    result = design_shaper(plant, [1], insensitivity=0.10)
    assert result.shaper.kind == "zvd" and result.insensitivity_met is True
    result = design_shaper(plant, [1], insensitivity=0.30)
    assert result.shaper.kind == "zvdd" and result.insensitivity_met is False
    assert "none meets" in result.kind_reason
    given = design_shaper(plant, [1], kind="zv", insensitivity=0.10)
    assert given.shaper.kind == "zv" and given.insensitivity_met is False
    assert design_shaper(plant, [1]).shaper.kind == "zvd"


def test_drift_cases_are_those_of_assess():
    plant = _chain()
    result = design_shaper(plant, [1, 2], kind="zv", drift=0.05, samples=8, seed=3)
    cases = drift_cases(2, 0.05, samples=8, seed=3, step_modes=3)
    v = result.shaper.residual(plant.freqs_hz[None, :] * cases, plant.dampings[None, :])
    assert result.drift.n_cases == cases.shape[0]
    assert result.drift.worst_residual == pytest.approx(float(np.max(v)), rel=1e-12)
    assert result.drift.cases_over == int(np.sum(np.any(v > 0.05 * (1 + 1e-7), axis=1)))
    np.testing.assert_allclose([m.drift_worst for m in result.modes], np.max(v, axis=0))


def test_closed_loop_drift_solves_the_loop_again():
    plant = _chain()
    design = dvf.design(plant, ["p1"], gain=60.0)
    result = design_shaper(plant, [1], design=design, kind="zvd", drift=0.05, samples=4)
    assert result.drift.unstable_cases == 0
    assert 0 < result.drift.worst_residual < 0.2  # ZVD holds a ±5 % drift well


def test_bad_requests():
    plant = _chain()
    with pytest.raises(UsageError, match="mode 3 does not exist"):
        design_shaper(plant, [3])
    with pytest.raises(UsageError, match="give the modes"):
        design_shaper(plant, [])
    with pytest.raises(UsageError, match="tolerance"):
        design_shaper(plant, [1], tolerance=1.5)
    with pytest.raises(UsageError, match="kind"):
        design_shaper(plant, [1], kind="zz")
    plant = chain_plant([1.0], [5e5], damping=0.01)
    plant = type(plant)(modes=plant.modes, sites=plant.sites, actuators=plant.actuators,
                        sensors=plant.sensors, pairs=plant.pairs,
                        requirements=Requirements())
    design = dvf.design(plant, ["p1"], gain=5000.0)  # overdamped: the pole is real
    with pytest.raises(UsageError, match="does not oscillate"):
        design_shaper(plant, [1], design=design)


def test_shaper_for_a_passive_design_uses_the_structure_with_its_parts():
    # the absorber splits the mode: the shaper is built on the less damped of its two poles
    from dampctl.analysis.passive import passive_modes
    from dampctl.laws import tmd
    from dampctl.model.components import Disturbance, Output

    plant = chain_plant([1.0], [4e4], damping=0.005)
    plant = type(plant)(modes=plant.modes, sites=plant.sites, actuators=plant.actuators,
                        sensors=plant.sensors, pairs=plant.pairs,
                        outputs=[Output("o", "displacement", site="m1")],
                        disturbances=[Disturbance("d", "m1", 1.0)])
    design = tmd.design(plant, modes=[1], mass_ratio=0.05, refine=False)
    result = design_shaper(plant, [1], design=design, kind="zv", samples=4)
    pole = passive_modes(plant, design.parts).matched
    expected = shaper_for_mode(pole.freq_hz[0], pole.damping[0], "zv")
    assert np.allclose(result.shaper.times_s, expected.times_s, rtol=1e-12)
    assert result.drift.unstable_cases == 0
