"""Move profiles against the kinematics of trapezoidal and double-S velocity profiles
(L. Biagiotti & C. Melchiorri, Trajectory Planning for Automatic Machines and Robots, 2008;
from memory), and random records against their PSD."""

import math

import numpy as np
import pytest

from dampctl.discrete.profiles import Record, move_profile, random_record
from dampctl.errors import UsageError


def _derivatives(profile, distance, dt=1e-6):
    t = np.arange(0.0, profile.move_time_s + 10 * dt, dt)
    p = profile.at(t) * distance
    v = np.gradient(p, dt)
    a = np.gradient(v, dt)
    return t, p, v, a


@pytest.mark.parametrize(("distance", "v", "a"), [(1e-3, 0.05, 2.0), (1e-5, 0.05, 2.0)])
def test_trapezoid(distance, v, a):
    # move time D/v + v/a when the cruise velocity is reached (D ≥ v²/a), else 2√(D/a)
    profile = move_profile("trapezoid", distance, max_velocity=v, max_acceleration=a)
    expected = distance / v + v / a if distance >= v * v / a else 2 * math.sqrt(distance / a)
    assert profile.move_time_s == pytest.approx(expected, rel=1e-12)
    _t, p, vel, acc = _derivatives(profile, distance)
    assert p[0] == 0 and p[-1] == pytest.approx(distance, rel=1e-12)
    assert np.max(vel) <= v * (1 + 1e-6)
    assert np.max(np.abs(acc[2:-2])) <= a * (1 + 1e-3) + 1e-9
    assert np.all(np.diff(p) >= -1e-18)  # never moves backwards


@pytest.mark.parametrize(("distance", "v", "a"), [(1e-3, 0.05, 2.0), (1e-5, 0.05, 2.0)])
def test_scurve(distance, v, a):
    # double S with jerk a²/v: move time D/v + 2v/a when v is reached (D ≥ 2v²/a)
    profile = move_profile("scurve", distance, max_velocity=v, max_acceleration=a)
    if distance >= 2 * v * v / a:
        assert profile.move_time_s == pytest.approx(distance / v + 2 * v / a, rel=1e-12)
    else:
        jerk = a * a / v
        peak = (distance * math.sqrt(jerk) / 2) ** (2 / 3)
        assert profile.peak_velocity == pytest.approx(peak, rel=1e-12)
        assert profile.move_time_s == pytest.approx(4 * math.sqrt(peak / jerk), rel=1e-12)
    _t, p, vel, acc = _derivatives(profile, distance)
    assert p[-1] == pytest.approx(distance, rel=1e-12)
    assert np.max(vel) <= v * (1 + 1e-6)
    assert np.max(np.abs(acc[2:-2])) <= a * (1 + 1e-3)
    # acceleration continuous (jerk limited): no jump larger than jerk · dt (a few samples)
    assert np.max(np.abs(np.diff(acc[2:-2]))) < 10 * a * a / v * 1e-6


def test_step_impulse_and_record():
    step = move_profile("step", 1e-6)
    np.testing.assert_array_equal(step.samples(1e-3, 4), [1, 1, 1, 1])
    impulse = move_profile("impulse", 1e-6)
    np.testing.assert_array_equal(impulse.samples(1e-3, 4), [1, 0, 0, 0])
    record = Record([0.0, 1e-3, 2e-3], [0.0, 0.5, 1.0])
    prof = move_profile("record", 1e-6, record=record)
    np.testing.assert_allclose(prof.samples(5e-4, 6), [0, 0.25, 0.5, 0.75, 1, 1])
    assert prof.move_time_s == 2e-3


def test_refusals():
    with pytest.raises(UsageError, match="--max-velocity"):
        move_profile("trapezoid", 1e-3, max_acceleration=1.0)
    with pytest.raises(UsageError, match="profile must be one of"):
        move_profile("sine", 1e-3)
    with pytest.raises(UsageError, match="row 3"):
        Record([0.0, 1.0, 1.0], [0, 1, 2], source="r.csv")


def test_random_record_has_the_psd():
    # flat one-sided W: white noise of variance W f_s / 2; a band-limited W: the variance is
    # ∫ W df (Welch estimate of the PSD matches W in the band)
    rate, n = 1000.0, 2**18
    flat = random_record(lambda f: np.full(f.shape, 2e-3), rate, n, seed=4)
    assert np.var(flat) == pytest.approx(2e-3 * rate / 2, rel=0.01)

    def band(f):
        return np.where((f > 50) & (f < 150), 1e-2, 0.0)

    x = random_record(band, rate, n, seed=5)
    assert np.var(x) == pytest.approx(1e-2 * 100, rel=0.02)
    import scipy.signal

    f, pxx = scipy.signal.welch(x, fs=rate, nperseg=4096)
    inside = (f > 60) & (f < 140)
    assert np.mean(pxx[inside]) == pytest.approx(1e-2, rel=0.02)
    assert np.max(pxx[f > 200]) < 1e-6
