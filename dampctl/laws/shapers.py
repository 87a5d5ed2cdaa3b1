"""Input shapers: impulse sequences that move a lightly damped mode without residual vibration.

A shaper is a short sequence of impulses ``Σ_i A_i δ(t − t_i)`` (amplitudes summing to 1);
convolving a command with it gives the same final value, and a mode of natural frequency ω and
damping ratio ζ left ringing by the command is cancelled by the later impulses. The residual
vibration of the mode after the last impulse, relative to a single unit impulse, is (Singer &
Seering, "Preshaping command inputs to reduce system vibration", ASME J. Dyn. Syst. Meas.
Control 112(1), 1990)

    V(ω, ζ) = e^{−ζω t_N} √(C² + S²),
    C = Σ A_i e^{ζω t_i} cos(ω_d t_i),   S = Σ A_i e^{ζω t_i} sin(ω_d t_i),   ω_d = ω√(1−ζ²).

With K = exp(−ζπ/√(1−ζ²)) and the damped period T_d = 2π/ω_d, the shapers here are

``zv``
    zero vibration: amplitudes [1, K]/(1+K) at [0, T_d/2];
``zvd``
    zero vibration and derivative: [1, 2K, K²]/(1+K)² at [0, T_d/2, T_d] (the ZV convolved with
    itself);
``zvdd``
    one more derivative: [1, 3K, 3K², K³]/(1+K)³ at [0, T_d/2, T_d, 3T_d/2] (ZV convolved three
    times);
``ei``
    extra-insensitive: the residual at the design frequency is the tolerance V_tol instead of
    zero, with a local maximum there and zero residual at one frequency below and one above,
    which widens the band where V ≤ V_tol. Undamped it is [(1+V)/4, (1−V)/2, (1+V)/4] at
    [0, T/2, T] (Singhose, Seering & Singer, "Residual vibration reduction using vector
    diagrams to generate shaped inputs", ASME J. Mech. Des. 116(2), 1994); damped, its
    amplitudes and the last two times are solved from those conditions, starting from the
    undamped form.

Several modes are handled by convolving one shaper per mode (the residual of the product is
the product of the residuals, since the sums above factor). The duration t_N is the time the
shaped move takes longer than the unshaped one.

The shaper file (``dampctl shape -o shaper.json``) is JSON with ``format`` ``dampctl-shaper``,
``version``, ``kind``, ``modes_hz``, ``impulses`` (``time_s``, ``amplitude``) and
``duration_s``, plus the design's ``modes``, ``damping`` and ``tolerance``.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

import numpy as np

from dampctl.errors import UsageError

__all__ = [
    "DEFAULT_TOLERANCE",
    "FORMAT",
    "KINDS",
    "Shaper",
    "ShaperFileError",
    "convolve",
    "insensitivity_band",
    "load_shaper",
    "residual_vibration",
    "shaper_for_mode",
    "shaper_from_dict",
]

Kind = Literal["zv", "zvd", "ei", "zvdd"]
#: shaper kinds, shortest first
KINDS: tuple[str, ...] = ("zv", "zvd", "ei", "zvdd")
#: tolerable residual vibration (5 %, common practice in the input-shaping literature)
DEFAULT_TOLERANCE = 0.05
FORMAT = "dampctl-shaper"
FORMAT_VERSION = 1
#: two impulses closer than this (s) are merged when shapers are convolved
_MERGE_S = 1e-12


class ShaperFileError(UsageError):
    """A shaper file cannot be read or is not a valid dampctl shaper."""


@dataclass(frozen=True)
class Shaper:
    """An impulse sequence ``Σ A_i δ(t − t_i)`` with ``t_0 = 0`` and ``Σ A_i = 1``.

    Parameters
    ----------
    kind : {"zv", "zvd", "ei", "zvdd"}
        How it was designed.
    times_s : array_like
        Impulse times (s), increasing from 0.
    amplitudes : array_like
        Impulse amplitudes (dimensionless), summing to 1.
    modes_hz : sequence of float
        Natural frequencies (Hz) it was designed for.
    damping : sequence of float
        Damping ratio of each of those modes.
    modes : sequence of int, optional
        The plant's mode numbers (1-based) behind ``modes_hz``; empty when not from a plant.
    tolerance : float, optional
        Tolerable residual vibration (fraction) used for the EI design and for the band.

    Raises
    ------
    UsageError
        Times not increasing from 0, amplitudes not finite or not summing to 1, lists of
        different lengths.
    """

    kind: str
    times_s: np.ndarray
    amplitudes: np.ndarray
    modes_hz: tuple[float, ...]
    damping: tuple[float, ...]
    modes: tuple[int, ...] = ()
    tolerance: float = DEFAULT_TOLERANCE

    def __post_init__(self) -> None:
        if self.kind not in KINDS:
            raise UsageError(f"shaper kind must be one of {', '.join(KINDS)}, got {self.kind!r}")
        times = np.array(self.times_s, dtype=float).ravel()
        amps = np.array(self.amplitudes, dtype=float).ravel()
        if times.size == 0 or times.size != amps.size:
            raise UsageError("a shaper needs as many impulse times as amplitudes (at least one)")
        if not (np.all(np.isfinite(times)) and np.all(np.isfinite(amps))):
            raise UsageError("shaper impulse times and amplitudes must be finite")
        if times[0] != 0.0 or np.any(np.diff(times) <= 0.0):
            raise UsageError("shaper impulse times must start at 0 s and increase")
        if abs(float(np.sum(amps)) - 1.0) > 1e-9:
            raise UsageError(
                f"shaper amplitudes must sum to 1 (the move must end where it would unshaped), "
                f"they sum to {float(np.sum(amps)):.12g}"
            )
        modes_hz = tuple(float(f) for f in self.modes_hz)
        damping = tuple(float(z) for z in self.damping)
        if len(modes_hz) != len(damping) or not modes_hz:
            raise UsageError("a shaper names one damping ratio per design frequency")
        if not all(math.isfinite(f) and f > 0 for f in modes_hz):
            raise UsageError(f"shaper design frequencies must be > 0 Hz, got {modes_hz}")
        if not all(math.isfinite(z) and 0.0 <= z < 1.0 for z in damping):
            raise UsageError(f"shaper damping ratios must be in [0, 1), got {damping}")
        modes = tuple(int(m) for m in self.modes)
        if modes and len(modes) != len(modes_hz):
            raise UsageError("a shaper names one mode number per design frequency")
        tolerance = float(self.tolerance)
        if not 0.0 < tolerance < 1.0:
            raise UsageError(f"shaper tolerance must be in (0, 1), got {tolerance!r}")
        for name, value in (("times_s", times), ("amplitudes", amps)):
            value.setflags(write=False)
            object.__setattr__(self, name, value)
        object.__setattr__(self, "modes_hz", modes_hz)
        object.__setattr__(self, "damping", damping)
        object.__setattr__(self, "modes", modes)
        object.__setattr__(self, "tolerance", tolerance)

    @property
    def duration_s(self) -> float:
        """Time of the last impulse (s): how much longer the shaped move takes."""
        return float(self.times_s[-1])

    def residual(self, freq_hz: np.ndarray, damping: float | np.ndarray) -> np.ndarray:
        """Residual vibration V of modes at ``freq_hz`` with ``damping`` (see the module notes).

        Parameters
        ----------
        freq_hz : array_like
            Natural frequencies (Hz).
        damping : float or array_like
            Damping ratios (broadcast against ``freq_hz``).

        Returns
        -------
        ndarray
            V (fraction of the unshaped residual), same shape as the broadcast inputs.
        """
        return residual_vibration(self.times_s, self.amplitudes, freq_hz, damping)

    def to_dict(self) -> dict[str, Any]:
        """The shaper file's content (JSON-ready); :func:`shaper_from_dict` inverts it."""
        return {
            "format": FORMAT,
            "version": FORMAT_VERSION,
            "kind": self.kind,
            "modes_hz": list(self.modes_hz),
            "impulses": [
                {"time_s": float(t), "amplitude": float(a)}
                for t, a in zip(self.times_s, self.amplitudes, strict=True)
            ],
            "duration_s": self.duration_s,
            "modes": list(self.modes),
            "damping": list(self.damping),
            "tolerance": self.tolerance,
        }

    def to_json(self) -> str:
        """The shaper file text (JSON)."""
        return json.dumps(self.to_dict(), indent=2, allow_nan=False) + "\n"


