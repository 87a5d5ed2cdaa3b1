"""Margin constraints of the collocated laws' gain search, read on a frequency grid in batches.

The plant's ``min_gain_margin_db``, ``min_phase_margin_deg`` and ``min_disk_margin_db``
(:class:`dampctl.model.components.Requirements`) bound the gains a tuning may choose. For a
batch of candidate controllers K (sensors → actuators, per frequency) the input return ratio
M(jω) = K(jω) G(jω) is formed on one grid, with the loop delay exact (e^{−jωT}) and the
hardware roll-offs in G, exactly as :func:`dampctl.analysis.margins.input_return_ratio` does
for a finished design; then, for every candidate at once:

* loop k broken at the plant input with the others closed, L_k = 1/[(I + M)^{-1}]_kk − 1;
  its gain crossovers (|L_k| = 1) and phase crossovers (Im L_k = 0, Re L_k < 0) are located
  between grid points by geometric interpolation of L_k (log magnitude and phase linear in
  log frequency); the phase margin is the smallest lag to −180° over gain crossovers and the
  gain margin −20 log10 |L_k| at the phase crossover closest to −1, as in
  :mod:`dampctl.analysis.margins`;
* all loops at once: the symmetric disk margin bound α = 1/max_ω σ̄(S − I/2) (P. Seiler,
  A. Packard, P. Gahinet, "An introduction to disk margins", IEEE Control Systems Magazine
  40(5), 2020), in dB as 20 log10((2 + α)/(2 − α)).

The grid values serve the search; the margins a design reports are computed afterwards by
:mod:`dampctl.analysis.margins` with root finding and off-grid refinement.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from dampctl.analysis.margins import default_grid

__all__ = ["MarginCheck", "MarginLimits", "design_margins", "unit_responses"]


@dataclass(frozen=True)
class MarginCheck:
    """Grid margins of a batch of candidates.

    Attributes
    ----------
    gain_margin_db, phase_margin_deg : ndarray, shape (n_eval, n_loops)
        Loop-at-a-time margins (inf where there is no crossover).
    disk_margin_db : ndarray, shape (n_eval,)
        All-loop symmetric disk margin (dB).
    ok : ndarray of bool, shape (n_eval,)
        Every stated requirement met.
    """

    gain_margin_db: np.ndarray
    phase_margin_deg: np.ndarray
    disk_margin_db: np.ndarray
    ok: np.ndarray

    def violations(self, limits: MarginLimits, row: int, names: Sequence[str]) -> list[str]:
        """The requirements candidate ``row`` breaks, in words (the first is the worst)."""
        out = []
        if limits.min_phase_margin_deg is not None:
            for k, value in enumerate(self.phase_margin_deg[row]):
                if value < limits.min_phase_margin_deg:
                    out.append(
                        f"phase margin of loop {names[k]} "
                        f"({limits.min_phase_margin_deg:.1f}° required)"
                    )
        if limits.min_gain_margin_db is not None:
            for k, value in enumerate(self.gain_margin_db[row]):
                if value < limits.min_gain_margin_db:
                    out.append(
                        f"gain margin of loop {names[k]} "
                        f"({limits.min_gain_margin_db:.1f} dB required)"
                    )
        if limits.min_disk_margin_db is not None:
            if self.disk_margin_db[row] < limits.min_disk_margin_db:
                out.append(f"all-loop disk margin ({limits.min_disk_margin_db:.1f} dB required)")
        return out


@dataclass(frozen=True)
class MarginLimits:
    """The stated margin requirements and the plant side of the loop on a grid.

    Parameters
    ----------
    freq_hz : ndarray, shape (n_freq,)
        Grid (Hz).
    plant_response : ndarray of complex, shape (n_freq, n_sensors, n_actuators)
        G(jω) with the hardware roll-offs and the loop delay e^{−jωT}.
    min_gain_margin_db, min_phase_margin_deg, min_disk_margin_db : float or None
        Requirements (None: not constrained).
    """

    freq_hz: np.ndarray
    plant_response: np.ndarray
    min_gain_margin_db: float | None
    min_phase_margin_deg: float | None
    min_disk_margin_db: float | None

    @classmethod
    def build(cls, plant, pairs, *, delay_s: float) -> MarginLimits:
        """Limits of ``plant`` for loops on ``pairs``; the grid resolves the plant's modes
        (:func:`dampctl.analysis.margins.default_grid`, undamped natural frequencies left out:
        the modal sum is infinite there).
        """
        req = plant.requirements
        base = default_grid(plant, None, points=2000)
        # finer around each mode (±4 ζ in 241 steps): near a lightly damped mode a pair of gain
        # crossovers can lie closer together than the default grid's spacing
        near = [
            f * np.exp(max(z, 1e-4) * np.linspace(-4.0, 4.0, 241))
            for f, z in zip(plant.freqs_hz, plant.dampings, strict=True)
        ]
        freq = _grid(plant, np.unique(np.concatenate([base, *near])))
        actuators = [p.actuator for p in pairs]
        sensors = [p.sensor for p in pairs]
        G = plant.frf(freq, actuators, sensors)  # (n_s, n_a, f)
        s = 2j * np.pi * freq
        for a, name in enumerate(actuators):
            bw = plant.actuator(name).bandwidth_hz
            if bw:
                G[:, a, :] /= 1.0 + s / (2 * np.pi * bw)
        for k, name in enumerate(sensors):
            bw = plant.sensor(name).bandwidth_hz
            if bw:
                G[k, :, :] /= 1.0 + s / (2 * np.pi * bw)
        if delay_s > 0:
            G = G * np.exp(-s * delay_s)[None, None, :]
        return cls(
            freq_hz=freq,
            plant_response=np.moveaxis(G, -1, 0),
            min_gain_margin_db=req.min_gain_margin_db,
            min_phase_margin_deg=req.min_phase_margin_deg,
            min_disk_margin_db=getattr(req, "min_disk_margin_db", None),
        )

    @property
    def stated(self) -> bool:
        """Whether any margin is required."""
        return any(
            v is not None
            for v in (self.min_gain_margin_db, self.min_phase_margin_deg, self.min_disk_margin_db)
        )

    def check_diagonal(self, unit: np.ndarray, gains: np.ndarray) -> MarginCheck:
        """Margins of decentralized loops K = diag(g_k k_k(jω)).

        Parameters
        ----------
        unit : ndarray of complex, shape (n_freq, n_loops)
            Each loop's unit-gain controller response k_k(jω).
        gains : ndarray, shape (n_eval, n_loops)
        """
        gains = np.atleast_2d(np.asarray(gains, dtype=float))
        k = gains[:, None, :] * unit[None, :, :]  # (e, f, n)
        M = k[:, :, :, None] * self.plant_response[None, :, :, :]  # (e, f, n_a, n_a)
        return self._check(M)

    def check_controllers(self, responses: np.ndarray) -> MarginCheck:
        """Margins of full controllers K(jω), shape (n_eval, n_freq, n_actuators, n_sensors)."""
        return self._check(np.einsum("efas,fsb->efab", responses, self.plant_response))

    def _check(self, M: np.ndarray) -> MarginCheck:
        """Only the stated margins are computed; the others read +inf."""
        n_eval, _, n, _ = M.shape
        eye = np.eye(n)
        gm = np.full((n_eval, n), np.inf)
        pm = np.full((n_eval, n), np.inf)
        disk = np.full(n_eval, np.inf)
        ok = np.ones(n_eval, dtype=bool)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            S = _inverse(eye[None, None] + M)
            if self.min_gain_margin_db is not None or self.min_phase_margin_deg is not None:
                L = 1.0 / np.einsum("efkk->ekf", S) - 1.0  # (e, n, f)
                gm, pm = _grid_margins(
                    L,
                    self.min_gain_margin_db is not None,
                    self.min_phase_margin_deg is not None,
                )
            if self.min_disk_margin_db is not None:
                peak = np.max(_largest_singular_value(S - 0.5 * eye), axis=1)
                alpha = np.where(peak > 0, 1.0 / peak, np.inf)
                disk = np.where(alpha >= 2.0, np.inf, 20 * np.log10((2 + alpha) / (2 - alpha)))
        if self.min_gain_margin_db is not None:
            ok &= np.all(gm >= self.min_gain_margin_db, axis=1)
        if self.min_phase_margin_deg is not None:
            ok &= np.all(pm >= self.min_phase_margin_deg, axis=1)
        if self.min_disk_margin_db is not None:
            ok &= disk >= self.min_disk_margin_db
        return MarginCheck(gain_margin_db=gm, phase_margin_deg=pm, disk_margin_db=disk, ok=ok)


def _inverse(X: np.ndarray) -> np.ndarray:
    """Inverse of each square matrix in X (..., n, n); closed form for n ≤ 2."""
    n = X.shape[-1]
    if n == 1:
        return 1.0 / X
    if n == 2:
        a, b, c, d = X[..., 0, 0], X[..., 0, 1], X[..., 1, 0], X[..., 1, 1]
        det = a * d - b * c
        out = np.empty_like(X)
        out[..., 0, 0], out[..., 0, 1] = d / det, -b / det
        out[..., 1, 0], out[..., 1, 1] = -c / det, a / det
        return out
    return np.linalg.inv(X)


def _largest_singular_value(X: np.ndarray) -> np.ndarray:
    """σ̄ of each square matrix in X (..., n, n); closed form for n ≤ 2, else SVD."""
    n = X.shape[-1]
    if n == 1:
        return np.abs(X[..., 0, 0])
    if n == 2:
        # σ̄² = (‖X‖_F² + sqrt(‖X‖_F⁴ − 4|det X|²)) / 2
        fro = np.sum(np.abs(X) ** 2, axis=(-2, -1))
        det = X[..., 0, 0] * X[..., 1, 1] - X[..., 0, 1] * X[..., 1, 0]
        return np.sqrt(0.5 * (fro + np.sqrt(np.maximum(fro**2 - 4 * np.abs(det) ** 2, 0.0))))
    return np.linalg.svd(X, compute_uv=False)[..., 0]


def unit_responses(loops, freq_hz: np.ndarray) -> np.ndarray:
    """Each unit-gain loop's controller response, shape (n_freq, n_loops)."""
    return np.stack([lp.response(freq_hz) for lp in loops], axis=-1)


