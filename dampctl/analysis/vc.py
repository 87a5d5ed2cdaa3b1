"""Vibration criterion (VC) curves and one-third-octave velocity spectra.

The generic criteria for vibration-sensitive equipment limit the **rms velocity in every
one-third-octave band**; each curve is a constant velocity from 1 to 80 Hz and successive
letters halve the level (C. G. Gordon, "Generic criteria for vibration-sensitive equipment",
Proc. SPIE 1619, 1991; E. E. Ungar, D. H. Sturz, C. H. Amick, Sound and Vibration 24(7), 1990;
current 1–80 Hz usage per IEST-RP-CC012). Bands are the base-10 one-third-octave bands of
IEC 61260: exact centres 10^(n/10) Hz, edges f_c·10^(∓1/20).

A spectrum meets a curve when the rms velocity in every band from 1 to 80 Hz is at or below
the curve's level; the class met is the most stringent such curve.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

__all__ = [
    "VC_CURVES",
    "VcRating",
    "band_edges_hz",
    "band_rms",
    "third_octave_centres_hz",
    "vc_rating",
]

#: (name, rms velocity in m/s) of each curve, least stringent first; VC-E to VC-G are the
#: exact halvings 3.125, 1.5625, 0.78125 µm/s that tables print rounded as 3.12, 1.56, 0.78
VC_CURVES: tuple[tuple[str, float], ...] = (
    ("Workshop", 800e-6),
    ("Office", 400e-6),
    ("Residential day", 200e-6),
    ("Operating theatre", 100e-6),
    ("VC-A", 50e-6),
    ("VC-B", 25e-6),
    ("VC-C", 12.5e-6),
    ("VC-D", 6.25e-6),
    ("VC-E", 3.125e-6),
    ("VC-F", 1.5625e-6),
    ("VC-G", 0.78125e-6),
)

#: nominal band centres (Hz) from 1 to 80 Hz, as printed in tables
NOMINAL_CENTRES_HZ: tuple[float, ...] = (
    1,
    1.25,
    1.6,
    2,
    2.5,
    3.15,
    4,
    5,
    6.3,
    8,
    10,
    12.5,
    16,
    20,
    25,
    31.5,
    40,
    50,
    63,
    80,
)


def third_octave_centres_hz(lowest_hz: float = 1.0, highest_hz: float = 80.0) -> np.ndarray:
    """Exact base-10 one-third-octave centres 10^(n/10) (Hz) between two nominal centres.

    Parameters
    ----------
    lowest_hz, highest_hz : float, optional
        First and last nominal centres (Hz), default 1 and 80 Hz.

    Returns
    -------
    ndarray
        Exact centres (Hz); 80 Hz is 10^(19/10) = 79.43 Hz.
    """
    n_lo = round(10.0 * np.log10(lowest_hz))
    n_hi = round(10.0 * np.log10(highest_hz))
    return 10.0 ** (np.arange(n_lo, n_hi + 1) / 10.0)


def band_edges_hz(centres_hz: Sequence[float]) -> np.ndarray:
    """Lower and upper edges f_c·10^(∓1/20) (Hz) of one-third-octave bands.

    Parameters
    ----------
    centres_hz : sequence of float
        Exact band centres (Hz).

    Returns
    -------
    ndarray, shape (n_bands, 2)
        [lower, upper] edge of each band (Hz).
    """
    centres = np.asarray(centres_hz, dtype=float)
    return np.column_stack([centres * 10.0 ** (-1 / 20), centres * 10.0 ** (1 / 20)])


def band_rms(freq_hz: np.ndarray, psd: np.ndarray, edges_hz: np.ndarray) -> np.ndarray:
    """RMS in each band of a one-sided PSD sampled on a grid (trapezoid in frequency).

    Parameters
    ----------
    freq_hz : ndarray
        Increasing grid (Hz); it should contain the band edges for exact band limits.
    psd : ndarray
        One-sided PSD on the grid (unit²/Hz).
    edges_hz : ndarray, shape (n_bands, 2)
        Band edges (Hz), from :func:`band_edges_hz`.

    Returns
    -------
    ndarray
        RMS (unit) in each band.
    """
    freq = np.asarray(freq_hz, dtype=float)
    values = np.asarray(psd, dtype=float)
    cumulative = np.concatenate(
        [[0.0], np.cumsum(0.5 * (values[1:] + values[:-1]) * np.diff(freq))]
    )
    lo = np.interp(edges_hz[:, 0], freq, cumulative)
    hi = np.interp(edges_hz[:, 1], freq, cumulative)
    return np.sqrt(np.maximum(hi - lo, 0.0))


@dataclass(frozen=True)
class VcRating:
    """The vibration criterion a one-third-octave velocity spectrum meets.

    Attributes
    ----------
    curve : str or None
        Most stringent curve met in every band; None when even the Workshop curve is exceeded.
    level_m_s : float or None
        That curve's rms velocity (m/s).
    worst_band_hz : float
        Nominal centre (Hz) of the band with the highest rms velocity.
    worst_rms_m_s : float
        Highest band rms velocity (m/s).
    """

    curve: str | None
    level_m_s: float | None
    worst_band_hz: float
    worst_rms_m_s: float


def vc_rating(band_rms_m_s: Sequence[float], centres_hz: Sequence[float]) -> VcRating:
    """Classify a one-third-octave rms velocity spectrum against the VC curves.

    Parameters
    ----------
    band_rms_m_s : sequence of float
        RMS velocity (m/s) in each band from 1 to 80 Hz.
    centres_hz : sequence of float
        Band centres (Hz), same length.

    Returns
    -------
    VcRating
    """
    values = np.asarray(band_rms_m_s, dtype=float)
    centres = np.asarray(centres_hz, dtype=float)
    if values.shape != centres.shape or values.size == 0:
        raise ValueError("band_rms_m_s and centres_hz must be non-empty and of equal length")
    worst = int(np.argmax(values))
    peak = float(values[worst])
    met = [(name, level) for name, level in VC_CURVES if peak <= level * (1 + 1e-12)]
    name, level = met[-1] if met else (None, None)
    return VcRating(
        curve=name,
        level_m_s=level,
        worst_band_hz=_nominal(float(centres[worst])),
        worst_rms_m_s=peak,
    )


def _nominal(centre_hz: float) -> float:
    """Nominal label of an exact base-10 centre (10^(19/10) = 79.43 → 80)."""
    decade = 10.0 ** np.floor(np.log10(centre_hz) + 1e-9)
    mantissa = centre_hz / decade
    table = np.array(NOMINAL_CENTRES_HZ[:10], dtype=float)
    return float(table[np.argmin(np.abs(np.log(table / mantissa)))] * decade)