@dataclass(frozen=True)
class _Sequence:
    """Internal: impulse times (s) and amplitudes of one design."""

    times: np.ndarray
    amplitudes: np.ndarray


def residual_vibration(
    times_s: np.ndarray, amplitudes: np.ndarray, freq_hz: np.ndarray, damping
) -> np.ndarray:
    """Residual vibration of an impulse sequence on modes (Singer & Seering 1990).

    Parameters
    ----------
    times_s, amplitudes : array_like
        The impulses (s, dimensionless).
    freq_hz : array_like
        Natural frequencies (Hz) of the modes.
    damping : float or array_like
        Damping ratios, broadcast against ``freq_hz``.

    Returns
    -------
    ndarray
        V = e^{−ζω t_N} √(C² + S²), computed as |Σ A_i e^{−ζω(t_N − t_i)} e^{jω_d t_i}| so that
        nothing overflows; 1 for a single unit impulse.
    """
    t = np.asarray(times_s, dtype=float).ravel()
    a = np.asarray(amplitudes, dtype=float).ravel()
    w, z = np.broadcast_arrays(2.0 * np.pi * np.asarray(freq_hz, dtype=float), damping)
    w = w.astype(float)
    z = np.asarray(z, dtype=float)
    wd = w * np.sqrt(1.0 - z**2)
    decay = np.exp(-(z * w)[..., None] * (t[-1] - t))
    phase = wd[..., None] * t
    c = np.sum(a * decay * np.cos(phase), axis=-1)
    s = np.sum(a * decay * np.sin(phase), axis=-1)
    return np.hypot(c, s)


