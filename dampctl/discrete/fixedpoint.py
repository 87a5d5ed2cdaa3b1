"""Fixed-point coefficients for second-order sections (Q15 / Q31 storage).

Convention (per section):

* storage word W = 16 bits (``"q15"``) or 32 bits (``"q31"``), two's complement; samples are
  Q(W−1) fractions of the loop's full scale (:mod:`dampctl.discrete.scaling` chooses it);
* each denominator coefficient is stored as ``round(a · 2^F)`` with the most fractional bits
  F ≤ W − 1 that fit the word: a1 of a lightly damped low-frequency pole pair is close to −2
  and needs F1 = W − 2 (Q1.14 for a 16-bit word), while a2 = r² < 1 keeps all W − 1 bits (Q15),
  which halves its rounding (the pole radius moves by ∂r/∂a2 = 1/(2r) per unit of a2);
* the numerator (b0, b1, b2) has its own fractional bits Fb, the most that fit the word (up to
  2(W − 1) for Q15): after signal scaling a resonant section's numerator is small, and one common
  format would leave it a few counts (L. B. Jackson, *Bell Syst. Tech. J.* 49(2), 1970, on the
  dynamic range of scaled sections). For Q31, whose products already fill the 64-bit
  accumulator, all five share the most bits that fit;
* the routine (direct form I, int64 accumulator) forms, with F = max(Fb, F1, F2),
  ``acc = 2^(F−Fb) (b0 x[n] + b1 x[n−1] + b2 x[n−2]) − 2^(F−F1) a1 y[n−1] − 2^(F−F2) a2 y[n−2]``
  and ``y[n] = saturate((acc + 2^(F−1)) >> F)``.

Rounding moves the poles. For each section the pole radius, the equivalent s-plane frequency and
damping ratio (from s = ln(z)/T) before and after rounding are reported; a section is
**refused** when a quantized pole leaves the unit circle (a pole exactly on it, from an
integrator, may stay there), when the damping ratio of a complex pole pair changes by more than
:data:`DAMPING_TOLERANCE` relative (5 %; for a real pole, its corner frequency by the same
fraction), or when the pole frequency moves by more than :data:`FREQUENCY_TOLERANCE` (0.2 %).
The pole sensitivities behind this are in A. V. Oppenheim & R. W. Schafer, *Discrete-Time
Signal Processing* (3rd ed. 2010), coefficient quantization: ∂θ/∂a1 = 1/(2 r sin θ) and
∂r/∂a2 = 1/(2r), large in relative terms for poles near z = 1; :func:`rate_for_format` turns
them into the highest sample rate at which a section holds its tolerances.
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
    "FREQUENCY_TOLERANCE",
    "QuantizedSection",
    "SectionPoles",
    "cascade_peak_gains",
    "quantize_cascade",
    "quantize_parallel",
    "quantize_section",
    "rate_for_format",
    "run_fixed",
    "section_poles",
]

#: storage word length (bits) of each fixed-point format
FORMATS = {"q15": 16, "q31": 32}
#: largest relative change of a section's pole damping ratio (or real-pole corner) accepted
DAMPING_TOLERANCE = 0.05
#: largest relative change of a section's pole frequency accepted (complex pairs)
FREQUENCY_TOLERANCE = 0.002
#: most fractional bits of a numerator coefficient (Q15: products stay within 2^30)
_NUM_FRAC_MAX = {16: 30, 32: 31}


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
    word_bits : int
        Storage word W.
    num_frac_bits, a1_frac_bits, a2_frac_bits : int
        Fractional bits of the numerator (Fb) and of a1 (F1) and a2 (F2).
    integers : tuple of int
        Stored (b0, b1, b2, a1, a2).
    sos : ndarray, shape (6,)
        The values the integers stand for: (b0, b1, b2, 1, a1, a2).
    before, after : SectionPoles
        Dominant pole before and after rounding.
    damping_change : float
        Relative change of the damping ratio (complex pair) or of the corner frequency (real
        pole); 0 when the section has no pole.
    frequency_change : float
        Relative change of the pole frequency (complex pair; 0 otherwise).
    stable : bool
        Quantized poles inside the unit circle (or on it where the unrounded ones are).
    accepted : bool
        Stable, ``|damping_change|`` ≤ ``tolerance`` and ``|frequency_change|`` ≤
        ``frequency_tolerance``.
    tolerance : float
        The damping tolerance applied.
    frequency_tolerance : float
        The frequency tolerance applied.
    """

    label: str
    word_bits: int
    num_frac_bits: int
    a1_frac_bits: int
    a2_frac_bits: int
    integers: tuple[int, ...]
    sos: np.ndarray
    before: SectionPoles
    after: SectionPoles
    damping_change: float
    frequency_change: float
    stable: bool
    accepted: bool
    tolerance: float = DAMPING_TOLERANCE
    frequency_tolerance: float = FREQUENCY_TOLERANCE

    @property
    def frac_bits(self) -> int:
        """Fractional bits of the accumulator, F = max(Fb, F1, F2): the output shift."""
        return max(self.num_frac_bits, self.a1_frac_bits, self.a2_frac_bits)

    @property
    def reason(self) -> str:
        """Why the section is refused ('' when accepted)."""
        if not self.stable:
            return f"{self.label}: quantized pole radius {self.after.radius:.9f} >= 1 (unstable)"
        if abs(self.frequency_change) > self.frequency_tolerance:
            return (
                f"{self.label}: pole frequency moves by {100 * self.frequency_change:+.3f} % on "
                f"rounding ({self.before.freq_hz:.6g} -> {self.after.freq_hz:.6g} Hz; tolerance "
                f"{100 * self.frequency_tolerance:.3g} %)"
            )
        if not self.accepted:
            what = "damping ratio" if self.before.complex_pair else "real-pole corner"
            return (
                f"{self.label}: {what} moves by {100 * self.damping_change:+.2f} % on rounding "
                f"(tolerance {100 * self.tolerance:.3g} %)"
            )
        return ""


