"""Stability chart: fits over increasing model order, and the choice of the physical poles.

A rational model of ``n`` pole pairs is fitted (vector fitting, :mod:`dampctl.model.vectorfit`)
for n = 1, 2, ... Every pole in the band is compared with the nearest pole (in frequency) of
the model one order lower: it is *frequency stable*, *damping stable* and *shape stable* when
its natural frequency, its damping ratio and its residues over all channels (MAC, R. J.
Allemang & D. L. Brown, "A correlation coefficient for modal vector analysis", Proc. IMAC I,
1982) agree with that pole's within the tolerances of :class:`StabilityTolerances`. A pole of
the structure turns up at nearly the same place whatever the order; poles that only absorb
noise or the shape of the data between the modes move from one order to the next.

A pole counts as physical when it is stable in all three for ``run`` consecutive orders. The
chart's order is the one that holds the most physical poles (the higher one on a tie); the user
can instead name frequencies, and the stable poles nearest them are kept.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from dampctl.errors import MeasurementError, UsageError
from dampctl.model.vectorfit import start_poles, vector_fit

__all__ = ["ChartOrder", "PoleChoice", "StabilityChart", "StabilityTolerances", "choose_poles",
           "mac", "stability_chart"]

#: iterations and convergence tolerance of each fit of the chart: poles of the structure settle
#: in a few iterations; the noise poles never do, so more iterations only cost time
_CHART_ITERATIONS = 10
_CHART_TOLERANCE = 1e-6
#: how far (fraction of the frequency) a user's --modes-hz may be from the pole it keeps
_NAMED_MODE_REACH = 0.05


@dataclass(frozen=True)
class StabilityTolerances:
    """When a pole counts as stable between two model orders.

    The defaults are the values commonly used in modal testing (common practice; from memory,
    not checked against a copy of a standard): 1 % in frequency, 5 % in damping, MAC ≥ 0.98.

    Parameters
    ----------
    freq : float, optional
        Largest relative change of the natural frequency (fraction), default 0.01.
    damping : float, optional
        Largest relative change of the damping ratio (fraction), default 0.05.
    mac : float, optional
        Smallest MAC between the residue vectors (over all channels), default 0.98.
    run : int, optional
        Consecutive orders over which a pole must stay stable in all three to count as a
        physical pole, default 3.
    """

    freq: float = 0.01
    damping: float = 0.05
    mac: float = 0.98
    run: int = 3

    def __post_init__(self) -> None:
        for name in ("freq", "damping"):
            value = getattr(self, name)
            if not 0.0 < value < 1.0:
                raise UsageError(f"stability tolerance {name}: expected a fraction in (0, 1), "
                                 f"got {value!r}")
        if not 0.0 < self.mac <= 1.0:
            raise UsageError(f"stability tolerance mac: expected a value in (0, 1], "
                             f"got {self.mac!r}")
        if isinstance(self.run, bool) or not isinstance(self.run, int) or self.run < 1:
            raise UsageError(f"stability tolerance run: expected an integer >= 1, "
                             f"got {self.run!r}")


@dataclass(frozen=True)
class ChartOrder:
    """The poles in the band of one model order, compared with the order below.

    Parameters
    ----------
    order : int
        Model order: the number of complex pole pairs the rational model was given.
    poles : ndarray of complex, shape (n,)
        The poles in the band (rad/s; positive imaginary part), sorted by frequency.
    residues : ndarray of complex, shape (n_channels, n)
        Their residues (the fit's units), column per pole.
    freq_stable, damping_stable, shape_stable : ndarray of bool, shape (n,)
        Stability against the nearest pole of the order below (all False for the first).
    run : ndarray of int, shape (n,)
        Consecutive orders, ending at this one, over which the pole was stable in all three.
    converged : bool
        Whether the fit's poles stopped moving within its iteration limit.
    """

    order: int
    poles: np.ndarray
    residues: np.ndarray
    freq_stable: np.ndarray
    damping_stable: np.ndarray
    shape_stable: np.ndarray
    run: np.ndarray
    converged: bool = True

    def __post_init__(self) -> None:
        for name in ("poles", "residues", "freq_stable", "damping_stable", "shape_stable", "run"):
            value = np.array(getattr(self, name), copy=True)
            value.setflags(write=False)
            object.__setattr__(self, name, value)

    @property
    def freq_hz(self) -> np.ndarray:
        """Natural frequencies |λ|/2π (Hz)."""
        return np.abs(self.poles) / (2.0 * np.pi)

    @property
    def damping(self) -> np.ndarray:
        """Damping ratios −Re λ / |λ|."""
        return -self.poles.real / np.abs(self.poles)


@dataclass(frozen=True)
class StabilityChart:
    """Fits over increasing model order and the stability of their poles.

    Parameters
    ----------
    orders : tuple of ChartOrder
        One entry per model order, increasing.
    tolerances : StabilityTolerances
        The stability tolerances used.
    band_hz : tuple of float
        The band (Hz) the poles were kept in.
    """

    orders: tuple[ChartOrder, ...]
    tolerances: StabilityTolerances = field(default_factory=StabilityTolerances)
    band_hz: tuple[float, float] = (0.0, np.inf)

    def physical(self, k: int) -> np.ndarray:
        """Which poles of ``orders[k]`` count as physical (stable over ``run`` orders, damped).

        Parameters
        ----------
        k : int
            Index into :attr:`orders`.

        Returns
        -------
        ndarray of bool
        """
        entry = self.orders[k]
        return (entry.run >= self.tolerances.run) & (entry.damping > 0.0)


@dataclass(frozen=True)
class PoleChoice:
    """The poles taken as the structure's modes.

    Parameters
    ----------
    order : int
        The model order they were read at (for named modes: the highest order read from).
    poles : ndarray of complex
        The chosen poles (rad/s), sorted by frequency.
    named : bool
        True when the user named the modes (``modes_hz``).
    """

    order: int
    poles: np.ndarray
    named: bool = False


def mac(a: np.ndarray, b: np.ndarray) -> float:
    """Modal assurance criterion |aᴴb|² / ((aᴴa)(bᴴb)) of two (complex) vectors.

    Parameters
    ----------
    a, b : array_like
        Vectors of one length.

    Returns
    -------
    float
        In [0, 1]; 1 for vectors that differ only by a (complex) factor (Allemang & Brown
        1982). 0 when either vector is zero.
    """
    a = np.asarray(a, dtype=complex).ravel()
    b = np.asarray(b, dtype=complex).ravel()
    denominator = np.vdot(a, a).real * np.vdot(b, b).real
    if denominator == 0.0:
        return 0.0
    return float(abs(np.vdot(a, b)) ** 2 / denominator)


def stability_chart(
    s: np.ndarray,
    data: np.ndarray,
    weights: np.ndarray,
    *,
    omega_scale: float,
    band_hz: tuple[float, float],
    max_order: int,
    stop_after: int | None = None,
    min_order: int = 1,
    tolerances: StabilityTolerances | None = None,
) -> StabilityChart:
    """Fit models of order 1 to ``max_order`` and compare each one's poles with the order below.

    Parameters
    ----------
    s : ndarray of complex, shape (n_s,)
        jω / ``omega_scale`` at the measured frequencies (scaled so that |s| <= 1).
    data, weights : ndarray, shape (n_channels, n_s)
        Responses and weights as for :func:`~dampctl.model.vectorfit.vector_fit`.
    omega_scale : float
        The scale of ``s`` (rad/s): poles are reported in rad/s.
    band_hz : tuple of float
        Poles outside this band (Hz) are left off the chart.
    max_order : int
        Highest model order (number of complex pole pairs), >= 1.
    stop_after : int, optional
        Stop early, at ``min_order`` or later, once some pole is physical and their number
        has not grown over this many orders; default: run every order.
    min_order : int, optional
        Lowest order at which to stop early (default 1).
    tolerances : StabilityTolerances, optional
        The stability tolerances (default :class:`StabilityTolerances`).

    Returns
    -------
    StabilityChart
    """
    tolerances = tolerances or StabilityTolerances()
    lo, hi = band_hz
    w_lo, w_hi = 2.0 * np.pi * lo / omega_scale, 2.0 * np.pi * hi / omega_scale
    entries: list[ChartOrder] = []
    counts: list[int] = []
    chart = StabilityChart((), tolerances, (float(lo), float(hi)))
    for order in range(1, max_order + 1):
        fit = vector_fit(s, data, weights, start_poles(w_lo, w_hi, order),
                         max_iterations=_CHART_ITERATIONS, tolerance=_CHART_TOLERANCE)
        poles = fit.poles * omega_scale
        freq = np.abs(poles) / (2.0 * np.pi)
        keep = (poles.imag > 0.0) & (freq >= lo) & (freq <= hi)
        keep_idx = np.flatnonzero(keep)[np.argsort(freq[keep])]
        entry = _compare(order, poles[keep_idx], fit.residues[:, keep_idx],
                         entries[-1] if entries else None, tolerances, fit.converged)
        entries.append(entry)
        chart = StabilityChart(tuple(entries), tolerances, (float(lo), float(hi)))
        counts.append(int(np.sum(chart.physical(len(entries) - 1))))
        if stop_after and order >= min_order and len(counts) > stop_after and counts[-1] > 0:
            if max(counts[-stop_after:]) <= counts[-stop_after - 1]:
                break
    return chart


def _compare(order, poles, residues, below: ChartOrder | None, tol, converged) -> ChartOrder:
    n = poles.size
    f_ok = np.zeros(n, dtype=bool)
    d_ok = np.zeros(n, dtype=bool)
    v_ok = np.zeros(n, dtype=bool)
    run = np.zeros(n, dtype=int)
    freq = np.abs(poles)
    damping = -poles.real / np.maximum(freq, 1e-300)
    if below is not None and below.poles.size:
        f_below = np.abs(below.poles)
        d_below = -below.poles.real / f_below
        for i in range(n):
            j = int(np.argmin(np.abs(f_below - freq[i])))
            f_ok[i] = abs(f_below[j] - freq[i]) <= tol.freq * freq[i]
            d_ok[i] = abs(d_below[j] - damping[i]) <= tol.damping * max(damping[i], 1e-300)
            v_ok[i] = mac(residues[:, i], below.residues[:, j]) >= tol.mac
            if f_ok[i] and d_ok[i] and v_ok[i]:
                run[i] = below.run[j] + 1
    return ChartOrder(order, poles, residues, f_ok, d_ok, v_ok, run, converged)


def choose_poles(chart: StabilityChart, modes_hz: Sequence[float] | None = None) -> PoleChoice:
    """The poles taken as modes: automatically, or the stable ones nearest named frequencies.

    Parameters
    ----------
    chart : StabilityChart
        A stability chart.
    modes_hz : sequence of float, optional
        Frequencies (Hz) of the modes to keep. For each, the pole nearest it within 5 % is
        kept: a physical pole if there is one, else one stable in frequency, damping and shape
        against the order below, else one stable in frequency; looked for from the order with
        the most physical poles downwards, then upwards.

    Returns
    -------
    PoleChoice

    Raises
    ------
    MeasurementError
        When no pole is physical (automatic choice).
    UsageError
        When a named frequency has no stable pole near it, or two names take one pole.
    """
    if not chart.orders:
        raise MeasurementError("the stability chart is empty")
    counts = [int(np.sum(chart.physical(k))) for k in range(len(chart.orders))]
    best = max(range(len(counts)), key=lambda k: (counts[k], k))
    if modes_hz is None:
        if counts[best] == 0:
            lo, hi = chart.band_hz
            raise MeasurementError(
                f"no pole is stable over {chart.tolerances.run} orders in {lo:g}-{hi:g} Hz "
                f"(orders 1-{chart.orders[-1].order} tried): raise the order, widen the band "
                "or check the data"
            )
        entry = chart.orders[best]
        return PoleChoice(entry.order, entry.poles[chart.physical(best)], named=False)
    search = [best, *range(best - 1, -1, -1), *range(best + 1, len(chart.orders))]
    chosen: list[complex] = []
    orders: list[int] = []
    levels = (
        lambda k: chart.physical(k),
        lambda k: chart.orders[k].run >= 1,
        lambda k: chart.orders[k].freq_stable,
    )
    for target in modes_hz:
        pole = None
        for level in levels:
            for k in search:
                entry = chart.orders[k]
                stable = np.flatnonzero(level(k))
                if not stable.size:
                    continue
                j = stable[int(np.argmin(np.abs(entry.freq_hz[stable] - target)))]
                if abs(entry.freq_hz[j] - target) <= _NAMED_MODE_REACH * target:
                    pole, order = entry.poles[j], entry.order
                    break
            if pole is not None:
                break
        if pole is None:
            raise UsageError(f"--modes-hz: no stable pole within 5 % of {target:g} Hz")
        for other, value in zip(modes_hz, chosen, strict=False):
            if abs(value - pole) <= 1e-12 * abs(pole):
                raise UsageError(f"--modes-hz: {other:g} and {target:g} Hz name the same pole "
                                 f"({abs(pole) / (2 * np.pi):.4g} Hz)")
        chosen.append(pole)
        orders.append(order)
    poles = np.array(chosen)
    return PoleChoice(max(orders), poles[np.argsort(np.abs(poles))], named=True)