def _overshoot_ratio(damping: float) -> float:
    """K = exp(−ζπ/√(1−ζ²)), the step overshoot ratio of the mode."""
    return math.exp(-damping * math.pi / math.sqrt(1.0 - damping**2))


def _ei_damped(freq_hz: float, damping: float, tolerance: float) -> _Sequence:
    """EI shaper of a damped mode, solved from its defining conditions.

    Unknowns: A1, A2, A3, t2, t3 and the two zero-residual frequencies ω_lo, ω_hi. Conditions:
    Σ A = 1; V(ω_m) = V_tol; ∂V/∂ω(ω_m) = 0; residual vector zero at ω_lo and at ω_hi (two
    equations each). Undamped, the solution is the closed form of Singhose, Seering & Singer
    (1994), which is the starting point.
    """
    from scipy.optimize import root

    # solved scale-free: times in periods of the mode, frequencies as ratios to it
    w_m = 2.0 * math.pi
    v = tolerance
    # undamped zeros: (1+V)/2 cos(ωT/2) + (1−V)/2 = 0
    half = math.acos(-(1.0 - v) / (1.0 + v))
    start = np.array(
        [(1 + v) / 4, (1 - v) / 2, (1 + v) / 4, 0.5, 1.0, half / math.pi, 2.0 - half / math.pi]
    )

    def terms(params, ratio, zeta):
        a1, a2, a3, t2, t3 = params[:5]
        w = ratio * w_m
        times = np.array([0.0, t2, t3])
        rate = -zeta * w_m * (t3 - times) + 1j * w_m * math.sqrt(1.0 - zeta**2) * times
        return np.array([a1, a2, a3]) * np.exp(ratio * rate), rate, w

    def equations(params, zeta):
        lo, hi = params[5], params[6]
        parts, rate, _w = terms(params, 1.0, zeta)
        vector = np.sum(parts)
        slope = np.sum(parts * rate)  # d(vector)/d(ω/ω_m); d|vector| = Re(conj(v) dv)/|v|
        z_lo = np.sum(terms(params, lo, zeta)[0])
        z_hi = np.sum(terms(params, hi, zeta)[0])
        return [
            params[0] + params[1] + params[2] - 1.0,
            abs(vector) - v,
            (vector.conjugate() * slope).real,
            z_lo.real, z_lo.imag, z_hi.real, z_hi.imag,
        ]

    # continuation in the damping ratio from the undamped closed form keeps to its branch
    steps = max(1, math.ceil(damping / 0.02))
    solution, ok, message = start, True, ""
    for ratio in np.linspace(damping / steps, damping, steps):
        zeta = float(ratio)
        previous = solution
        found = root(lambda p, z=zeta: equations(p, z), previous, method="hybr", tol=1e-14)
        solution, message = found.x, str(found.message)
        if (
            np.max(np.abs(equations(solution, zeta))) > 1e-10
            or np.max(np.abs(solution[:5] - previous[:5])) > 0.1
        ):
            ok = False
            break
    residual = np.max(np.abs(equations(solution, damping)))
    period = 1.0 / freq_hz
    t2, t3 = solution[3] * period, solution[4] * period
    if not ok or residual > 1e-10 or not 0 < t2 < t3 or np.any(solution[:3] <= 0):
        raise UsageError(
            f"no EI shaper found for {freq_hz:.6g} Hz with damping {damping:.4g} and tolerance "
            f"{tolerance:.4g} ({message.strip() or 'the solution left its branch'}); use zvd "
            "instead"
        )
    return _Sequence(np.array([0.0, t2, t3]), np.array(solution[:3]))


