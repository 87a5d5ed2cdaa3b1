"""What a loop designer reads off a loop: Bode curves, crossovers, |S| and |T|.

Computed here from an assessment's loop curves and margins (figures only draw it). For loop k
broken at the plant input with the other loops closed, L_k(jω) is the return ratio
(:func:`dampctl.analysis.margins.input_loops`), and

    S_k = 1 / (1 + L_k),    T_k = L_k / (1 + L_k) = 1 − S_k

are the loop's sensitivity and complementary sensitivity (negative feedback; Skogestad and
Postlethwaite, *Multivariable Feedback Control*, 2nd ed., 2005, eq. 2.18). The marks are the
margins of :func:`dampctl.analysis.margins.loop_margins` (the assessment's ``loops``), placed on
the drawn curves: a gain crossover at 0 dB and at the unwrapped phase there; a phase crossover
at −180° (on the branch of the drawn curve) and at its magnitude. Nothing is re-searched here,
so a figure's marks and the report's margin table are the same numbers.

Frequency data for a root locus drawn in Hz: :func:`locus_hz` (imaginary part / 2π) and
:func:`damping_rays` (the lines of constant damping ratio ζ: Re = −ζ/√(1−ζ²) · Im).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["LoopShape", "damping_rays", "locus_hz", "loop_shape", "pole_damping"]


@dataclass(frozen=True)
class LoopShape:
    """Bode and sensitivity curves of one loop, with its margins placed on the curves.

    Attributes
    ----------
    loop : str
        Name of the loop (pair, or actuator for a MIMO controller).
    freq_hz : ndarray
        Frequencies (Hz).
    magnitude_db : ndarray
        20 log10 |L| (dB).
    phase_deg : ndarray
        Unwrapped arg L (deg), on the branch that starts in [−180°, 180°].
    sensitivity_db, complementary_db : ndarray
        20 log10 |S| and 20 log10 |T| (dB).
    peak_sensitivity_db : float
        max |S| (dB) over the grid (Ms; its inverse is the distance of L from −1).
    closest_point : complex
        L where it passes closest to −1 (where |S| peaks).
    gain_crossovers : tuple of (float, float)
        (frequency Hz, drawn phase deg) of every gain crossover |L| = 1.
    phase_crossovers : tuple of (float, float)
        (frequency Hz, drawn magnitude dB) of every phase crossover (L real, negative).
    margin_crossover : tuple of (float, float, float) or None
        (frequency Hz, drawn phase deg, the −180° line's phase deg it is measured from) of the
        crossover that sets the phase margin.
    gain_margin_db, phase_margin_deg, delay_margin_s : float
        The loop's margins (:class:`dampctl.analysis.margins.LoopMargins`).
    """

    loop: str
    freq_hz: np.ndarray
    magnitude_db: np.ndarray
    phase_deg: np.ndarray
    sensitivity_db: np.ndarray
    complementary_db: np.ndarray
    peak_sensitivity_db: float
    closest_point: complex
    gain_crossovers: tuple[tuple[float, float], ...]
    phase_crossovers: tuple[tuple[float, float], ...]
    margin_crossover: tuple[float, float, float] | None
    gain_margin_db: float
    phase_margin_deg: float
    delay_margin_s: float


def _db(values: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore"):
        return 20.0 * np.log10(np.abs(values))


def loop_shape(assessment, loop: int = 0) -> LoopShape:
    """Bode, |S| and |T| curves of one loop of an assessment, with its margins placed.

    Parameters
    ----------
    assessment : Assessment
        An active design's assessment (its ``curves.loops`` and ``loops``).
    loop : int, optional
        Loop index (0-based, in the order of ``assessment.pairs``).

    Returns
    -------
    LoopShape

    Raises
    ------
    ValueError
        When the assessment has no such loop (a passive design has none).
    """
    loops = assessment.curves.loops
    if not 0 <= loop < loops.shape[0]:
        raise ValueError(f"the assessment has {loops.shape[0]} loop(s); loop {loop} does not exist")
    freq = np.asarray(assessment.curves.freq_hz, dtype=float)
    L = np.asarray(loops[loop])
    phase = np.degrees(np.unwrap(np.angle(L)))
    phase -= 360.0 * np.round(phase[0] / 360.0)  # first point in [−180°, 180°]
    margins = assessment.loops[loop]
    log_f = np.log(freq)

    def at(values: np.ndarray, f: float) -> float:
        return float(np.interp(np.log(f), log_f, values))

    gain_x = tuple((f, at(phase, f)) for f in margins.crossovers_hz)
    mag = _db(L)
    phase_x = tuple((f, at(mag, f)) for f in margins.phase_crossovers_hz)
    setting = None
    if margins.crossover_hz is not None and np.isfinite(margins.phase_margin_deg):
        drawn = at(phase, margins.crossover_hz)
        setting = (margins.crossover_hz, drawn, drawn - margins.phase_margin_deg)
    S = 1.0 / (1.0 + L)
    return LoopShape(
        loop=assessment.pairs[loop],
        freq_hz=freq,
        magnitude_db=mag,
        phase_deg=phase,
        sensitivity_db=_db(S),
        complementary_db=_db(L * S),
        peak_sensitivity_db=float(np.max(_db(S))),
        closest_point=complex(L[int(np.argmax(np.abs(S)))]),
        gain_crossovers=gain_x,
        phase_crossovers=phase_x,
        margin_crossover=setting,
        gain_margin_db=margins.gain_margin_db,
        phase_margin_deg=margins.phase_margin_deg,
        delay_margin_s=margins.delay_margin_s,
    )


def locus_hz(poles: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Poles (rad/s) as drawn on a root locus in Hz: (real part in 1/s, imaginary part in Hz).

    Parameters
    ----------
    poles : array_like of complex
        Poles s = σ + jω (σ in 1/s, ω in rad/s).

    Returns
    -------
    real_per_s, imag_hz : ndarray
        σ (1/s) and ω / 2π (Hz).
    """
    p = np.asarray(poles)
    return p.real, p.imag / (2.0 * np.pi)


def pole_damping(poles: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Damping ratio and natural frequency of poles: ζ = −Re s / |s|, f_n = |s| / 2π.

    Parameters
    ----------
    poles : array_like of complex
        Poles (rad/s).

    Returns
    -------
    damping, natural_freq_hz : ndarray
        ζ (negative for an unstable pole; NaN at s = 0) and f_n (Hz).
    """
    p = np.asarray(poles)
    size = np.abs(p)
    with np.errstate(divide="ignore", invalid="ignore"):
        zeta = np.where(size > 0, -p.real / size, np.nan)
    return zeta, size / (2.0 * np.pi)


def damping_rays(
    ratios: tuple[float, ...], top_hz: float, *, points: int = 2
) -> dict[float, tuple[np.ndarray, np.ndarray]]:
    """Lines of constant damping ratio on a root locus drawn as (σ in 1/s, Im in Hz).

    A pole s = −ζω_n + jω_n√(1−ζ²) lies on the ray σ = −ζ/√(1−ζ²) · ω.

    Parameters
    ----------
    ratios : tuple of float
        Damping ratios, each in (0, 1).
    top_hz : float
        Highest imaginary part drawn (Hz).
    points : int, optional
        Points per ray (2 for a straight line; more for a log frequency axis).

    Returns
    -------
    dict of float to (ndarray, ndarray)
        Each ratio's ray as (real part 1/s, imaginary part Hz).
    """
    rays = {}
    for zeta in ratios:
        if not 0.0 < zeta < 1.0:
            raise ValueError(f"a damping ratio must be in (0, 1), got {zeta!r}")
        imag_hz = np.geomspace(top_hz * 1e-4, top_hz, points) if points > 2 else (
            np.array([0.0, top_hz]))
        slope = zeta / np.sqrt(1.0 - zeta * zeta)
        rays[zeta] = (-slope * 2.0 * np.pi * imag_hz, imag_hz)
    return rays