def _grid_margins(L: np.ndarray, want_gm: bool, want_pm: bool) -> tuple[np.ndarray, np.ndarray]:
    """Gain (dB) and phase (deg) margins of loops L (n_eval, n_loops, n_freq) on a grid."""
    ratio = L[..., 1:] / L[..., :-1]
    log_ratio = np.log(np.abs(ratio)) + 1j * np.angle(ratio)
    gm = np.full(L.shape[:2], np.inf)
    pm = np.full(L.shape[:2], np.inf)
    if want_pm:
        # gain crossovers: log|L| changes sign; log|L| and the phase linear between points
        mag = np.log(np.abs(L))
        a, b = mag[..., :-1], mag[..., 1:]
        cross = (np.sign(a) * np.sign(b) < 0) & np.isfinite(a) & np.isfinite(b)
        t = np.where(cross, a / np.where(cross, a - b, 1.0), 0.0)
        phase = np.angle(L[..., :-1]) + t * log_ratio.imag
        lag = np.degrees(np.mod(phase + np.pi, 2 * np.pi))
        pm = np.min(np.where(cross, lag, np.inf), axis=-1)
    if want_gm:
        # phase crossovers on the negative real axis: Im L changes sign with Re L < 0
        im_a, im_b = L[..., :-1].imag, L[..., 1:].imag
        pc = np.sign(im_a) * np.sign(im_b) < 0
        u = np.where(pc, im_a / np.where(pc, im_a - im_b, 1.0), 0.0)
        at = L[..., :-1] * np.exp(u * log_ratio)
        pc &= at.real < 0
        db = -20.0 * np.log10(np.abs(at))
        pick = np.argmin(np.where(pc, np.abs(db), np.inf), axis=-1)
        gm = np.take_along_axis(np.where(pc, db, np.inf), pick[..., None], axis=-1)[..., 0]
    return gm, pm