def _single(kind: str, freq_hz: float, damping: float, tolerance: float) -> _Sequence:
    w = 2.0 * math.pi * freq_hz
    t_d = 2.0 * math.pi / (w * math.sqrt(1.0 - damping**2))
    k = _overshoot_ratio(damping)
    if kind == "ei":
        if damping == 0.0:
            v = tolerance
            return _Sequence(
                np.array([0.0, t_d / 2, t_d]), np.array([(1 + v) / 4, (1 - v) / 2, (1 + v) / 4])
            )
        return _ei_damped(freq_hz, damping, tolerance)
    order = {"zv": 1, "zvd": 2, "zvdd": 3}[kind]
    amps = np.array([math.comb(order, j) * k**j for j in range(order + 1)]) / (1.0 + k) ** order
    return _Sequence(np.arange(order + 1) * t_d / 2, amps)


def shaper_for_mode(
    freq_hz: float,
    damping: float,
    kind: Kind = "zvd",
    *,
    tolerance: float = DEFAULT_TOLERANCE,
    mode: int | None = None,
) -> Shaper:
    """The shaper of one mode.

    Parameters
    ----------
    freq_hz : float
        Natural frequency (Hz) of the mode, > 0.
    damping : float
        Its damping ratio, in [0, 1).
    kind : {"zv", "zvd", "ei", "zvdd"}, optional
        Shaper kind (see the module notes). Default ``"zvd"``.
    tolerance : float, optional
        Tolerable residual vibration V_tol (fraction); the EI shaper's residual at the design
        frequency. Default 0.05.
    mode : int, optional
        The plant's mode number, recorded in the shaper.

    Returns
    -------
    Shaper

    Raises
    ------
    UsageError
        Unknown kind, frequency not > 0, damping outside [0, 1), tolerance outside (0, 1), or
        no EI solution.
    """
    if kind not in KINDS:
        raise UsageError(f"shaper kind must be one of {', '.join(KINDS)}, got {kind!r}")
    if not (math.isfinite(freq_hz) and freq_hz > 0):
        raise UsageError(f"shaper design frequency must be > 0 Hz, got {freq_hz!r}")
    if not (math.isfinite(damping) and 0.0 <= damping < 1.0):
        raise UsageError(f"shaper damping ratio must be in [0, 1), got {damping!r}")
    if not 0.0 < tolerance < 1.0:
        raise UsageError(f"tolerance must be a fraction in (0, 1), got {tolerance!r}")
    seq = _single(kind, float(freq_hz), float(damping), float(tolerance))
    return Shaper(
        kind=kind,
        times_s=seq.times,
        amplitudes=seq.amplitudes,
        modes_hz=(float(freq_hz),),
        damping=(float(damping),),
        modes=() if mode is None else (int(mode),),
        tolerance=tolerance,
    )


