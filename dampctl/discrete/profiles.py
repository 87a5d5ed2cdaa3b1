"""Command signals for time simulation: move profiles, given records and random records.

Move profiles are the fraction p(t) of the move made by time t (0 before, 1 at the end):

``step``
    p = 1 from t = 0.
``trapezoid``
    trapezoidal velocity: constant acceleration ``a`` up to the velocity limit ``v``, cruise,
    constant deceleration (a triangle when the move is too short to reach ``v``). Move time
    D/v + v/a for D ≥ v²/a, else 2√(D/a).
``scurve``
    jerk-limited ("double S") velocity with the jerk J = a²/v, so that each acceleration phase
    is a triangle of peak ``a`` lasting 2v/a: move time D/v + 2v/a for D ≥ 2v²/a; shorter moves
    peak at v_p = (D √J / 2)^(2/3) (L. Biagiotti & C. Melchiorri, *Trajectory Planning for
    Automatic Machines and Robots*, Springer 2008, double-S trajectory; from memory).
``impulse``
    p = 1 during the first sample only: a force pulse of the move's static force for one sample
    (a tap that shows the ringing).
``record``
    a given record (time_s, fraction), interpolated linearly and held after its end.

A random record of a one-sided PSD W(f) is white Gaussian noise shaped in the frequency domain:
the DFT of N samples of unit white noise times √(W(f_k) f_s / 2), transformed back. For a flat
W this is exactly white noise of variance W f_s / 2 (one-sided density W up to f_s/2); the
record is periodic in N samples.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Literal

import numpy as np

from dampctl.errors import UsageError

__all__ = ["PROFILES", "MoveProfile", "Record", "move_profile", "random_record"]

ProfileKind = Literal["step", "trapezoid", "scurve", "impulse", "record"]
PROFILES: tuple[str, ...] = ("step", "trapezoid", "scurve", "impulse")


@dataclass(frozen=True)
class Record:
    """A sampled signal given by the user: times (s, increasing) and values.

    Parameters
    ----------
    time_s : array_like
        Sample times (s), strictly increasing, at least two.
    values : array_like
        Values at those times (unit of the signal).
    source : str, optional
        Where it came from (file name), for messages.
    """

    time_s: np.ndarray
    values: np.ndarray
    source: str = ""

    def __post_init__(self) -> None:
        t = np.array(self.time_s, dtype=float).ravel()
        v = np.array(self.values, dtype=float).ravel()
        where = self.source or "record"
        if t.size < 2 or t.size != v.size:
            raise UsageError(f"{where}: needs at least two rows of time_s,value")
        if not (np.all(np.isfinite(t)) and np.all(np.isfinite(v))):
            raise UsageError(f"{where}: times and values must be finite")
        if np.any(np.diff(t) <= 0):
            k = int(np.flatnonzero(np.diff(t) <= 0)[0]) + 2
            raise UsageError(f"{where}: time_s must increase (row {k})")
        for name, value in (("time_s", t), ("values", v)):
            value.setflags(write=False)
            object.__setattr__(self, name, value)

    def at(self, times_s: np.ndarray) -> np.ndarray:
        """Linear interpolation at ``times_s``, the first value before the record, the last
        after it.

        Parameters
        ----------
        times_s : array_like
            Times (s).

        Returns
        -------
        ndarray
        """
        return np.interp(np.asarray(times_s, dtype=float), self.time_s, self.values)


@dataclass(frozen=True)
class MoveProfile:
    """The fraction of a move made against time.

    Attributes
    ----------
    kind : {"step", "trapezoid", "scurve", "impulse", "record"}
        Profile kind.
    move_time_s : float
        When the move is complete (0 for a step; one sample for an impulse is added by the
        caller that knows the sample time; the record's last time).
    peak_velocity : float or None
        Largest velocity reached as a fraction of the move per second (None for step,
        impulse, record).
    knots : ndarray
        (t_start, p, v, a, jerk) of each piece of a trapezoid or S-curve (fractions of the
        move); empty otherwise.
    record : Record or None
        The given record.
    """

    kind: str
    move_time_s: float
    peak_velocity: float | None
    knots: np.ndarray
    record: Record | None = None

    def samples(self, sample_time_s: float, count: int) -> np.ndarray:
        """p(jT) for j = 0 .. count−1.

        Parameters
        ----------
        sample_time_s : float
            T (s).
        count : int
            Number of samples.

        Returns
        -------
        ndarray, shape (count,)
        """
        t = np.arange(count) * float(sample_time_s)
        if self.kind == "step":
            return np.ones(count)
        if self.kind == "impulse":
            out = np.zeros(count)
            out[:1] = 1.0
            return out
        if self.kind == "record":
            return self.record.at(t)
        return self.at(t)

    def at(self, times_s: np.ndarray) -> np.ndarray:
        """p(t) of a trapezoid or S-curve (piecewise cubic between the knots).

        Parameters
        ----------
        times_s : array_like
            Times (s).

        Returns
        -------
        ndarray
        """
        t = np.asarray(times_s, dtype=float)
        if self.knots.size == 0:
            return np.where(t >= 0, 1.0, 0.0)
        starts = self.knots[:, 0]
        k = np.clip(np.searchsorted(starts, t, side="right") - 1, 0, starts.size - 1)
        tau = t - starts[k]
        _, p, v, a, j = self.knots[k].T
        out = p + v * tau + a * tau**2 / 2 + j * tau**3 / 6
        out = np.where(t >= self.move_time_s, 1.0, out)
        return np.where(t < 0, 0.0, out)


def _knots(pieces: list[tuple[float, float, float]]) -> np.ndarray:
    """Integrate pieces (duration, acceleration at start, jerk) from rest into knots."""
    rows, t, p, v = [], 0.0, 0.0, 0.0
    for duration, a, j in pieces:
        if duration <= 0.0:
            continue
        rows.append((t, p, v, a, j))
        p += v * duration + a * duration**2 / 2 + j * duration**3 / 6
        v += a * duration + j * duration**2 / 2
        t += duration
    rows.append((t, p, v, 0.0, 0.0))
    return np.array(rows)


def move_profile(
    kind: str,
    distance: float,
    *,
    max_velocity: float | None = None,
    max_acceleration: float | None = None,
    record: Record | None = None,
) -> MoveProfile:
    """A move profile (see the module notes), as a fraction of the move.

    Parameters
    ----------
    kind : {"step", "trapezoid", "scurve", "impulse", "record"}
        Profile kind.
    distance : float
        Size of the move (its unit, e.g. m); only |distance| matters for the timing.
    max_velocity : float, optional
        Velocity limit (distance unit per s): required for trapezoid and scurve.
    max_acceleration : float, optional
        Acceleration limit (distance unit per s²): required for trapezoid and scurve.
    record : Record, optional
        The fraction of the move against time, for ``record``.

    Returns
    -------
    MoveProfile

    Raises
    ------
    UsageError
        Unknown kind, a missing or non-positive limit, a zero distance, or no record.
    """
    if kind == "record":
        if record is None:
            raise UsageError("a record profile needs the record (time_s, value)")
        return MoveProfile("record", float(record.time_s[-1]), None, np.zeros((0, 5)), record)
    if kind not in PROFILES:
        raise UsageError(
            f"profile must be one of {', '.join(PROFILES)} or file:CSV, got {kind!r}"
        )
    if kind in ("step", "impulse"):
        return MoveProfile(kind, 0.0, None, np.zeros((0, 5)))
    size = abs(float(distance))
    if not (math.isfinite(size) and size > 0):
        raise UsageError(f"a {kind} move needs a non-zero distance, got {distance!r}")
    for name, value in (("--max-velocity", max_velocity), ("--max-acceleration",
                                                          max_acceleration)):
        if value is None or not (math.isfinite(value) and value > 0):
            raise UsageError(f"a {kind} profile needs {name} > 0, got {value!r}")
    v, a = float(max_velocity) / size, float(max_acceleration) / size  # in moves per s, s²
    if kind == "trapezoid":
        if v * v / a <= 1.0:
            ramp, cruise, peak = v / a, (1.0 - v * v / a) / v, v
        else:
            ramp, cruise = math.sqrt(1.0 / a), 0.0
            peak = a * ramp
        knots = _knots([(ramp, a, 0.0), (cruise, 0.0, 0.0), (ramp, -a, 0.0)])
    else:
        jerk = a * a / v
        peak = v if 2.0 * v * v / a <= 1.0 else (math.sqrt(jerk) / 2.0) ** (2.0 / 3.0)
        half = math.sqrt(peak / jerk)  # each half of an acceleration triangle
        cruise = max(0.0, (1.0 - 2.0 * peak * half) / peak)
        knots = _knots([(half, 0.0, jerk), (half, jerk * half, -jerk), (cruise, 0.0, 0.0),
                        (half, 0.0, -jerk), (half, -jerk * half, jerk)])
    return MoveProfile(kind, float(knots[-1, 0]), float(peak * size), knots)


def random_record(
    psd: Callable[[np.ndarray], np.ndarray], rate_hz: float, count: int, seed: int
) -> np.ndarray:
    """A seeded Gaussian record with a one-sided PSD, periodic in ``count`` samples.

    Parameters
    ----------
    psd : callable
        One-sided PSD W(f) (unit²/Hz) at an array of frequencies (Hz).
    rate_hz : float
        Sample rate f_s (Hz).
    count : int
        Number of samples N (≥ 2).
    seed : int
        Seed of ``numpy.random.default_rng``.

    Returns
    -------
    ndarray, shape (count,)
        The record; for flat W its variance is W f_s / 2.
    """
    rng = np.random.default_rng(seed)
    white = rng.standard_normal(int(count))
    freq = np.fft.rfftfreq(int(count), d=1.0 / rate_hz)
    gain = np.sqrt(np.maximum(np.asarray(psd(freq), dtype=float), 0.0) * rate_hz / 2.0)
    return np.fft.irfft(np.fft.rfft(white) * gain, n=int(count))
