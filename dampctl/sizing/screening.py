"""Batched evaluation of candidate sets of decentralized loops, for sizing searches.

A sizing search asks, for many sets of candidate pairs, how much damping the set can give the
target modes with its gains tuned. Done one model at a time this is thousands of
model-building and eigenvalue calls; here it is a few batched ``numpy.linalg.eigvals`` calls
on closed-loop matrices assembled directly from the modal form.

**Loop templates.** Each candidate pair p carries a unit-gain SISO controller K_p(s) — the
law's own filter with the plant's loop delay (Padé) and hardware roll-offs folded in exactly as
:func:`dampctl.analysis.closedloop.closed_loop_modes` does — and a scale κ_p. A set S is run with
the common normalized gain γ: loop p applies ``u_p = −γ κ_p K_p(s) y_p``. κ_p is chosen so that at
γ = 1 the loop alone would add a damping ratio of 1 to its most affected target mode by the
low-gain estimate below, which makes γ comparable across pairs of different kinds.

**Structure used.** When no loop has an algebraic path (``diag(D_c) D = 0``, true for ideal
velocity feedback, IFF and PPF), the closed-loop matrix over ``[x, x_c]`` is affine in γ:

    A_cl(γ) = A_0 − γ U V,   U = [B_S; B_c D_SS],   V = [K_d C_S, K_c],

with A_0 = [[A, 0], [B_c C_S, A_c]], so a batch of (set, γ) candidates costs one outer product
per set and one stacked eigenvalue call. Otherwise each matrix is built with
:func:`dampctl.analysis.closedloop.closed_loop_matrix`.

**Low-gain estimate.** To first order in γ the pole of mode i moves by
dλ_i = −γ Σ_p κ_p K_p(λ_i) R_ip, with R_ip the residue of the pair's transfer function at the
open-loop pole λ_i (Preumont, *Vibration Control of Active Structures*, collocated control;
for ideal velocity feedback this is ζ_i ≈ ζ_i0 + g φ_i(a)²/(2ω_i); Balas 1979). The damping
slopes are additive over loops, so every set is ranked by them at no eigenvalue cost.

**Mode identity.** Closed-loop poles are matched to the plant's modes by minimum total
|ln(p_cl/p_ol)| as in :func:`dampctl.analysis.closedloop.match_modes`; when every mode's nearest
pole is distinct that choice *is* the optimal assignment (each row at its minimum), so the
assignment solver runs only for the candidates where two modes claim the same pole.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.optimize import linear_sum_assignment

from dampctl.analysis.closedloop import (
    closed_loop_matrix,
    effective_controller,
    open_loop_poles,
)
from dampctl.errors import UsageError

__all__ = ["LoopTemplate", "SetEvaluator", "TunedSets", "loop_template"]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]

#: normalized-gain search range (γ), see the module docstring
GAIN_RANGE = (1e-3, 10.0)


@dataclass(frozen=True)
class LoopTemplate:
    """Unit-gain effective controller of one candidate pair.

    Attributes
    ----------
    pair, actuator, sensor : str
        The candidate pair and its hardware.
    matrices : tuple of ndarray
        SISO (A_c, B_c, C_c, D_c) with ``u = −(C_c x_c + D_c y)``, including delay and
        roll-offs, for a law gain of ``unit_gain``.
    unit_gain : float
        The law gain (law units) the matrices correspond to; K is linear in it.
    """

    pair: str
    actuator: str
    sensor: str
    matrices: Matrices
    unit_gain: float = 1.0

    def __post_init__(self) -> None:
        Ac, Bc, Cc, Dc = (np.array(m, dtype=float) for m in self.matrices)
        m = Ac.shape[0]
        if Ac.shape != (m, m) or Bc.shape != (m, 1) or Cc.shape != (1, m) or Dc.shape != (1, 1):
            raise UsageError(f"loop template for {self.pair!r} must be a SISO state space")
        object.__setattr__(self, "matrices", (Ac, Bc, Cc, Dc))
        if not np.isfinite(self.unit_gain) or self.unit_gain == 0:
            raise UsageError(f"loop template for {self.pair!r} needs a finite non-zero gain")

    @property
    def n_states(self) -> int:
        """Number of controller states (filter, delay and roll-off)."""
        return self.matrices[0].shape[0]

    def response(self, s: np.ndarray) -> np.ndarray:
        """K(s) at complex frequencies.

        Parameters
        ----------
        s : array_like of complex
            Complex frequencies (rad/s).

        Returns
        -------
        ndarray of complex
            K(s), same length as ``s``.
        """
        Ac, Bc, Cc, Dc = self.matrices
        s = np.atleast_1d(np.asarray(s, dtype=complex))
        if Ac.shape[0] == 0:
            return np.full(s.shape, Dc[0, 0], dtype=complex)
        eye = np.eye(Ac.shape[0])
        x = np.linalg.solve(s[:, None, None] * eye - Ac, np.broadcast_to(Bc, (s.size, *Bc.shape)))
        return (Cc @ x)[:, 0, 0] + Dc[0, 0]


def loop_template(plant, design, *, unit_gain: float = 1.0) -> LoopTemplate:
    """Template of a single-loop design, with the plant's delay and roll-offs folded in.

    Parameters
    ----------
    plant : ModalPlant
        The plant (supplies delay and hardware bandwidths).
    design : Design
        A design with exactly one loop, made with law gain ``unit_gain``.
    unit_gain : float, optional
        The law gain the design was made with.

    Returns
    -------
    LoopTemplate
    """
    if not design.decentralized or len(design.loops) != 1:
        raise UsageError("a loop template needs a design with exactly one loop")
    loop = design.loops[0]
    return LoopTemplate(
        pair=loop.pair,
        actuator=loop.actuator,
        sensor=loop.sensor,
        matrices=effective_controller(plant, design),
        unit_gain=unit_gain,
    )


@dataclass(frozen=True)
class TunedSets:
    """Result of :meth:`SetEvaluator.tune`.

    Attributes
    ----------
    sets : ndarray of int, shape (n_sets, k)
        Candidate indices of each set.
    gamma : ndarray, shape (n_sets,)
        Normalized gain γ giving the best score.
    score : ndarray, shape (n_sets,)
        Smallest closed-loop damping ratio over the target modes at ``gamma`` (negative when
        the loop is unstable).
    """

    sets: np.ndarray
    gamma: np.ndarray
    score: np.ndarray


class SetEvaluator:
    """Closed-loop damping of sets of candidate loops, evaluated in batches.

    Parameters
    ----------
    plant : ModalPlant
        The plant (every mode is in the loop).
    templates : sequence of LoopTemplate
        One per candidate pair; their index is the candidate number used in sets.
    modes : sequence of int
        Target modes (1-based).

    Notes
    -----
    ``evaluations`` counts the closed-loop matrices whose eigenvalues were computed, and
    ``eig_seconds``/``seconds`` the time spent in ``eigvals`` and in :meth:`score` overall, so
    a benchmark can report the cost per evaluation.
    """

    def __init__(self, plant, templates: Sequence[LoopTemplate], modes: Sequence[int]):
        self.plant = plant
        self.templates = tuple(templates)
        if not self.templates:
            raise UsageError("no candidate loops to evaluate")
        self.targets = np.array(sorted({int(m) - 1 for m in modes}), dtype=int)
        if self.targets.size == 0 or self.targets.min() < 0 or self.targets.max() >= plant.n_modes:
            raise UsageError(f"target modes must lie in 1..{plant.n_modes}")
        acts = [t.actuator for t in self.templates]
        sens = [t.sensor for t in self.templates]
        self.A, self.B, self.C, self.D = plant.statespace_matrices(acts, sens)
        self.open_poles = open_loop_poles(plant.omegas, plant.dampings)
        self._open_log_mag = np.log(np.abs(self.open_poles))
        self._open_angle = np.angle(self.open_poles)
        self.log: list | None = None
        self.n_ctrl = np.array([t.n_states for t in self.templates])
        self.slopes_unit = self._slopes()
        best = self.slopes_unit[:, self.targets].max(axis=1)
        self.usable = best > 0
        self.kappa = np.where(self.usable, 1.0 / np.where(best > 0, best, 1.0), 0.0)
        self.slopes = self.slopes_unit * self.kappa[:, None]
        self.evaluations = 0
        self.eig_seconds = 0.0
        self.seconds = 0.0

    # ------------------------------------------------------------------ low-gain estimate
    def _slopes(self) -> np.ndarray:
        """dζ_i/dg per unit template gain, per candidate (rows) and mode (columns)."""
        lam = self.open_poles
        w = self.plant.omegas
        out = np.zeros((len(self.templates), self.plant.n_modes))
        for p, template in enumerate(self.templates):
            b = self.plant.input_row(template.actuator)
            row, order = self.plant.output_row(template.sensor)
            residue = row * b * lam**order / np.where(lam.imag > 0, lam - lam.conj(), 1.0)
            dlam = -template.response(lam) * residue
            dlam = np.where(lam.imag > 0, dlam, 0.0)
            mag = np.abs(lam)
            out[p] = -dlam.real / mag + lam.real * (lam.conj() * dlam).real / mag**3
            out[p] = np.where(np.abs(row * b) > 0, out[p], 0.0) * (w > 0)
        return out

    def low_gain_damping(self, sets: np.ndarray, gamma: float | np.ndarray) -> np.ndarray:
        """Low-gain estimate ζ_i0 + γ Σ_p slope_ip of every mode, per set.

        Parameters
        ----------
        sets : ndarray of int, shape (n_sets, k)
            Candidate indices.
        gamma : float or ndarray, shape (n_sets,)
            Normalized gain.

        Returns
        -------
        ndarray, shape (n_sets, n_modes)
        """
        sets = np.atleast_2d(np.asarray(sets, dtype=int))
        gamma = np.broadcast_to(np.asarray(gamma, dtype=float), (sets.shape[0],))
        return self.plant.dampings[None, :] + gamma[:, None] * self.slopes[sets].sum(axis=1)

    # ------------------------------------------------------------------ exact evaluation
    def _assemble(self, sets: np.ndarray):
        """A_0 and W = U V of each set (affine case), or None when some loop is not affine."""
        n_sets, k = sets.shape
        m = self.n_ctrl[sets]
        if np.any(m != m[:1, :]):
            return None
        sizes = [int(x) for x in m[0]] if m.size else []
        offsets = np.concatenate([[0], np.cumsum(sizes)]).astype(int)
        n = self.A.shape[0]
        tot = n + int(offsets[-1])
        temps = [t.matrices for t in self.templates]
        dc = np.array([t[3][0, 0] for t in temps])[sets]  # (n_sets, k)
        units = np.array([t.unit_gain for t in self.templates])
        kap = self.kappa[sets] / units[sets]
        D_ss = self.D[sets[:, :, None], sets[:, None, :]]  # (n_sets, k, k): sensor row, act col
        if np.any(np.abs(dc[:, :, None] * D_ss) > 0):
            return None
        B_s = np.transpose(self.B[:, sets], (1, 0, 2))  # (n_sets, n, k)
        C_s = self.C[sets]  # (n_sets, k, n)
        if tot == n:  # no controller states: A_0 is the plant's A for every set (broadcast)
            A0 = self.A[None]
        else:
            A0 = np.zeros((n_sets, tot, tot))
            A0[:, :n, :n] = self.A
        U = np.zeros((n_sets, tot, k))
        V = np.zeros((n_sets, k, tot))
        U[:, :n, :] = B_s
        V[:, :, :n] = (kap * dc)[:, :, None] * C_s
        for j in range(k):
            if not sizes[j]:
                continue
            sl = slice(n + offsets[j], n + offsets[j + 1])
            Ac = np.array([temps[p][0] for p in sets[:, j]])  # (n_sets, m, m)
            Bc = np.array([temps[p][1][:, 0] for p in sets[:, j]])  # (n_sets, m)
            Cc = np.array([temps[p][2][0, :] for p in sets[:, j]])  # (n_sets, m)
            A0[:, sl, sl] = Ac
            A0[:, sl, :n] = Bc[:, :, None] * C_s[:, j, None, :]
            U[:, sl, :] = Bc[:, :, None] * D_ss[:, j, None, :]
            V[:, j, sl] = kap[:, j, None] * Cc
        return A0, U @ V

    def _matrices_generic(self, sets: np.ndarray, gammas: np.ndarray) -> list[np.ndarray]:
        out = []
        for s, row in zip(sets, gammas, strict=True):
            mats = (self.A, self.B[:, s], self.C[s], self.D[np.ix_(s, s)])
            for g in row:
                ctrl = self._set_controller(s, g)
                out.append(closed_loop_matrix(mats, ctrl))
        return out

    def _set_controller(self, s: np.ndarray, gamma: float) -> Matrices:
        from dampctl.analysis.closedloop import block_diagonal

        blocks = []
        for p in s:
            Ac, Bc, Cc, Dc = self.templates[p].matrices
            scale = gamma * self.kappa[p] / self.templates[p].unit_gain
            blocks.append((Ac, Bc, Cc * scale, Dc * scale))
        return block_diagonal(blocks)

    def score(self, sets: np.ndarray, gammas: np.ndarray) -> np.ndarray:
        """Smallest closed-loop damping over the target modes, per (set, γ).

        Parameters
        ----------
        sets : ndarray of int, shape (n_sets, k)
            Candidate indices of each set (one set size per call).
        gammas : ndarray, shape (n_sets, n_gains)
            Normalized gains to evaluate for each set.

        Returns
        -------
        ndarray, shape (n_sets, n_gains)
            Damping ratio; when the loop is unstable, the most negative damping of any pole.
        """
        sets = np.atleast_2d(np.asarray(sets, dtype=int))
        gammas = np.asarray(gammas, dtype=float).reshape(sets.shape[0], -1)
        out = np.empty(gammas.shape)
        for rows in self._groups(sets):
            out[rows] = self._score(sets[rows], gammas[rows], self._assemble(sets[rows]))
        return out

    def _groups(self, sets: np.ndarray) -> list[np.ndarray]:
        """Row indices of sets whose loops have the same controller sizes, position by position."""
        keys = self.n_ctrl[sets]
        if sets.shape[0] == 0 or np.all(keys == keys[:1]):
            return [np.arange(sets.shape[0])]
        _, inverse = np.unique(keys, axis=0, return_inverse=True)
        return [np.flatnonzero(inverse.ravel() == g) for g in range(inverse.max() + 1)]

    def _score(self, sets: np.ndarray, gammas: np.ndarray, assembled) -> np.ndarray:
        import time

        start = time.perf_counter()
        gammas = np.asarray(gammas, dtype=float).reshape(sets.shape[0], -1)
        if assembled is not None:
            A0, W = assembled
            mats = A0[:, None] - gammas[:, :, None, None] * W[:, None]
            mats = mats.reshape(-1, *A0.shape[1:])
            if self.log is not None:
                self.log.append(mats)
            tick = time.perf_counter()
            poles = np.linalg.eigvals(mats)
            self.eig_seconds += time.perf_counter() - tick
        else:
            mats = self._matrices_generic(sets, gammas)
            tick = time.perf_counter()
            poles = np.array([np.linalg.eigvals(a) for a in mats])
            self.eig_seconds += time.perf_counter() - tick
        self.evaluations += poles.shape[0]
        damping = self.matched_damping(poles)
        result = damping[:, self.targets].min(axis=1)
        unstable = poles.real.max(axis=1) >= 0.0
        if np.any(unstable):
            mag = np.abs(poles[unstable])
            worst = np.min(-poles[unstable].real / np.where(mag > 0, mag, 1.0), axis=1)
            result[unstable] = np.minimum(result[unstable], np.minimum(worst, 0.0))
        self.seconds += time.perf_counter() - start
        return result.reshape(gammas.shape)

    def matched_damping(self, poles: np.ndarray) -> np.ndarray:
        """Damping ratio of the pole matched to each plant mode, per row of ``poles``.

        Parameters
        ----------
        poles : ndarray of complex, shape (n_cand, n_poles)
            Closed-loop poles of each candidate.

        Returns
        -------
        ndarray, shape (n_cand, n_modes)
        """
        poles = np.asarray(poles, dtype=complex)
        scale = np.maximum(np.abs(poles).max(axis=1, keepdims=True), 1.0)
        # keep the upper half plane (and the real axis) only, packed to the left
        keep = poles.imag >= -1e-9 * scale
        width = int(keep.sum(axis=1).max())
        order = np.argsort(~keep, axis=1, kind="stable")[:, :width]
        packed = np.take_along_axis(poles, order, axis=1)
        valid = np.take_along_axis(keep, order, axis=1)
        # |ln(p/p_ol)|² in real arithmetic: ln|p| − ln|p_ol| and the angle difference (a
        # real pole counts at angle 0 or π)
        log_mag = np.log(np.maximum(np.abs(packed), 1e-300))
        angle = np.abs(np.angle(packed))
        d_mag = log_mag[:, None, :] - self._open_log_mag[None, :, None]
        d_ang = angle[:, None, :] - self._open_angle[None, :, None]
        cost = d_mag * d_mag + d_ang * d_ang
        if not valid.all():
            cost[np.broadcast_to(~valid[:, None, :], cost.shape)] = np.inf
        choice = np.argmin(cost, axis=2)  # (n_cand, n_modes)
        ordered = np.sort(choice, axis=1)
        clash = np.flatnonzero(np.any(ordered[:, 1:] == ordered[:, :-1], axis=1))
        for row in clash:
            r, c = linear_sum_assignment(np.sqrt(cost[row]))
            choice[row, r] = c
        chosen = np.take_along_axis(packed, choice, axis=1)
        mag = np.abs(chosen)
        return np.where(mag > 0, -chosen.real / np.where(mag > 0, mag, 1.0), 1.0)

    def tune(
        self,
        sets: np.ndarray,
        *,
        center: float | None = None,
        span_decades: float | None = None,
        points: int = 9,
        rounds: int = 6,
    ) -> TunedSets:
        """Normalized gain γ maximizing the smallest target damping, for every set at once.

        A log-spaced grid of ``points`` gains, then ``rounds`` of zooming: each round
        evaluates the two points halfway (in log γ) between the best gain and its neighbours,
        halving the spacing. Every round is one batched eigenvalue call for all sets.

        Parameters
        ----------
        sets : ndarray of int, shape (n_sets, k)
            Candidate indices.
        center : float, optional
            Centre (γ) of the initial grid; default the geometric centre of the full range.
        span_decades : float, optional
            Width of the initial grid in decades; default the full range (1e-3 to 10).
        points, rounds : int, optional
            Grid size and number of zoom rounds.

        Returns
        -------
        TunedSets
        """
        sets = np.atleast_2d(np.asarray(sets, dtype=int))
        groups = self._groups(sets)
        if len(groups) > 1:
            gamma, score = np.empty(sets.shape[0]), np.empty(sets.shape[0])
            for rows in groups:
                part = self.tune(
                    sets[rows], center=center, span_decades=span_decades, points=points,
                    rounds=rounds,
                )  # fmt: skip
                gamma[rows], score[rows] = part.gamma, part.score
            return TunedSets(sets=sets, gamma=gamma, score=score)
        lo, hi = np.log10(GAIN_RANGE[0]), np.log10(GAIN_RANGE[1])
        if center is None:
            grid = np.linspace(lo, hi, points)
        else:
            half = 0.5 * (span_decades if span_decades is not None else hi - lo)
            c = np.clip(np.log10(center), lo + half, hi - half) if 2 * half < hi - lo else None
            if c is None:
                grid = np.linspace(lo, hi, points)
            else:
                grid = np.linspace(c - half, c + half, points)
        logs = np.broadcast_to(grid, (sets.shape[0], grid.size))
        assembled = self._assemble(sets)
        values = self._score(sets, 10.0**logs, assembled)
        k = np.argmax(values, axis=1)
        best_log = logs[np.arange(len(k)), k]
        best = values[np.arange(len(k)), k]
        step = grid[1] - grid[0] if grid.size > 1 else 0.5
        for _ in range(rounds):
            step = step / 2.0
            trial = np.clip(best_log[:, None] + np.array([-step, step])[None, :], lo, hi)
            trial_values = self._score(sets, 10.0**trial, assembled)
            j = np.argmax(trial_values, axis=1)
            better = trial_values[np.arange(len(j)), j] > best
            best_log = np.where(better, trial[np.arange(len(j)), j], best_log)
            best = np.where(better, trial_values[np.arange(len(j)), j], best)
        return TunedSets(sets=sets, gamma=10.0**best_log, score=best)

    def closed_loop(self, members: Sequence[int], gamma: float) -> np.ndarray:
        """Closed-loop damping of every plant mode for one set at γ (matched by assignment).

        Parameters
        ----------
        members : sequence of int
            Candidate indices of the set.
        gamma : float
            Normalized gain γ.

        Returns
        -------
        ndarray, shape (n_modes,)
            Damping ratio of the pole matched to each mode.
        """
        sets = np.asarray([list(members)], dtype=int)
        assembled = self._assemble(sets)
        if assembled is not None:
            A0, W = assembled
            mat = A0[0] - gamma * W[0]
        else:
            mat = self._matrices_generic(sets, np.array([[gamma]]))[0]
        return self.matched_damping(np.linalg.eigvals(mat)[None, :])[0]
