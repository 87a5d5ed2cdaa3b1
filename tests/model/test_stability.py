"""Stability chart and pole choice: MAC by its definition, physical poles of known data."""

import numpy as np
import pytest

from dampctl.errors import MeasurementError, UsageError
from dampctl.model.stability import (
    StabilityTolerances,
    choose_poles,
    mac,
    stability_chart,
)
from dampctl.model.vectorfit import RationalFit, evaluate_rational

# two lightly damped modes at 200 and 420 Hz (scale: s in units of 2π·600 rad/s)
SCALE = 2 * np.pi * 600.0
POLES_HZ = np.array([200.0, 420.0])
ZETA = np.array([0.01, 0.02])


def _data(noise=0.0, seed=0):
    w = 2 * np.pi * POLES_HZ / SCALE
    poles = -ZETA * w + 1j * w * np.sqrt(1 - ZETA**2)
    residues = np.array([[1.0 / (2j * poles[0].imag), 0.5 / (2j * poles[1].imag)],
                         [0.4 / (2j * poles[0].imag), -0.9 / (2j * poles[1].imag)],
                         [-0.7 / (2j * poles[0].imag), 0.3 / (2j * poles[1].imag)]])
    s = 1j * np.linspace(50.0, 600.0, 551) * 2 * np.pi / SCALE
    data = evaluate_rational(RationalFit(poles, residues, [0, 0, 0], [0, 0, 0]), s)
    rng = np.random.default_rng(seed)
    data = data * (1 + noise * (rng.normal(size=data.shape) + 1j * rng.normal(size=data.shape)))
    weights = 1.0 / np.linalg.norm(data, axis=1)[:, None] * np.ones(data.shape)
    return s, data, weights


def test_mac_by_its_definition():
    # MAC(a, b) = |aᴴb|² / ((aᴴa)(bᴴb)) (Allemang & Brown, Proc. IMAC I, 1982): 1 for vectors
    # that differ by a complex factor, 0 for orthogonal ones, cos² of the angle otherwise.
    a = np.array([1.0, 2.0, -1.0])
    assert mac(a, (2 - 3j) * a) == pytest.approx(1.0, rel=1e-14)
    assert mac([1.0, 0.0], [0.0, 1.0]) == 0.0
    assert mac([1.0, 0.0], [1.0, 1.0]) == pytest.approx(0.5, rel=1e-14)
    assert mac([0.0, 0.0], [1.0, 1.0]) == 0.0


def test_physical_poles_are_stable_over_orders_and_chosen():
    s, data, weights = _data(noise=0.005)
    chart = stability_chart(s, data, weights, omega_scale=SCALE, band_hz=(50.0, 600.0),
                            max_order=8)
    assert [e.order for e in chart.orders] == list(range(1, 9))
    assert not np.any(chart.orders[0].freq_stable)  # nothing to compare the first order with
    choice = choose_poles(chart)
    np.testing.assert_allclose(np.abs(choice.poles) / (2 * np.pi), POLES_HZ, rtol=1e-3)
    np.testing.assert_allclose(-choice.poles.real / np.abs(choice.poles), ZETA, rtol=0.05)
    k = [e.order for e in chart.orders].index(choice.order)
    assert np.all(chart.orders[k].run[chart.physical(k)] >= 3)


def test_named_modes_keep_the_nearest_stable_pole():
    s, data, weights = _data(noise=0.005)
    chart = stability_chart(s, data, weights, omega_scale=SCALE, band_hz=(50.0, 600.0),
                            max_order=8)
    choice = choose_poles(chart, [415.0])
    assert choice.named
    assert abs(choice.poles[0]) / (2 * np.pi) == pytest.approx(420.0, rel=1e-3)
    with pytest.raises(UsageError, match="no stable pole within 5 % of 300 Hz"):
        choose_poles(chart, [300.0])
    with pytest.raises(UsageError, match="name the same pole"):
        choose_poles(chart, [418.0, 421.0])


def test_noise_alone_has_no_physical_pole():
    rng = np.random.default_rng(3)
    s = 1j * np.linspace(0.1, 1.0, 401)
    data = rng.normal(size=(2, s.size)) + 1j * rng.normal(size=(2, s.size))
    chart = stability_chart(s, data, np.ones(data.shape), omega_scale=1.0,
                            band_hz=(0.1 / (2 * np.pi), 1.0 / (2 * np.pi)), max_order=6)
    with pytest.raises(MeasurementError, match="no pole is stable over 3 orders"):
        choose_poles(chart)


def test_early_stop_once_no_new_pole_appears():
    s, data, weights = _data(noise=0.005)
    chart = stability_chart(s, data, weights, omega_scale=SCALE, band_hz=(50.0, 600.0),
                            max_order=30, stop_after=3, min_order=6)
    assert 6 <= chart.orders[-1].order < 30


@pytest.mark.parametrize("kwargs, match", [
    ({"freq": 0.0}, "freq"), ({"damping": 1.5}, "damping"), ({"mac": 0.0}, "mac"),
    ({"run": 0}, "run"), ({"run": 2.5}, "run"),
])
def test_tolerances_are_checked(kwargs, match):
    with pytest.raises(UsageError, match=match):
        StabilityTolerances(**kwargs)