def design_margins(plant, design, *, delay_s: float) -> dict:
    """The margins a tuned loop design reports (exact delay, refined off the grid).

    Returns
    -------
    dict
        ``margins``: per loop ``pair``, ``actuator``, ``gain_margin_db``,
        ``gain_reduction_margin_db``, ``phase_margin_deg``, ``delay_margin_s``,
        ``crossover_hz`` (None where there is no crossover); ``disk_margin``: the all-loop
        symmetric disk margin (``alpha``, ``gain_margin_db``, ``phase_margin_deg``,
        ``frequency_hz``); ``margin_requirements``: the plant's stated minima.
    """
    from dampctl.analysis.margins import disk_margins, loop_margins

    grid = _grid(plant, default_grid(plant, design))
    loops = []
    for lp, m in zip(
        design.loops, loop_margins(plant, design, delay_s=delay_s, freq_hz=grid), strict=True
    ):
        loops.append(
            {
                "pair": lp.pair,
                "actuator": m.loop,
                "gain_margin_db": _finite(m.gain_margin_db),
                "gain_reduction_margin_db": _finite(m.gain_reduction_margin_db),
                "phase_margin_deg": _finite(m.phase_margin_deg),
                "delay_margin_s": _finite(m.delay_margin_s),
                "crossover_hz": _finite(m.crossover_hz),
            }
        )
    disk = disk_margins(plant, design, delay_s=delay_s, freq_hz=grid)
    req = plant.requirements
    return {
        "margins": loops,
        "disk_margin": {
            "alpha": _finite(disk.alpha),
            "gain_margin_db": _finite(disk.gain_margin_db),
            "phase_margin_deg": _finite(disk.phase_margin_deg),
            "frequency_hz": _finite(disk.frequency_hz),
        },
        "margin_requirements": {
            "min_gain_margin_db": req.min_gain_margin_db,
            "min_phase_margin_deg": req.min_phase_margin_deg,
            "min_disk_margin_db": getattr(req, "min_disk_margin_db", None),
        },
    }


def _finite(value):
    return None if value is None or not np.isfinite(value) else float(value)


def _grid(plant, grid: np.ndarray) -> np.ndarray:
    """The grid without the natural frequencies of (nearly) undamped modes, where the modal
    sum is infinite or not a number."""
    return grid[~np.isin(grid, plant.freqs_hz[plant.dampings < 1e-12])]
