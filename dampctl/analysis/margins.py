"""Loop-at-a-time stability margins at the plant input, from exact frequency responses.

Each loop k is broken at the plant input with every other loop closed. With the input return
ratio M(jω) = K(jω) G(jω) (actuators × actuators), the loop seen at input k is

    L_k = 1 / [(I + M)^{-1}]_kk − 1,

which reduces to L = K G for a single loop. Delays enter exactly as e^{−jωT} and the
first-order hardware roll-offs as their frequency responses; no Padé approximant is used here.

Definitions (negative feedback, instability where L = −1):

* **gain margin** (dB): 20 log10(1/|L|) at the phase crossover (L real and negative) closest to
  −1 from inside the unit circle — the gain increase that destabilizes; +inf when there is no
  such crossover. A crossover outside the unit circle gives the *gain reduction margin*
  (negative dB).
* **phase margin** (deg): at each gain crossover (|L| = 1) the phase *lag* that brings L to
  −180°, (arg L + 180°) mod 360°, minimized over crossovers. For velocity feedback the phase
  at crossover can be positive (e.g. +88°), where python-control's ``stability_margins``
  reports the wrapped value (−92°); the lag to −180° (here 268°) is what a delay must supply,
  so it is what we report.
* **delay margin** (s): min over gain crossovers of lag_k / ω_k (Åström & Murray, *Feedback
  Systems*, 2008, frequency-domain robustness; a single-crossover loop gives PM/ω_c).

Disk margins (symmetric, skew 0; P. Seiler, A. Packard, P. Gahinet, "An introduction to disk
margins", IEEE Control Systems Magazine 40(5), 2020): a loop tolerates every simultaneous gain
and phase change f = (1 + δ/2)/(1 − δ/2), |δ| < α, with α = 1/max_ω |(S − T)/2|, i.e.
α = min_ω 2|1 + L|/|1 − L| for a SISO loop; α gives the gain range
[(2 − α)/(2 + α), (2 + α)/(2 − α)] and a phase range ±2 atan(α/2). For several loops changing
at once we report the bound α ≥ 1/max_ω σ̄(S − I/2) at the plant input (σ̄ ≥ μ, so this is a
conservative lower bound of the true multi-loop disk margin). Neither checks closed-loop
stability: a disk margin means something only for a stable nominal loop, which the caller
must check on the poles.

Crossovers are bracketed on a dense grid that contains every natural frequency and then
refined by root finding on the exact response, so the reported delay margin puts the loop at
−180° to root-finder precision. The disk margins' peaks (max of |1 − L|/(2|1 + L|) and of
σ̄(S − I/2)) are likewise refined off the grid: the largest few local maxima on the grid by a
bounded Brent search between their neighbours (a grid alone reads the margin optimistic).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq, minimize_scalar

from dampctl.analysis.closedloop import plant_loop_delay_s

__all__ = [
    "CommonDelayMargin",
    "DiskMargins",
    "LoopMargins",
    "common_delay_margin",
    "default_grid",
    "disk_margin_from_alpha",
    "disk_margins",
    "input_loops",
    "input_return_ratio",
    "loop_margins",
    "siso_margins",
]


@dataclass(frozen=True)
class LoopMargins:
    """Margins of one loop broken at the plant input.

    Attributes
    ----------
    loop : str
        Actuator name of the broken loop.
    gain_margin_db : float
        Gain increase (dB) to instability; inf when none.
    gain_reduction_margin_db : float or None
        Gain decrease (dB, negative) to instability, when a phase crossover lies outside the
        unit circle; None otherwise.
    phase_margin_deg : float
        Smallest phase lag (deg) that brings L to −180° at a gain crossover; inf when |L| never
        reaches 1.
    delay_margin_s : float
        Smallest extra delay (s) that destabilizes; inf when |L| never reaches 1.
    crossover_hz : float or None
        Gain crossover (Hz) that sets the phase margin.
    crossovers_hz : tuple of float
        Every gain crossover found (Hz).
    phase_crossovers_hz : tuple of float
        Every phase crossover (L real negative) found (Hz).
    """

    loop: str
    gain_margin_db: float
    gain_reduction_margin_db: float | None
    phase_margin_deg: float
    delay_margin_s: float
    crossover_hz: float | None
    crossovers_hz: tuple[float, ...]
    phase_crossovers_hz: tuple[float, ...]


def default_grid(plant, design=None, *, points: int = 4000) -> np.ndarray:
    """Frequency grid (Hz) that resolves every mode and the controller's poles.

    Parameters
    ----------
    plant : ModalPlant
        Supplies the natural frequencies and damping ratios.
    design : Design, optional
        Its controller poles are resolved too.
    points : int, optional
        Number of log-spaced points over the whole band.

    Returns
    -------
    ndarray
        Sorted, unique frequencies (Hz), > 0. Around an undamped pole (ζ = 0) the grid leaves
        out the pole's own frequency, where the response is infinite.
    """
    freqs = list(plant.freqs_hz)
    undamped = list(plant.dampings == 0.0)
    zetas = list(np.maximum(plant.dampings, 1e-4))
    if design is not None:
        A = design.statespace_matrices()[0]
        if A.size:
            poles = np.linalg.eigvals(A)
            for p in poles:
                if abs(p) > 0:
                    freqs.append(abs(p) / (2 * np.pi))
                    zetas.append(max(min(-p.real / abs(p), 1.0), 1e-4))
                    undamped.append(abs(p.real) <= 1e-12 * abs(p))
    f_lo, f_hi = min(freqs) / 100.0, max(freqs) * 100.0
    parts = [np.geomspace(f_lo, f_hi, points)]
    offsets = np.linspace(-8.0, 8.0, 81)
    for f, z, bare in zip(freqs, zetas, undamped, strict=True):
        parts.append(f * np.exp(z * (offsets[offsets != 0.0] if bare else offsets)))
    grid = np.unique(np.concatenate(parts))
    grid = grid[grid > 0]
    for f, bare in zip(freqs, undamped, strict=True):
        if bare:
            grid = grid[np.abs(grid / f - 1.0) > 1e-9]
    return grid


def input_return_ratio(
    plant, design, freq_hz: np.ndarray, *, delay_s: float | None = None, roll_off: bool = True
) -> np.ndarray:
    """Input return ratio M(jω) = e^{−jωT} K(jω) R G(jω) (actuators × actuators).

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design
        The controller (u = −K y).
    freq_hz : array_like
        Frequencies (Hz).
    delay_s : float, optional
        Loop delay (s), exact; default the plant's stated delay.
    roll_off : bool, optional
        Include the actuator and sensor roll-offs stated in the plant file.

    Returns
    -------
    ndarray of complex, shape (n_freq, n_act, n_act)
    """
    freq = np.asarray(freq_hz, dtype=float).ravel()
    delay = plant_loop_delay_s(plant) if delay_s is None else float(delay_s)
    G = plant.frf(freq, design.actuators, design.sensors)  # (n_s, n_a, f)
    K = design.response(freq)  # (n_a, n_s, f)
    s = 2j * np.pi * freq
    if roll_off:
        for a, name in enumerate(design.actuators):
            bw = plant.actuator(name).bandwidth_hz
            if bw:
                G[:, a, :] /= 1.0 + s / (2 * np.pi * bw)
        for k, name in enumerate(design.sensors):
            sensor = next((x for x in plant.sensors if x.name == name), None)
            if sensor is not None and sensor.bandwidth_hz:
                G[k, :, :] /= 1.0 + s / (2 * np.pi * sensor.bandwidth_hz)
    if delay > 0:
        K = K * np.exp(-s * delay)[None, None, :]
    return np.einsum("asf,sbf->fab", K, G)


def input_loops(
    plant, design, freq_hz: np.ndarray, *, delay_s: float | None = None, roll_off: bool = True
) -> np.ndarray:
    """Loop-at-a-time return ratios L_k(jω) at the plant input.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design
        The controller (u = −K y).
    freq_hz : array_like
        Frequencies (Hz).
    delay_s : float, optional
        Loop delay (s), exact; default the plant's stated delay (loop_delay_s plus ZOH and one
        sample at the stated sample rate).
    roll_off : bool, optional
        Include the actuator and sensor roll-offs stated in the plant file.

    Returns
    -------
    ndarray of complex, shape (n_loops, n_freq)
        L_k for each actuator of the design.
    """
    M = input_return_ratio(plant, design, freq_hz, delay_s=delay_s, roll_off=roll_off)
    n = M.shape[1]
    if n == 1:
        return M[:, 0, 0][None, :]
    inv = np.linalg.inv(np.eye(n)[None] + M)
    diag = np.einsum("fkk->kf", inv)
    return 1.0 / diag - 1.0


def siso_margins(
    loop: Callable[[np.ndarray], np.ndarray], grid_hz: np.ndarray, *, name: str = ""
) -> LoopMargins:
    """Margins of a SISO return ratio given as a function of frequency.

    Parameters
    ----------
    loop : callable
        ``loop(freq_hz) -> L`` (complex array of the same shape), evaluated exactly.
    grid_hz : array_like
        Grid (Hz) used to bracket crossovers; it must resolve the response's resonances.
    name : str, optional
        Loop name for the result.

    Returns
    -------
    LoopMargins
    """
    grid = np.asarray(grid_hz, dtype=float)
    values = loop(grid)
    with np.errstate(divide="ignore"):  # |L| = 0 (a loop at zero gain, a zero on the grid)
        log_mag = np.log(np.abs(values))
    gain_x = [
        _refine(lambda f: np.log(np.abs(loop(np.array([f]))[0])), grid, log_mag, k)
        for k in np.flatnonzero(np.sign(log_mag[:-1]) * np.sign(log_mag[1:]) < 0)
    ]
    imag = values.imag
    phase_x = []
    for k in np.flatnonzero(np.sign(imag[:-1]) * np.sign(imag[1:]) < 0):
        if values.real[k] < 0 or values.real[k + 1] < 0:
            # Im L also changes sign through infinity across an undamped pole: the search then
            # closes in on the pole itself, where L is not finite, and finds no crossover
            with np.errstate(divide="ignore", invalid="ignore"):
                f = _refine(lambda f: loop(np.array([f]))[0].imag, grid, imag, k)
                at = loop(np.array([f]))[0]
            if np.isfinite(at) and at.real < 0:
                phase_x.append(f)
    lags, delays = [], []
    for f in gain_x:
        lag = np.mod(np.angle(loop(np.array([f]))[0]) + np.pi, 2 * np.pi)
        lags.append(lag)
        delays.append(lag / (2 * np.pi * f))
    ups, downs = [], []
    for f in phase_x:
        factor = 1.0 / abs(loop(np.array([f]))[0])
        (ups if factor > 1 else downs).append(factor)
    if lags:
        best = int(np.argmin(lags))
        pm, crossover = float(np.degrees(lags[best])), float(gain_x[best])
        dm = float(min(delays))
    else:
        pm, crossover, dm = np.inf, None, np.inf
    return LoopMargins(
        loop=name,
        gain_margin_db=float(20 * np.log10(min(ups))) if ups else np.inf,
        gain_reduction_margin_db=float(20 * np.log10(max(downs))) if downs else None,
        phase_margin_deg=pm,
        delay_margin_s=dm,
        crossover_hz=crossover,
        crossovers_hz=tuple(float(f) for f in gain_x),
        phase_crossovers_hz=tuple(float(f) for f in phase_x),
    )


def loop_margins(
    plant,
    design,
    *,
    delay_s: float | None = None,
    roll_off: bool = True,
    freq_hz: np.ndarray | None = None,
) -> tuple[LoopMargins, ...]:
    """Loop-at-a-time margins of every loop of a design, broken at the plant input.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design
        The design.
    delay_s : float, optional
        Loop delay (s), exact e^{−jωT}; default the plant's stated delay (loop_delay_s plus a
        ZOH and one sample at the stated sample rate).
    roll_off : bool, optional
        Include the actuator and sensor roll-offs stated in the plant file.
    freq_hz : array_like, optional
        Bracketing grid (Hz); default :func:`default_grid`.

    Returns
    -------
    tuple of LoopMargins
        One per actuator of the design, in order.
    """
    grid = default_grid(plant, design) if freq_hz is None else np.asarray(freq_hz, float)
    out = []
    for k, name in enumerate(design.actuators):

        def loop(f, k=k):
            return input_loops(plant, design, f, delay_s=delay_s, roll_off=roll_off)[k]

        out.append(siso_margins(loop, grid, name=name))
    return tuple(out)


@dataclass(frozen=True)
class DiskMargins:
    """Symmetric (skew 0) disk margins, from exact frequency responses.

    Attributes
    ----------
    loop_alpha : tuple of float
        Disk margin α of each loop broken at the plant input with the others closed.
    loop_gain_margin_db, loop_phase_margin_deg : tuple of float
        The gain (dB, upper end of the symmetric range) and phase (deg) ranges each α gives.
    alpha : float
        Lower bound of the multi-loop disk margin, 1/max σ̄(S − I/2) (all loops at once).
    gain_margin_db, phase_margin_deg : float
        Gain (dB) and phase (deg) ranges of that bound.
    frequency_hz : float
        Where the bound is set (Hz).
    bound : str
        Which bound was used (text for reports).
    """

    loop_alpha: tuple[float, ...]
    loop_gain_margin_db: tuple[float, ...]
    loop_phase_margin_deg: tuple[float, ...]
    alpha: float
    gain_margin_db: float
    phase_margin_deg: float
    frequency_hz: float
    bound: str = "sigma_max(S - I/2) at the plant input (lower bound of the mu-based margin)"


def disk_margin_from_alpha(alpha: float) -> tuple[float, float]:
    """Gain (dB) and phase (deg) margins of a symmetric disk margin α.

    Parameters
    ----------
    alpha : float
        Disk size (≥ 0).

    Returns
    -------
    tuple of float
        (gain margin dB = 20 log10((2 + α)/(2 − α)), inf for α ≥ 2; phase margin deg =
        2 atan(α/2)).
    """
    gm = np.inf if alpha >= 2 else 20 * np.log10((2 + alpha) / (2 - alpha))
    return float(gm), float(np.degrees(2 * np.arctan(alpha / 2)))


def disk_margins(
    plant,
    design,
    *,
    delay_s: float | None = None,
    roll_off: bool = True,
    freq_hz: np.ndarray | None = None,
) -> DiskMargins:
    """Loop-at-a-time and simultaneous symmetric disk margins at the plant input.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design
        The design.
    delay_s : float, optional
        Loop delay (s), exact; default the plant's stated delay.
    roll_off : bool, optional
        Include the stated roll-offs.
    freq_hz : array_like, optional
        Grid (Hz); default :func:`default_grid`.

    Returns
    -------
    DiskMargins
        Stability of the nominal loop is *not* checked here.
    """
    grid = default_grid(plant, design) if freq_hz is None else np.asarray(freq_hz, float)
    M = input_return_ratio(plant, design, grid, delay_s=delay_s, roll_off=roll_off)
    n = M.shape[1]
    S = np.linalg.inv(np.eye(n)[None] + M)
    L = input_loops(plant, design, grid, delay_s=delay_s, roll_off=roll_off)

    def loop_peak(f: float, k: int) -> float:  # 1/α of loop k: |1 − L|/(2|1 + L|)
        x = input_loops(plant, design, np.array([f]), delay_s=delay_s, roll_off=roll_off)[k, 0]
        return float(abs(1 - x) / (2 * abs(1 + x)))

    def all_peak(f: float) -> float:  # 1/α of all loops at once: σ̄(S − I/2)
        m = input_return_ratio(plant, design, np.array([f]), delay_s=delay_s, roll_off=roll_off)
        s_f = np.linalg.inv(np.eye(n) + m[0])
        return float(np.linalg.svd(s_f - 0.5 * np.eye(n), compute_uv=False)[0])

    loop_alpha = tuple(
        1.0 / _peak(lambda f, k=k: loop_peak(f, k), grid, np.abs(1 - x) / (2 * np.abs(1 + x)))[1]
        for k, x in enumerate(L)
    )
    sig = np.linalg.svd(S - 0.5 * np.eye(n)[None], compute_uv=False)[:, 0]
    where, top = _peak(all_peak, grid, sig)
    alpha = float(1.0 / top)
    loop_pairs = [disk_margin_from_alpha(a) for a in loop_alpha]
    gm, pm = disk_margin_from_alpha(alpha)
    return DiskMargins(
        loop_alpha=loop_alpha,
        loop_gain_margin_db=tuple(p[0] for p in loop_pairs),
        loop_phase_margin_deg=tuple(p[1] for p in loop_pairs),
        alpha=alpha,
        gain_margin_db=gm,
        phase_margin_deg=pm,
        frequency_hz=where,
    )


@dataclass(frozen=True)
class CommonDelayMargin:
    """Extra delay, the same on every channel, that destabilizes the loop.

    Attributes
    ----------
    delay_s : float
        The smallest such delay (s); inf when no eigenvalue of M reaches unit magnitude.
    freq_hz : float or None
        Frequency (Hz) where the loop then goes unstable.
    crossovers_hz : tuple of float
        Every frequency (Hz) where an eigenvalue of M(jω) has unit magnitude.
    """

    delay_s: float
    freq_hz: float | None
    crossovers_hz: tuple[float, ...]


def common_delay_margin(
    plant,
    design,
    *,
    delay_s: float | None = None,
    roll_off: bool = True,
    freq_hz: np.ndarray | None = None,
) -> float:
    """Smallest extra delay (s), the same on every channel, that destabilizes the loop.

    With the input return ratio M(jω), an extra common delay τ puts a closed-loop pole at jω
    when det(I + e^{−jωτ} M(jω)) = 0, i.e. when an eigenvalue λ of M has |λ| = 1 and
    τ = ((arg λ + π) mod 2π)/ω (characteristic loci). The crossings of |λ| = 1 are bracketed on
    the grid with the magnitudes sorted (continuous even where eigenvalues cross) and refined by
    root finding. For one loop this is the delay margin of :func:`siso_margins`. The nominal
    loop is assumed stable (check it on the poles).

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    design : Design
        The design.
    delay_s : float, optional
        Nominal loop delay (s), exact; default the plant's stated delay.
    roll_off : bool, optional
        Include the stated roll-offs.
    freq_hz : array_like, optional
        Grid (Hz); default :func:`default_grid`.

    Returns
    -------
    CommonDelayMargin
    """
    grid = default_grid(plant, design) if freq_hz is None else np.asarray(freq_hz, float)

    def eigs(f):
        M = input_return_ratio(plant, design, np.atleast_1d(f), delay_s=delay_s, roll_off=roll_off)
        return np.linalg.eigvals(M)

    def log_abs(values):
        with np.errstate(divide="ignore"):  # a loop at zero gain: an eigenvalue exactly 0
            return np.log(np.abs(values))

    lam = eigs(grid)
    mags = log_abs(np.sort(np.abs(lam), axis=1))
    best, where, found = np.inf, None, []
    for k in range(mags.shape[1]):
        values = mags[:, k]
        for j in np.flatnonzero(np.sign(values[:-1]) * np.sign(values[1:]) < 0):
            f = _refine(
                lambda x, k=k: float(log_abs(np.sort(np.abs(eigs(x)[0]))[k])), grid, values, j
            )
            at = eigs(f)[0]
            pick = at[np.argmin(np.abs(log_abs(at)))]
            lag = np.mod(np.angle(pick) + np.pi, 2 * np.pi)
            found.append(float(f))
            if lag / (2 * np.pi * f) < best:
                best, where = float(lag / (2 * np.pi * f)), float(f)
    return CommonDelayMargin(delay_s=best, freq_hz=where, crossovers_hz=tuple(sorted(found)))


#: local maxima of a grid's peak function refined off the grid by a bounded Brent search
_PEAKS_REFINED = 3


def _peak(
    fn: Callable[[float], float], grid: np.ndarray, values: np.ndarray
) -> tuple[float, float]:
    """Largest value of fn, refined off the grid: (frequency Hz, value).

    The few largest local maxima of ``values`` on the grid are each refined by a bounded
    Brent search (scipy ``minimize_scalar``, method ``bounded``) on log frequency between the
    neighbouring grid points; the grid value stands where the refinement finds nothing larger.
    """
    values = np.asarray(values, dtype=float)
    k_best = int(np.argmax(values))
    best_f, best = float(grid[k_best]), float(values[k_best])
    if grid.size < 3 or not np.isfinite(best):
        return best_f, best
    inner = (values[1:-1] >= values[:-2]) & (values[1:-1] >= values[2:])
    candidates = np.flatnonzero(inner) + 1
    candidates = candidates[np.argsort(values[candidates])[::-1][:_PEAKS_REFINED]]
    for k in candidates:
        lo, hi = np.log(grid[k - 1]), np.log(grid[k + 1])
        found = minimize_scalar(
            lambda t: -fn(float(np.exp(t))),
            bounds=(lo, hi),
            method="bounded",
            options={"xatol": 1e-12 * max(1.0, abs(hi)), "maxiter": 200},
        )
        if np.isfinite(found.fun) and -found.fun > best:
            best_f, best = float(np.exp(found.x)), float(-found.fun)
    return best_f, best


def _refine(fn: Callable[[float], float], grid: np.ndarray, values: np.ndarray, k: int) -> float:
    """Root of fn between grid[k] and grid[k+1] (brentq on log frequency)."""
    lo, hi = np.log(grid[k]), np.log(grid[k + 1])
    try:
        x = brentq(lambda t: fn(np.exp(t)), lo, hi, xtol=1e-14, rtol=1e-14, maxiter=200)
    except ValueError:
        x = lo - values[k] * (hi - lo) / (values[k + 1] - values[k])
    return float(np.exp(x))
