"""Signal scaling of fixed-point cascades, and the noise and input range that come with it.

A branch of a discrete controller is ``u_b = g_b Π_k H_k(z) y`` (sensor units in, actuator
units out). On a fixed-point target the input arrives as a fraction of a full scale X (sensor
units per full-scale word) and every section output is a word that must not overflow. The
sections are **scaled** so that no node can overflow for any input within X, following
L. B. Jackson, "On the interaction of roundoff noise and dynamic range in digital filters",
*Bell Syst. Tech. J.* 49(2):159–184, 1970:

* **ordering**: the sections run with the poles closest to the unit circle last (Jackson's
  rule for L∞ scaling: the high-gain resonant sections come after the others, so that their
  noise is not amplified by them); the pairing of each pole pair with its nearest zeros is the
  one the sections were built with (``scipy.signal.zpk2sos(pairing="nearest")``, or a design
  section's own numerator);
* **scaling**: with P_k the norm of the prefix Π_{j ≤ k} H_j from the input to the output of
  section k, section k's numerator is multiplied by c_k = P_{k−1}/P_k (P_0 = 1), so every node
  has norm exactly 1 from the input fraction; the L∞ norm (peak gain, the right one for
  sinusoids: no overflow for any sinusoid within X) or the L2 norm (for white-ish inputs);
* **output scale**: the branch output word then stands for O_b = |g_b| X P_n actuator units,
  applied by the caller as a float ``output_scale`` (with the sign of g_b).

The price of a wide input range is noise: rounding each section's output to the word adds white
noise of variance q²/12 (q = 2^−(W−1), one LSB of a Q(W−1) fraction), which reaches the output
through the section's own recursion and the later sections (direct form I): σ_b² = Σ_k (q²/12)
‖(1/A_k) Π_{j>k} H'_j‖₂² (in output fractions), times O_b² in actuator units (A. V. Oppenheim & R.
W. Schafer, *Discrete-Time Signal Processing*, 3rd ed. 2010, chapter on finite-precision effects;
from memory). The L∞ and L1 norms are computed on the unit circle (a dense grid plus every pole
angle) and from the impulse response, the L2 norm exactly from a discrete Lyapunov equation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
import scipy.linalg

from dampctl.discrete.sections import Cascade, ParallelForm, _sos_matrices
from dampctl.errors import UsageError

__all__ = [
    "NORMS",
    "BranchScaling",
    "LoopScaling",
    "cascade_norms",
    "order_sections",
    "rounding_noise_gains",
    "scale_form",
]

#: node norms the scaling can use
NORMS = ("linf", "l2")
#: points of the frequency grid for peak gains (plus every pole angle)
_GRID = 4096


def order_sections(sos) -> np.ndarray:
    """Sections reordered so that the poles closest to the unit circle come last.

    Parameters
    ----------
    sos : array_like, shape (n, 6)
        Sections (b0, b1, b2, 1, a1, a2).

    Returns
    -------
    ndarray, shape (n, 6)
        The same sections, stably sorted by the radius of their largest pole (Jackson 1970).
    """
    sos = np.asarray(sos, dtype=float).reshape(-1, 6)
    radius = [_pole_radius(row) for row in sos]
    return sos[np.argsort(radius, kind="stable")]


def _pole_radius(row) -> float:
    if row[5] == 0.0 and row[4] == 0.0:
        return 0.0
    return float(np.max(np.abs(np.roots([1.0, row[4], row[5]]))))


def _grid(sos: np.ndarray) -> np.ndarray:
    angles = [np.abs(np.angle(np.roots([1.0, r[4], r[5]]))) for r in sos if r[5] or r[4]]
    return np.unique(np.concatenate([np.linspace(0.0, np.pi, _GRID), *angles]))


def _prefix_responses(sos: np.ndarray, grid: np.ndarray) -> np.ndarray:
    z1 = np.exp(-1j * grid)
    out = np.empty((sos.shape[0], grid.size), dtype=complex)
    h = np.ones(grid.size, dtype=complex)
    for k, (b0, b1, b2, _a0, a1, a2) in enumerate(sos):
        den = 1.0 + a1 * z1 + a2 * z1**2
        with np.errstate(divide="ignore", invalid="ignore"):
            h = np.where(den == 0, np.inf, h * (b0 + b1 * z1 + b2 * z1**2) / den)
        out[k] = h
    return out


def _peak(sos: np.ndarray) -> float:
    """max over the unit circle of |Π sections|: the grid's best point, then refined twice on
    a fine grid between its neighbours (a lightly damped peak lies beside its pole's angle)."""
    grid = _grid(sos)
    mag = np.abs(_prefix_responses(sos, grid)[-1])
    if not np.all(np.isfinite(mag)):
        return math.inf
    k = int(np.argmax(mag))
    best = float(mag[k])
    lo, hi = grid[max(k - 1, 0)], grid[min(k + 1, grid.size - 1)]
    for _ in range(3):
        fine = np.linspace(lo, hi, 201)
        mag = np.abs(_prefix_responses(sos, fine)[-1])
        j = int(np.argmax(mag))
        best = max(best, float(mag[j]))
        lo, hi = fine[max(j - 1, 0)], fine[min(j + 1, fine.size - 1)]
    return best


def _l2_norm(sos: np.ndarray) -> float:
    """‖Π sections‖₂ from the discrete controllability Gramian (inf when not stable)."""
    A, B, C, D = _sos_matrices(sos, 1.0)
    if A.shape[0] == 0:
        return float(abs(D[0, 0]))
    if np.max(np.abs(np.linalg.eigvals(A))) >= 1.0:
        return math.inf
    P = scipy.linalg.solve_discrete_lyapunov(A, B @ B.T)
    return float(math.sqrt(max((C @ P @ C.T + D @ D.T)[0, 0], 0.0)))


def _l1_norm(sos: np.ndarray) -> float:
    """Σ|h[n]| of the impulse response (the bound for any input signal; inf when unstable)."""
    radius = max((_pole_radius(r) for r in sos), default=0.0)
    if radius >= 1.0:
        return math.inf
    n = int(min(400_000, max(256, math.ceil(40.0 / max(1.0 - radius, 1e-9)))))
    import scipy.signal  # here, not at import: it costs 0.3 s to load

    impulse = np.zeros(n)
    impulse[0] = 1.0
    return float(np.sum(np.abs(scipy.signal.sosfilt(sos, impulse))))


def cascade_norms(sos, norm: Literal["linf", "l2", "l1"] = "linf") -> np.ndarray:
    """Norm of the transfer from the cascade input to each section's output.

    Parameters
    ----------
    sos : array_like, shape (n, 6)
        Sections in the order they run.
    norm : {"linf", "l2", "l1"}, optional
        Peak gain over the unit circle, the 2-norm (RMS gain for white input), or the sum of
        the impulse response's magnitudes (the bound for any input). Default ``"linf"``.

    Returns
    -------
    ndarray, shape (n,)
        ‖Π_{j ≤ k} H_j‖ for k = 1..n (inf where a pole lies on or outside the unit circle).
    """
    sos = np.asarray(sos, dtype=float).reshape(-1, 6)
    if norm == "linf":
        return np.array([_peak(sos[: k + 1]) for k in range(sos.shape[0])])
    if norm == "l2":
        return np.array([_l2_norm(sos[: k + 1]) for k in range(sos.shape[0])])
    if norm == "l1":
        return np.array([_l1_norm(sos[: k + 1]) for k in range(sos.shape[0])])
    raise UsageError(f"norm must be one of linf, l2, l1, got {norm!r}")


def rounding_noise_gains(sos) -> np.ndarray:
    """‖H_{k→out}‖₂ for each section k: the 2-norm from section k's rounding to the output.

    In direct form I the rounding of a section's accumulator is added before the section's
    own recursion, so it reaches the output through 1/A_k(z) and the later sections.

    Parameters
    ----------
    sos : array_like, shape (n, 6)
        Sections in the order they run.

    Returns
    -------
    ndarray, shape (n,)
        The 2-norm of (1/A_k) Π_{j > k} H_j.
    """
    sos = np.asarray(sos, dtype=float).reshape(-1, 6)
    out = []
    for k, row in enumerate(sos):
        tail = np.vstack([[1.0, 0.0, 0.0, 1.0, row[4], row[5]], sos[k + 1 :]])
        out.append(_l2_norm(tail))
    return np.array(out)


@dataclass(frozen=True)
class BranchScaling:
    """One branch scaled for a fixed-point word.

    Attributes
    ----------
    label : str
        The branch.
    sos : ndarray, shape (n, 6)
        Scaled sections in the order they run (floats, before rounding).
    output_scale : float
        Actuator units per full-scale output word (signed: the branch gain's sign).
    node_norms : ndarray, shape (n,)
        Norm (of the chosen kind) from the input fraction to each section's output: 1.
    noise_gains : ndarray, shape (n,)
        ‖(1/A_k) Π_{j > k} H'_j‖₂ of the scaled sections (:func:`rounding_noise_gains`).
    """

    label: str
    sos: np.ndarray
    output_scale: float
    node_norms: np.ndarray
    noise_gains: np.ndarray

    def cascade(self, input_full_scale: float, sos=None) -> Cascade:
        """The branch as a float cascade in physical units (sensor to actuator units).

        Parameters
        ----------
        input_full_scale : float
            Sensor units per full-scale input word.
        sos : array_like, optional
            Sections to use instead of :attr:`sos` (e.g. the rounded ones).

        Returns
        -------
        Cascade
        """
        rows = self.sos if sos is None else sos
        return Cascade(np.asarray(rows, dtype=float), self.output_scale / input_full_scale,
                       self.label)

    def noise_rms(self, word_bits: int) -> float:
        """RMS output noise (actuator units) from rounding every section output to the word.

        Parameters
        ----------
        word_bits : int
            Word length W (16 for Q15, 32 for Q31).

        Returns
        -------
        float
            |O_b| · sqrt(Σ_k (q²/12) ‖H_{k→out}‖₂²), q = 2^−(W−1).
        """
        q = 2.0 ** (1 - word_bits)
        return abs(self.output_scale) * math.sqrt(float(np.sum(self.noise_gains**2)) * q * q / 12)


@dataclass(frozen=True)
class LoopScaling:
    """A loop's (or path's) signal scaling for a fixed-point target.

    Attributes
    ----------
    norm : {"linf", "l2"}
        The node norm the sections were scaled by.
    input_full_scale : float
        Sensor units per full-scale input word: the input range that cannot overflow any node
        (for sinusoids of any frequency with ``linf``; for white input of that RMS with
        ``l2``).
    input_range_any_signal : float
        The range for which no node can overflow whatever the input signal (L1 bound).
    output_limit : float or None
        The actuator's limit the range was chosen against (actuator units), if any.
    peak_command : float
        Largest actuator command (actuator units) a full-scale sinusoid can ask for:
        X · max over frequency of |K|.
    branches : tuple of BranchScaling
        One per branch.
    feedthrough : float
        Direct term (actuator per sensor unit), applied in floating point by the caller.
    """

    norm: str
    input_full_scale: float
    input_range_any_signal: float
    output_limit: float | None
    peak_command: float
    branches: tuple[BranchScaling, ...]
    feedthrough: float

    def form(self, rounded_sos=None) -> ParallelForm:
        """The scaled loop as a float form in physical units (equal to the unscaled one).

        Parameters
        ----------
        rounded_sos : sequence of array_like, optional
            Per branch, sections to use instead of the scaled floats (the rounded ones).

        Returns
        -------
        ParallelForm
        """
        rows = rounded_sos or [None] * len(self.branches)
        return ParallelForm(
            self.feedthrough,
            tuple(b.cascade(self.input_full_scale, r) for b, r in zip(
                self.branches, rows, strict=True)),
        )

    def noise_rms(self, word_bits: int) -> float:
        """RMS output noise (actuator units) of all branches' rounding (independent sources).

        Parameters
        ----------
        word_bits : int
            Word length W.

        Returns
        -------
        float
        """
        return math.sqrt(sum(b.noise_rms(word_bits) ** 2 for b in self.branches))


def _loop_peak(form: ParallelForm) -> float:
    """max |K| of the whole loop on the unit circle (inf with a pole on it)."""
    sos_all = [np.asarray(b.sos, dtype=float) for b in form.branches]
    if any(_pole_radius(r) >= 1.0 for s in sos_all for r in s):
        return math.inf
    grid = np.unique(np.concatenate([_grid(s) for s in sos_all])) if sos_all else np.zeros(1)
    total = np.full(grid.size, form.feedthrough, dtype=complex)
    for b, s in zip(form.branches, sos_all, strict=True):
        total = total + b.gain * _prefix_responses(s, grid)[-1]
    return float(np.max(np.abs(total)))


def scale_form(
    form: ParallelForm,
    *,
    input_full_scale: float | None = None,
    output_limit: float | None = None,
    norm: Literal["linf", "l2"] = "linf",
) -> LoopScaling:
    """Order and scale every branch of a loop for a fixed-point word (Jackson 1970).

    Parameters
    ----------
    form : ParallelForm
        The loop: ``feedthrough + Σ_b g_b Π_k H_k`` (sensor to actuator units).
    input_full_scale : float, optional
        Sensor units per full-scale input word (the ADC range of the sensor signal). Default:
        the input that asks the actuator for exactly ``output_limit`` at the frequency of
        largest gain, ``output_limit / max|K|``.
    output_limit : float, optional
        The actuator's limit (actuator units: ``max_force_n``, ``max_stroke_m``); needed when
        ``input_full_scale`` is not given.
    norm : {"linf", "l2"}, optional
        Node norm of the scaling. Default ``"linf"``.

    Returns
    -------
    LoopScaling

    Raises
    ------
    UsageError
        Unknown norm, neither range given, a non-positive range, or a branch with a pole on
        or outside the unit circle (no finite scaling exists: integrators are exported in
        floating point).
    """
    if norm not in NORMS:
        raise UsageError(f"scaling must be one of {', '.join(NORMS)}, got {norm!r}")
    for value, name in ((input_full_scale, "input range"), (output_limit, "output limit")):
        if value is not None and not (math.isfinite(value) and value > 0):
            raise UsageError(f"{name} must be a positive finite number, got {value!r}")
    peak = _loop_peak(form)
    if not math.isfinite(peak):
        raise UsageError(
            "fixed point needs a controller without poles on the unit circle (an integrator "
            "has no finite scaling); export it in floating point (--fixed none)"
        )
    if input_full_scale is None:
        if output_limit is None:
            raise UsageError(
                "fixed point needs the signal range: give --input-range (sensor units at full "
                "scale), or the actuator's max_force_n / max_stroke_m in the plant file"
            )
        input_full_scale = output_limit / peak if peak > 0 else 1.0
    branches, l1_worst = [], 0.0
    for b, branch in enumerate(form.branches):
        sos = order_sections(branch.sos)
        prefix = cascade_norms(sos, norm)
        if not np.all(np.isfinite(prefix)) or np.any(prefix <= 0):
            raise UsageError(
                f"branch {branch.label or b + 1} has a pole on the unit circle or a zero "
                "response: no finite fixed-point scaling; export in floating point"
            )
        factors = prefix / np.concatenate([[1.0], prefix[:-1]])
        scaled = sos.copy()
        scaled[:, :3] /= factors[:, None]
        out_scale = branch.gain * input_full_scale * float(prefix[-1])
        branches.append(
            BranchScaling(
                label=branch.label,
                sos=scaled,
                output_scale=float(out_scale),
                node_norms=cascade_norms(scaled, norm),
                noise_gains=rounding_noise_gains(scaled),
            )
        )
        l1_worst = max(l1_worst, float(np.max(cascade_norms(scaled, "l1"))))
    return LoopScaling(
        norm=norm,
        input_full_scale=float(input_full_scale),
        input_range_any_signal=float(input_full_scale / max(l1_worst, 1.0)),
        output_limit=None if output_limit is None else float(output_limit),
        peak_command=float(input_full_scale * peak),
        branches=tuple(branches),
        feedthrough=float(form.feedthrough),
    )