def _fit(coeffs: np.ndarray, word_bits: int, most: int) -> tuple[int, np.ndarray]:
    """The most fractional bits (≤ ``most``) whose rounded coefficients fit the word."""
    top = 2 ** (word_bits - 1)
    for frac in range(most, -1, -1):
        ints = np.round(coeffs * 2.0**frac)
        if np.all(ints <= top - 1) and np.all(ints >= -top):
            return frac, ints
    raise UsageError(f"coefficients {coeffs} do not fit a {word_bits}-bit word")


def quantize_section(
    sos_row,
    rate_hz: float,
    *,
    fmt: Literal["q15", "q31"] = "q15",
    label: str = "section",
    tolerance: float = DAMPING_TOLERANCE,
    frequency_tolerance: float = FREQUENCY_TOLERANCE,
) -> QuantizedSection:
    """Round one section's coefficients to a fixed-point format (see the module doc).

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
    frequency_tolerance : float, optional
        Largest relative pole-frequency change accepted. Default 0.002.

    Returns
    -------
    QuantizedSection
    """
    if fmt not in FORMATS:
        raise UsageError(f"fixed-point format must be one of {', '.join(FORMATS)}, got {fmt!r}")
    row = np.asarray(sos_row, dtype=float).ravel()
    word = FORMATS[fmt]
    if word == 16:
        num_frac, num = _fit(np.array(row[:3]), word, _NUM_FRAC_MAX[word])
        f1, a1 = _fit(np.array([row[4]]), word, word - 1)
        f2, a2 = _fit(np.array([row[5]]), word, word - 1)
    else:  # Q31: one format for all five (no room in the accumulator to align products)
        num_frac, _ = _fit(np.array([row[0], row[1], row[2], row[4], row[5]]), word, word - 1)
        f1 = f2 = num_frac
        num = np.round(np.array(row[:3]) * 2.0**num_frac)
        a1, a2 = np.round([row[4] * 2.0**f1]), np.round([row[5] * 2.0**f2])
    ints = np.concatenate([num, a1, a2])
    nv = num / 2.0**num_frac
    dv = (float(a1[0]) / 2.0**f1, float(a2[0]) / 2.0**f2)
    sos = np.array([nv[0], nv[1], nv[2], 1.0, dv[0], dv[1]])
    sos.setflags(write=False)
    before = section_poles(row[4], row[5], rate_hz)
    after = section_poles(dv[0], dv[1], rate_hz)
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
    freq_change = 0.0
    if before.complex_pair and before.freq_hz > 0:
        freq_change = (after.freq_hz - before.freq_hz) / before.freq_hz
    stable = after.radius < 1.0 or (after.radius <= 1.0 + 1e-12 and before.radius >= 1.0 - 1e-12)
    ok = stable and abs(change) <= tolerance and abs(freq_change) <= frequency_tolerance
    return QuantizedSection(
        label=label,
        word_bits=word,
        num_frac_bits=int(num_frac),
        a1_frac_bits=int(f1),
        a2_frac_bits=int(f2),
        integers=tuple(int(v) for v in ints),
        sos=sos,
        before=before,
        after=after,
        damping_change=float(change),
        frequency_change=float(freq_change),
        stable=bool(stable),
        accepted=bool(ok),
        tolerance=float(tolerance),
        frequency_tolerance=float(frequency_tolerance),
    )