def convolve(first: Shaper, second: Shaper) -> Shaper:
    """The convolution of two shapers of the same kind: every impulse pair, times added.

    Impulses that fall at the same time (within 1 ps) are merged. The residual of the result
    on any mode is the product of the two residuals.

    Parameters
    ----------
    first, second : Shaper
        The shapers (same kind and tolerance).

    Returns
    -------
    Shaper
        Designed for the modes of both.
    """
    if first.kind != second.kind:
        raise UsageError(f"cannot convolve a {first.kind} shaper with a {second.kind} one")
    times = (first.times_s[:, None] + second.times_s[None, :]).ravel()
    amps = (first.amplitudes[:, None] * second.amplitudes[None, :]).ravel()
    order = np.argsort(times, kind="stable")
    times, amps = times[order], amps[order]
    merged_t, merged_a = [times[0]], [amps[0]]
    for t, a in zip(times[1:], amps[1:], strict=True):
        if t - merged_t[-1] <= _MERGE_S:
            merged_a[-1] += a
        else:
            merged_t.append(t)
            merged_a.append(a)
    merged_a = np.array(merged_a)
    merged_a /= np.sum(merged_a)  # exact sum 1 against rounding of the products
    return Shaper(
        kind=first.kind,
        times_s=np.array(merged_t),
        amplitudes=merged_a,
        modes_hz=first.modes_hz + second.modes_hz,
        damping=first.damping + second.damping,
        modes=first.modes + second.modes if first.modes and second.modes else (),
        tolerance=first.tolerance,
    )


def insensitivity_band(
    shaper: Shaper, freq_hz: float, damping: float, *, tolerance: float | None = None
) -> tuple[float, float]:
    """Frequencies (Hz) around a mode between which the shaper's residual stays ≤ tolerance.

    Parameters
    ----------
    shaper : Shaper
        The shaper.
    freq_hz : float
        Nominal natural frequency (Hz) of the mode.
    damping : float
        Its damping ratio (kept when the frequency moves).
    tolerance : float, optional
        Residual limit (fraction); default the shaper's own.

    Returns
    -------
    tuple of float
        (low, high) in Hz: the connected interval around ``freq_hz`` where V ≤ tolerance
        (edges found by bisection to 1e-10 relative); (nan, nan) when V > tolerance at the
        nominal frequency itself.
    """
    from scipy.optimize import brentq

    tol = shaper.tolerance if tolerance is None else float(tolerance)
    limit = tol + 1e-12  # the EI residual equals the tolerance at its design frequency

    def excess(ratio: float) -> float:
        return float(shaper.residual(ratio * freq_hz, damping)) - limit

    if excess(1.0) > 0.0:
        return (math.nan, math.nan)
    ratios = np.linspace(1.0, 3.0, 4001)
    values = shaper.residual(ratios * freq_hz, damping) - limit
    above = np.flatnonzero(values > 0.0)
    high = math.inf
    if above.size:
        k = above[0]
        high = brentq(excess, ratios[k - 1], ratios[k], xtol=1e-12, rtol=1e-10) * freq_hz
    ratios = np.linspace(1.0, 1e-3, 4001)
    values = shaper.residual(ratios * freq_hz, damping) - limit
    above = np.flatnonzero(values > 0.0)
    low = 0.0
    if above.size:
        k = above[0]
        low = brentq(excess, ratios[k], ratios[k - 1], xtol=1e-12, rtol=1e-10) * freq_hz
    return (float(low), float(high))


