"""Fixed-point coefficients for second-order sections (Q15 / Q31 storage with a post-shift).

Convention (one format per section, for all five coefficients b0, b1, b2, a1, a2):

* storage word W = 16 bits (``"q15"``) or 32 bits (``"q31"``), two's complement;
* a **shift** s ≥ 0, the smallest for which every rounded coefficient fits the word; the
  coefficient c is stored as the integer ``round(c · 2^F)`` with F = W − 1 − s fractional bits
  (s = 1 is the Q1.14 format for Q15 storage — needed because a lightly damped low-frequency
  pole pair has |a1| close to 2 — and Q1.30 for Q31);
* samples are Q15 (or Q31) fractions; the routine (direct form I, accumulator int64) forms
  ``acc = b0 x[n] + b1 x[n−1] + b2 x[n−2] − a1 y[n−1] − a2 y[n−2]`` and
  ``y[n] = saturate((acc + 2^(F−1)) >> F)``, i.e. it shifts by W − 1 − s: the product of a
  Q(F) coefficient and a Q(W−1) sample has F + W − 1 fractional bits.

Rounding moves the poles. For each section the pole radius, the equivalent s-plane frequency and
damping ratio (from s = ln(z)/T) before and after rounding are reported; a section is
**refused** when a quantized pole leaves the unit circle (a pole exactly on it, from an
integrator, may stay there) or when the damping ratio of a complex pole pair changes by more
than :data:`DAMPING_TOLERANCE` relative (5 %; for a real pole, its corner frequency by the same
fraction). The pole sensitivities behind this are in Oppenheim & Schafer, *Discrete-Time Signal
Processing* (3rd ed. 2010), coefficient quantization: ∂θ/∂a1 = 1/(2 r sin θ), large for poles
near z = 1.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np

from dampctl.discrete.sections import Cascade, ParallelForm
from dampctl.errors import UsageError

__all__ = [
    "DAMPING_TOLERANCE",
    "FORMATS",
    "QuantizedSection",
    "SectionPoles",
    "cascade_peak_gains",
    "quantize_cascade",
    "quantize_parallel",
    "quantize_section",
    "run_fixed",
    "section_poles",
]

#: storage word length (bits) of each fixed-point format
FORMATS = {"q15": 16, "q31": 32}
#: largest relative change of a section's pole damping ratio (or real-pole corner) accepted
DAMPING_TOLERANCE = 0.05


@dataclass(frozen=True)
class SectionPoles:
    """The dominant pole of a section (largest |z|), and its s-plane equivalent.

    Attributes
    ----------
    radius : float
        |z| of the pole closest to the unit circle.
    freq_hz : float
        |s|/2π of s = ln(z)/T (Hz); the corner for a real pole.
    damping : float
        −Re(s)/|s| (1 for a real pole).
    complex_pair : bool
        The section has a complex-conjugate pole pair.
    """

    radius: float
    freq_hz: float
    damping: float
    complex_pair: bool


def section_poles(a1: float, a2: float, rate_hz: float) -> SectionPoles:
    """Dominant pole of the denominator 1 + a1 z⁻¹ + a2 z⁻².

    Parameters
    ----------
    a1, a2 : float
        Denominator coefficients.
    rate_hz : float
        Sample rate (Hz).

    Returns
    -------
    SectionPoles
    """
    roots = np.roots([1.0, a1, a2]) if a2 != 0.0 else np.array([-a1 + 0j])
    roots = roots.astype(complex)
    k = int(np.argmax(np.abs(roots)))
    z = roots[k]
    radius = float(abs(z))
    if radius == 0.0:
        return SectionPoles(0.0, math.inf, 1.0, False)
    s = np.log(z) * rate_hz
    omega = float(abs(s))
    damping = float(-s.real / omega) if omega > 0 else 1.0
    return SectionPoles(radius, omega / (2 * math.pi), damping, bool(abs(z.imag) > 0.0))


@dataclass(frozen=True)
class QuantizedSection:
    """One second-order section with rounded coefficients.

    Attributes
    ----------
    label : str
        Which section ("loop p3, section 2").
    word_bits, frac_bits, shift : int
        Storage word W, fractional bits F = W − 1 − shift, and the shift.
    integers : tuple of int
        Stored (b0, b1, b2, a1, a2).
    sos : ndarray, shape (6,)
        The values the integers stand for: (b0, b1, b2, 1, a1, a2).
    before, after : SectionPoles
        Dominant pole before and after rounding.
    damping_change : float
        Relative change of the damping ratio (complex pair) or of the corner frequency (real
        pole); 0 when the section has no pole.
    stable : bool
        Quantized poles inside the unit circle (or on it where the unrounded ones are).
    accepted : bool
        Stable and ``|damping_change|`` ≤ the tolerance.
    tolerance : float
        The tolerance applied.
    """

    label: str
    word_bits: int
    frac_bits: int
    shift: int
    integers: tuple[int, ...]
    sos: np.ndarray
    before: SectionPoles
    after: SectionPoles
    damping_change: float
    stable: bool
    accepted: bool
    tolerance: float = DAMPING_TOLERANCE

    @property
    def reason(self) -> str:
        """Why the section is refused ('' when accepted)."""
        if not self.stable:
            return f"{self.label}: quantized pole radius {self.after.radius:.9f} >= 1 (unstable)"
        if not self.accepted:
            what = "damping ratio" if self.before.complex_pair else "real-pole corner"
            return (
                f"{self.label}: {what} moves by {100 * self.damping_change:+.2f} % on rounding "
                f"(tolerance {100 * self.tolerance:.3g} %); use q31 or a higher rate"
            )
        return ""


def _fit_shift(coeffs: np.ndarray, word_bits: int) -> tuple[int, np.ndarray]:
    top = 2 ** (word_bits - 1)
    for shift in range(word_bits - 1):
        frac = word_bits - 1 - shift
        ints = np.round(coeffs * 2.0**frac)
        if np.all(ints <= top - 1) and np.all(ints >= -top):
            return shift, ints
    raise UsageError(f"coefficients {coeffs} do not fit a {word_bits}-bit word")


def quantize_section(
    sos_row,
    rate_hz: float,
    *,
    fmt: Literal["q15", "q31"] = "q15",
    label: str = "section",
    tolerance: float = DAMPING_TOLERANCE,
) -> QuantizedSection:
    """Round one section's coefficients to a fixed-point format with the smallest shift.

    Parameters
    ----------
    sos_row : array_like, shape (6,)
        (b0, b1, b2, 1, a1, a2).
    rate_hz : float
        Sample rate (Hz), for the equivalent pole frequency and damping.
    fmt : {"q15", "q31"}, optional
        Storage format (16- or 32-bit word). Default ``"q15"``.
    label : str, optional
        Name of the section in messages.
    tolerance : float, optional
        Largest relative damping (or real-pole corner) change accepted. Default 0.05.

    Returns
    -------
    QuantizedSection
    """
    if fmt not in FORMATS:
        raise UsageError(f"fixed-point format must be one of {', '.join(FORMATS)}, got {fmt!r}")
    row = np.asarray(sos_row, dtype=float).ravel()
    word = FORMATS[fmt]
    coeffs = np.array([row[0], row[1], row[2], row[4], row[5]])
    shift, ints = _fit_shift(coeffs, word)
    frac = word - 1 - shift
    values = ints / 2.0**frac
    sos = np.array([values[0], values[1], values[2], 1.0, values[3], values[4]])
    sos.setflags(write=False)
    before = section_poles(row[4], row[5], rate_hz)
    after = section_poles(values[3], values[4], rate_hz)
    if before.radius == 0.0 and after.radius == 0.0:
        change = 0.0
    elif before.complex_pair:
        change = (
            (after.damping - before.damping) / abs(before.damping)
            if before.damping
            else (math.inf if after.damping != before.damping else 0.0)
        )
    else:
        change = (
            (after.freq_hz - before.freq_hz) / before.freq_hz
            if before.freq_hz
            else (0.0 if after.freq_hz == 0.0 else math.inf)
        )
    stable = after.radius < 1.0 or (after.radius <= 1.0 + 1e-12 and before.radius >= 1.0 - 1e-12)
    return QuantizedSection(
        label=label,
        word_bits=word,
        frac_bits=frac,
        shift=shift,
        integers=tuple(int(v) for v in ints),
        sos=sos,
        before=before,
        after=after,
        damping_change=float(change),
        stable=bool(stable),
        accepted=bool(stable and abs(change) <= tolerance),
        tolerance=float(tolerance),
    )


def quantize_cascade(
    cascade: Cascade,
    rate_hz: float,
    *,
    fmt: Literal["q15", "q31"] = "q15",
    label: str = "",
    tolerance: float = DAMPING_TOLERANCE,
) -> tuple[Cascade, tuple[QuantizedSection, ...]]:
    """Quantize every section of a cascade; the gain stays a float (applied by the caller).

    Parameters
    ----------
    cascade : Cascade
        Float sections and gain.
    rate_hz : float
        Sample rate (Hz).
    fmt : {"q15", "q31"}, optional
        Storage format. Default ``"q15"``.
    label : str, optional
        Prefix of the section labels.
    tolerance : float, optional
        See :func:`quantize_section`.

    Returns
    -------
    cascade : Cascade
        Same gain, rounded sections (for verification).
    sections : tuple of QuantizedSection
        One per section.
    """
    prefix = label or cascade.label
    sections = tuple(
        quantize_section(
            row, rate_hz, fmt=fmt, label=f"{prefix}, section {k + 1}", tolerance=tolerance
        )
        for k, row in enumerate(cascade.sos)
    )
    rounded = Cascade(np.array([s.sos for s in sections]), cascade.gain, cascade.label)
    return rounded, sections


def quantize_parallel(
    form: ParallelForm,
    rate_hz: float,
    *,
    fmt: Literal["q15", "q31"] = "q15",
    label: str = "",
    tolerance: float = DAMPING_TOLERANCE,
) -> tuple[ParallelForm, tuple[QuantizedSection, ...]]:
    """Quantize every branch of a parallel form (see :func:`quantize_cascade`).

    Parameters
    ----------
    form : ParallelForm
        Float form.
    rate_hz : float
        Sample rate (Hz).
    fmt : {"q15", "q31"}, optional
        Storage format.
    label : str, optional
        Prefix of the section labels.
    tolerance : float, optional
        See :func:`quantize_section`.

    Returns
    -------
    form : ParallelForm
        Rounded branches.
    sections : tuple of QuantizedSection
        All sections, branch by branch.
    """
    branches, sections = [], []
    for branch in form.branches:
        name = f"{label}, {branch.label}" if label else branch.label
        rounded, secs = quantize_cascade(branch, rate_hz, fmt=fmt, label=name, tolerance=tolerance)
        branches.append(rounded)
        sections.extend(secs)
    return ParallelForm(form.feedthrough, tuple(branches)), tuple(sections)


def cascade_peak_gains(sos, rate_hz: float) -> np.ndarray:
    """Signal headroom of a cascade: peak gain from its input to each section's output.

    Parameters
    ----------
    sos : array_like, shape (n_sections, 6)
        The sections (b0, b1, b2, 1, a1, a2), without the cascade's gain.
    rate_hz : float
        Sample rate (Hz).

    Returns
    -------
    ndarray, shape (n_sections,)
        max over frequency of |Π_{j ≤ k} H_j(e^{jωT})| for k = 1..n, on a grid of 4096 points
        from 0 to Nyquist plus every section's pole angle (where a lightly damped peak sits).
        A fixed-point input must stay below full scale divided by the largest of these
        (inf when a pole lies on the unit circle).
    """
    sos = np.asarray(sos, dtype=float).reshape(-1, 6)
    angles = [np.abs(np.angle(np.roots([1.0, r[4], r[5]]))) for r in sos if r[5] or r[4]]
    grid = np.concatenate([np.linspace(0.0, np.pi, 4096), *angles]) if angles else None
    if grid is None:
        grid = np.linspace(0.0, np.pi, 4096)
    z1 = np.exp(-1j * grid)
    out, h = [], np.ones(grid.shape, dtype=complex)
    for b0, b1, b2, _a0, a1, a2 in sos:
        den = 1.0 + a1 * z1 + a2 * z1**2
        with np.errstate(divide="ignore", invalid="ignore"):
            h = np.where(den == 0, np.inf, h * (b0 + b1 * z1 + b2 * z1**2) / den)
        out.append(float(np.max(np.abs(h))))  # inf for a pole on the unit circle
    return np.array(out)


def run_fixed(sections, samples) -> np.ndarray:
    """Bit-exact model of the fixed-point routine (direct form I, wide accumulator).

    Parameters
    ----------
    sections : sequence of QuantizedSection
        The cascade, all of one word length.
    samples : array_like of int
        Input samples as integers (Q15 or Q31 fractions).

    Returns
    -------
    ndarray of int
        Output samples of the cascade, same format (saturated to the word).
    """
    signal = [int(v) for v in np.asarray(samples).ravel()]
    for sec in sections:
        top = 2 ** (sec.word_bits - 1)
        b0, b1, b2, a1, a2 = sec.integers
        half = 1 << (sec.frac_bits - 1) if sec.frac_bits > 0 else 0
        x1 = x2 = y1 = y2 = 0
        out = []
        for x in signal:
            acc = b0 * x + b1 * x1 + b2 * x2 - a1 * y1 - a2 * y2
            y = (acc + half) >> sec.frac_bits
            y = max(-top, min(top - 1, y))
            x2, x1, y2, y1 = x1, x, y1, y
            out.append(y)
        signal = out
    return np.array(signal, dtype=np.int64)
