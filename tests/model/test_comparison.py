"""A plant held against measurement: its own FRFs agree; a shifted mode, a flipped sign and a
missing mode are reported naming the mode and the channel."""

import dataclasses

import numpy as np
import pytest
from measuredplants import FREQS, SITES, four_mode_plant, noisy_four_mode_frf

from dampctl.errors import MeasurementError
from dampctl.model.comparison import ComparisonTolerances, compare_plant
from dampctl.model.components import Mode, Sensor
from dampctl.model.measured import MeasuredFRF


@pytest.fixture(scope="module")
def measured():
    freq, h = noisy_four_mode_frf(11, np.linspace(60.0, 800.0, 741))
    return MeasuredFRF(freq, h, tuple(SITES), ("hammer",), ("acceleration",) * 5,
                       source="test.npz")


def test_the_plant_measured_agrees_with_itself(measured):
    result = compare_plant(four_mode_plant(), measured)
    assert result.channels == tuple(f"{s}/hammer" for s in SITES)
    assert all(0.007 < e < 0.013 for e in result.error.values())  # the 1 % noise
    assert [m.mode for m in result.modes] == [1, 2, 3, 4]
    for m in result.modes:
        assert abs(m.freq_change) < 0.002 and abs(m.damping_change) < 0.1
        assert m.mac > 0.999
    assert result.warnings == ()
    assert result.to_dict()["modes"][0]["mode"] == 1


def test_a_shifted_mode_and_a_flipped_sign_are_named(measured):
    plant = four_mode_plant()
    modes = list(plant.modes)
    modes[3] = dataclasses.replace(modes[3], freq_hz=FREQS[3] * 1.05)
    sites = {k: np.array(v) for k, v in plant.sites.items()}
    sites["p2"][0] *= -1  # mode 1 has the wrong sign at p2
    wrong = dataclasses.replace(plant, modes=tuple(modes), sites=sites)
    result = compare_plant(wrong, measured)
    text = "\n".join(result.warnings)
    assert "mode 4 (640.5 Hz): measured at 610 Hz (-4.8%, tolerance 2%), strongest on channel" \
        in text
    assert "mode 1 (120 Hz): channel p2/hammer has the opposite sign in the plant" in text
    assert "mode 1 (120 Hz): MAC" in text
    assert "FRF error" in text and "near mode 4" in text


def test_missing_mode_and_velocity_sensor(measured):
    # the plant lacks mode 2 and measures velocity where the test measured acceleration:
    # the measured FRF is divided by jω before the comparison
    plant = four_mode_plant()
    keep = [0, 2, 3]
    slim = dataclasses.replace(
        plant, modes=tuple(plant.modes[i] for i in keep),
        sites={k: np.asarray(v)[keep] for k, v in plant.sites.items()},
        sensors=tuple(Sensor(s.name, "velocity", site=s.site) for s in plant.sensors))
    result = compare_plant(slim, measured, tolerances=ComparisonTolerances(error=0.5))
    assert result.units[0] == "m/s/N"
    text = "\n".join(result.warnings)
    assert "measured mode at 250 Hz" in text and "has no plant mode" in text
    full = dataclasses.replace(
        plant, sensors=tuple(Sensor(s.name, "velocity", site=s.site) for s in plant.sensors))
    assert max(compare_plant(full, measured).error.values()) < 0.013


def test_no_shared_channel_is_an_error(measured):
    plant = four_mode_plant()
    other = dataclasses.replace(plant, sensors=(Sensor("x", "velocity", site="p0"),))
    with pytest.raises(MeasurementError, match=r"test\.npz: no channel is shared with the plant"):
        compare_plant(other, measured)
    force = dataclasses.replace(measured, output_kinds=("force",) * 5)
    with pytest.raises(MeasurementError, match="output 'p0' measures force"):
        compare_plant(plant, force)


def test_a_plant_mode_the_measurement_lacks(measured):
    plant = four_mode_plant()
    extra = dataclasses.replace(
        plant, modes=(*plant.modes, Mode(400.0, 0.01)),
        sites={k: np.r_[v, 0.5] for k, v in plant.sites.items()})
    result = compare_plant(extra, measured, tolerances=ComparisonTolerances(error=5.0))
    assert any(w.startswith("mode 5 (400 Hz): no measured mode within 25%")
               for w in result.warnings)