def shaper_from_dict(data: Mapping[str, Any], *, source: str | None = None) -> Shaper:
    """Build a :class:`Shaper` from the shaper file's content, checking every key.

    Parameters
    ----------
    data : mapping
        As written by :meth:`Shaper.to_dict`.
    source : str, optional
        File name for error messages.

    Returns
    -------
    Shaper

    Raises
    ------
    ShaperFileError
        Wrong format or version, an unknown or missing key, a value of the wrong type, or
        ``duration_s`` that is not the last impulse time.
    """

    def fail(message: str, where: str | None = None):
        raise ShaperFileError(message, source=source, field=where)

    if not isinstance(data, Mapping):
        fail("not a dampctl shaper (expected a JSON object)")
    if data.get("format") != FORMAT:
        fail(f"not a dampctl shaper (format must be {FORMAT!r})", "format")
    if data.get("version") != FORMAT_VERSION:
        fail(f"version must be {FORMAT_VERSION}, got {data.get('version')!r}", "version")
    known = {"format", "version", "kind", "modes_hz", "impulses", "duration_s", "modes",
             "damping", "tolerance"}
    unknown = sorted(set(data) - known)
    if unknown:
        fail(f"unknown key {unknown[0]!r} (known: {', '.join(sorted(known))})", unknown[0])
    for key in ("kind", "modes_hz", "impulses", "duration_s"):
        if key not in data:
            fail("missing required key", key)
    if data["kind"] not in KINDS:
        fail(f"must be one of {', '.join(KINDS)}, got {data['kind']!r}", "kind")
    impulses = data["impulses"]
    if not isinstance(impulses, list) or not impulses:
        fail("expected a non-empty list of {time_s, amplitude}", "impulses")
    times, amps = [], []
    for k, item in enumerate(impulses):
        where = f"impulses[{k + 1}]"
        if not isinstance(item, Mapping) or set(item) != {"time_s", "amplitude"}:
            fail("expected exactly the keys time_s and amplitude", where)
        times.append(_number(item["time_s"], f"{where}.time_s", fail))
        amps.append(_number(item["amplitude"], f"{where}.amplitude", fail))
    modes_hz = _numbers(data["modes_hz"], "modes_hz", fail)
    n = len(modes_hz)
    damping = _numbers(data.get("damping", [0.0] * n), "damping", fail)
    modes = data.get("modes", [])
    if not isinstance(modes, list) or not all(
        isinstance(m, int) and not isinstance(m, bool) and m >= 1 for m in modes
    ):
        fail("expected a list of mode numbers >= 1", "modes")
    tolerance = _number(data.get("tolerance", DEFAULT_TOLERANCE), "tolerance", fail)
    duration = _number(data["duration_s"], "duration_s", fail)
    if times and abs(duration - times[-1]) > 1e-9 * max(1.0, abs(times[-1])):
        fail(f"must equal the last impulse time {times[-1]!r}, got {duration!r}", "duration_s")
    try:
        return Shaper(
            kind=data["kind"],
            times_s=np.array(times),
            amplitudes=np.array(amps),
            modes_hz=tuple(modes_hz),
            damping=tuple(damping),
            modes=tuple(modes),
            tolerance=tolerance,
        )
    except ShaperFileError:
        raise
    except UsageError as exc:
        fail(exc.message, "impulses")
        raise  # unreachable: fail raises


def load_shaper(path: str | Path) -> Shaper:
    """Read a shaper file written by ``dampctl shape``.

    Parameters
    ----------
    path : str or path-like
        The shaper file (JSON).

    Returns
    -------
    Shaper

    Raises
    ------
    ShaperFileError
        The file cannot be read, is not JSON or is not a valid shaper.
    """
    path = Path(path)
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except OSError as exc:
        raise ShaperFileError(
            f"cannot read the shaper file ({exc.strerror or exc})", source=str(path)
        ) from None
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise ShaperFileError(f"not a JSON shaper file ({exc})", source=str(path)) from None
    return shaper_from_dict(data, source=str(path))


def _number(value, where: str, fail) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float) or not math.isfinite(value):
        fail(f"expected a finite number, got {value!r}", where)
    return float(value)


def _numbers(values, where: str, fail) -> list[float]:
    if not isinstance(values, list) or not values:
        fail("expected a non-empty list of numbers", where)
    return [_number(v, f"{where}[{k + 1}]", fail) for k, v in enumerate(values)]