def rate_for_format(
    freq_hz: float,
    damping: float,
    fmt: Literal["q15", "q31"],
    *,
    tolerance: float = DAMPING_TOLERANCE,
    frequency_tolerance: float = FREQUENCY_TOLERANCE,
) -> float:
    """Highest sample rate at which a pole pair's rounding stays within the tolerances.

    From the pole sensitivities of a second-order denominator (Oppenheim & Schafer 2010):
    rounding a1 to half an LSB (ε = 2^−(F1+1), F1 = W − 2 for a lightly damped pair near
    z = 1) moves the pole angle θ = ωT by up to ε/(2 r sin θ) and the radius by ε/(2r). For
    small θ the relative frequency error is about ε/(2θ²) and the relative damping error about
    ε/(2θ²ζ) (the radius error over ζθ), so θ must be at least sqrt(ε/(2 tol)) for each.
    An estimate for advice ("at most N Hz"), not a guarantee: the export checks the rounded
    sections themselves.

    Parameters
    ----------
    freq_hz : float
        Pole frequency (Hz).
    damping : float
        Pole damping ratio.
    fmt : {"q15", "q31"}
        Storage format.
    tolerance, frequency_tolerance : float, optional
        Relative damping and frequency tolerances.

    Returns
    -------
    float
        Sample rate (Hz) below which the section is expected to pass.
    """
    eps = 2.0 ** -(FORMATS[fmt] - 2 + 1)
    theta_f = math.sqrt(eps / (2.0 * frequency_tolerance))
    theta_d = math.sqrt(eps / (2.0 * tolerance * max(damping, 1e-9)))
    theta = max(theta_f, theta_d)
    return float(2.0 * math.pi * freq_hz / theta)


def quantize_cascade(
    cascade: Cascade,
    rate_hz: float,
    *,
    fmt: Literal["q15", "q31"] = "q15",
    label: str = "",
    tolerance: float = DAMPING_TOLERANCE,
    frequency_tolerance: float = FREQUENCY_TOLERANCE,
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
    tolerance, frequency_tolerance : float, optional
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
            row,
            rate_hz,
            fmt=fmt,
            label=f"{prefix}, section {k + 1}",
            tolerance=tolerance,
            frequency_tolerance=frequency_tolerance,
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
    frequency_tolerance: float = FREQUENCY_TOLERANCE,
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
    tolerance, frequency_tolerance : float, optional
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
        rounded, secs = quantize_cascade(
            branch,
            rate_hz,
            fmt=fmt,
            label=name,
            tolerance=tolerance,
            frequency_tolerance=frequency_tolerance,
        )
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
        f = sec.frac_bits
        kb = 1 << (f - sec.num_frac_bits)
        k1, k2 = 1 << (f - sec.a1_frac_bits), 1 << (f - sec.a2_frac_bits)
        half = 1 << (f - 1) if f > 0 else 0
        x1 = x2 = y1 = y2 = 0
        out = []
        for x in signal:
            acc = kb * (b0 * x + b1 * x1 + b2 * x2) - k1 * a1 * y1 - k2 * a2 * y2
            y = (acc + half) >> f
            y = max(-top, min(top - 1, y))
            x2, x1, y2, y1 = x1, x, y1, y
            out.append(y)
        signal = out
    return np.array(signal, dtype=np.int64)
