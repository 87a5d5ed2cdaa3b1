"""Discrete MIMO (LQG) controllers: the state space, and a modal realisation as biquads.

The controller's state matrix is brought to real block-diagonal (modal) form with its
eigenvectors: a complex pair σ ± jω with eigenvector v gives the basis [Re v, Im v] and the
block [[σ, ω], [−ω, σ]]; a real eigenvalue a 1×1 block. Each block is discretized on its own
(Tustin prewarped at the block's |λ| with ``prewarp="auto"``; ZOH is block-wise exact anyway),
so every actuator/sensor path becomes the feedthrough D[a, s] plus one biquad per block, in
parallel. When the eigenvector basis is ill-conditioned (condition number above
:data:`MODAL_COND_LIMIT`, e.g. a defective or nearly repeated eigenvalue) there is no modal
realisation: the whole state space is discretized (plain or fixed-prewarp Tustin, or ZOH) and
each path becomes one cascade over all the controller's poles (poles, transmission zeros,
zpk2sos; not minimal: n_paths × n states); if such a cascade does not reproduce its path to
1e-6, only the state space is exported. A note says which.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from dampctl.design import Design
from dampctl.discrete.sections import (
    Cascade,
    ParallelForm,
    _bilinear,
    _blkdiag,
    _block_diagonal,
    _normalized,
    _ss_response,
    _zoh,
    cascade_from_state_space,
)

__all__ = ["MODAL_COND_LIMIT", "DiscretePath", "paths_matrices"]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]
#: largest eigenvector condition number accepted for a modal realisation of a MIMO controller
MODAL_COND_LIMIT = 1e8
#: sections whose centre frequency is at or above this fraction of f_s are not prewarped
PREWARP_LIMIT = 0.45


@dataclass(frozen=True)
class DiscretePath:
    """One actuator/sensor path of a MIMO controller as parallel biquads (modal realisation).

    Attributes
    ----------
    actuator, sensor : str
        Output and input of the path.
    parallel : ParallelForm
        ``D[a, s] + Σ_blocks biquad``.
    """

    actuator: str
    sensor: str
    parallel: ParallelForm


def paths_matrices(paths, actuators, sensors) -> Matrices:
    """State space of a MIMO controller given as parallel forms per path.

    Parameters
    ----------
    paths : sequence of DiscretePath
        One per (actuator, sensor) path.
    actuators, sensors : sequence of str
        Output and input order.

    Returns
    -------
    tuple of ndarray
        (A, B, C, D), inputs = sensors, outputs = actuators.
    """
    n_out, n_in = len(actuators), len(sensors)
    parts = []
    D = np.zeros((n_out, n_in))
    for path in paths:
        o, j = list(actuators).index(path.actuator), list(sensors).index(path.sensor)
        A, B, C, Dp = path.parallel.matrices()
        Bf = np.zeros((A.shape[0], n_in))
        Bf[:, j] = B[:, 0]
        Cf = np.zeros((n_out, A.shape[0]))
        Cf[o, :] = C[0, :]
        D[o, j] += Dp[0, 0]
        parts.append((A, Bf, Cf))
    A = _blkdiag([p[0] for p in parts])
    B = np.vstack([p[1] for p in parts])
    C = np.hstack([p[2] for p in parts])
    return A, B, C, D


def _biquad_of_block(Ad: np.ndarray, bd: np.ndarray, cd: np.ndarray, label: str) -> Cascade:
    """Biquad of a 1- or 2-state SISO block with no feedthrough (strictly proper)."""
    n = Ad.shape[0]
    if n == 1:
        row = [0.0, cd[0] * bd[0], 0.0, 1.0, -Ad[0, 0], 0.0]
    else:
        a1, a2 = -np.trace(Ad), np.linalg.det(Ad)
        # c (zI − A)⁻¹ b = (c b z + c adj(−A) b)/(z² + a1 z + a2), adj(zI − A) = zI − A + tr(A) I
        b1 = float(cd @ bd)
        b2 = float(cd @ ((np.trace(Ad) * np.eye(2) - Ad) @ bd)) * -1.0
        row = [0.0, b1, b2, 1.0, a1, a2]
    return _normalized(np.array([row]), 1.0, label)


def _modal_blocks(A: np.ndarray):
    """Real block-diagonalizing basis T (A T = T Λ) and the state slices of its blocks."""
    lam, V = np.linalg.eig(A)
    order = np.argsort(np.abs(lam))
    lam, V = lam[order], V[:, order]
    columns, blocks, used = [], [], np.zeros(lam.size, bool)
    scale = max(1.0, float(np.max(np.abs(lam)))) if lam.size else 1.0
    for k in range(lam.size):
        if used[k]:
            continue
        used[k] = True
        start = len(columns)
        if abs(lam[k].imag) <= 1e-12 * scale:
            columns.append(V[:, k].real / np.linalg.norm(V[:, k].real))
            blocks.append(slice(start, start + 1))
            continue
        close = np.abs(lam - lam[k].conj()) < 1e-8 * scale
        partner = next((j for j in range(lam.size) if not used[j] and close[j]), None)
        if partner is None:
            return None
        used[partner] = True
        v = V[:, k] if lam[k].imag > 0 else V[:, partner]
        columns += [v.real, v.imag]
        blocks.append(slice(start, start + 2))
    Tm = np.column_stack(columns) if columns else np.zeros((0, 0))
    if Tm.size and (not np.isfinite(np.linalg.cond(Tm)) or np.linalg.cond(Tm) > MODAL_COND_LIMIT):
        return None
    return Tm, blocks


def _path_cascades(design: Design, ss: Matrices, T: float, notes: list[str]):
    """Fallback without a modal form: one cascade per path from its SISO state space."""
    Ad, Bd, Cd, Dd = ss
    paths = []
    for o, act in enumerate(design.actuators):
        for j, sen in enumerate(design.sensors):
            sub = (Ad, Bd[:, j : j + 1], Cd[o : o + 1, :], Dd[o : o + 1, j : j + 1])
            cascade = cascade_from_state_space(sub, f"{act}<-{sen}")
            freq = np.linspace(0.001, 0.499, 200) / T
            ref = _ss_response(sub, np.exp(2j * np.pi * freq * T))
            err = np.max(
                np.abs(cascade.response(freq, 1.0 / T) - ref)
                / np.maximum(np.abs(ref), 1e-12 * np.max(np.abs(ref)) + 1e-300)
            )
            if not np.isfinite(err) or err > 1e-6:
                notes.append("no modal form and no accurate path cascades: state space only")
                return ()
            paths.append(DiscretePath(act, sen, ParallelForm(0.0, (cascade,))))
    notes.append(
        "no modal realisation: each path is a cascade over all controller poles (not minimal)"
    )
    return tuple(paths)


def _given_discrete(design: Design, T: float, notes: list[str]):
    """A discrete controller used as given: its modal realisation (or path cascades)."""
    Ad, Bd, Cd, Dd = design.discrete_matrices()
    notes.append(
        f"discrete controller used as given at {1.0 / T:.6g} Hz (no discretization, no prewarp)"
    )
    modal = _modal_blocks(Ad) if Ad.shape[0] else (np.zeros((0, 0)), [])
    if modal is None:
        return (Ad, Bd, Cd, Dd), _path_cascades(design, (Ad, Bd, Cd, Dd), T, notes)
    Tm, blocks = modal
    Tinv = np.linalg.inv(Tm) if Tm.size else Tm
    Am, Bm, Cm = Tinv @ Ad @ Tm, Tinv @ Bd, Cd @ Tm
    paths = []
    for o, act in enumerate(design.actuators):
        for j, sen in enumerate(design.sensors):
            terms = [
                _biquad_of_block(Am[sl, sl], Bm[sl, j], Cm[o, sl], f"block {b + 1}")
                for b, sl in enumerate(blocks)
            ]
            paths.append(DiscretePath(act, sen, ParallelForm(float(Dd[o, j]), tuple(terms))))
    return (Ad, Bd, Cd, Dd), tuple(paths)


def _not_prewarped(what: str, w: float, T: float) -> str:
    """Note for a section or block left unwarped: above Nyquist is said as such."""
    f, nyquist = w / (2 * math.pi), 0.5 / T
    if f >= nyquist:
        return (
            f"{what} at {f:.6g} Hz is above the Nyquist frequency ({nyquist:.6g} Hz): "
            "not prewarped (it aliases in discrete time)"
        )
    return f"{what} at {f:.6g} Hz is at or above {PREWARP_LIMIT} f_s (near Nyquist): not prewarped"


def _discrete_mimo(
    design: Design,
    method: str,
    T: float,
    prewarp,
    notes: list[str],
    prewarp_used: list[float | None] | None = None,
):
    A, B, C, D = design.statespace_matrices()
    modal = _modal_blocks(A) if A.shape[0] else (np.zeros((0, 0)), [])
    if modal is None:
        if method == "tustin" and prewarp == "auto":
            notes.append("MIMO controller has no well-conditioned modal form: plain Tustin used")
            prewarp = "none"
        w = None if prewarp in ("auto", "none") else 2.0 * math.pi * float(prewarp)
        ss = _bilinear((A, B, C, D), T, w) if method == "tustin" else _zoh((A, B, C, D), T)
        return ss, _path_cascades(design, ss, T, notes)
    Tm, blocks = modal
    Tinv = np.linalg.inv(Tm) if Tm.size else Tm
    Am, Bm, Cm = Tinv @ A @ Tm, Tinv @ B, C @ Tm
    parts = []
    for sl in blocks:
        sub = (Am[sl, sl], Bm[sl, :], Cm[:, sl], np.zeros(D.shape))
        if method == "zoh":
            parts.append(_zoh(sub, T))
            continue
        w = None
        if prewarp == "auto":
            w = float(np.max(np.abs(np.linalg.eigvals(sub[0])))) or None
        elif prewarp != "none":
            w = 2.0 * math.pi * float(prewarp)
        if w is not None and w * T / (2.0 * math.pi) >= PREWARP_LIMIT:
            notes.append(_not_prewarped("modal block", w, T))
            w = None
        if prewarp_used is not None:
            prewarp_used.append(None if w is None else w / (2.0 * math.pi))
        parts.append(_bilinear(sub, T, w))
    Ad = _block_diagonal([(p[0], p[1], p[2], p[3]) for p in parts])[0]
    Bd = np.vstack([p[1] for p in parts]) if parts else np.zeros((0, D.shape[1]))
    Cd = np.hstack([p[2] for p in parts]) if parts else np.zeros((D.shape[0], 0))
    Dd = D + sum((p[3] for p in parts), np.zeros(D.shape))
    paths = []
    for o, act in enumerate(design.actuators):
        for j, sen in enumerate(design.sensors):
            terms = []
            for b, p in enumerate(parts):
                # strictly proper part of the block; its feedthrough is in Dd
                terms.append(_biquad_of_block(p[0], p[1][:, j], p[2][o, :], f"block {b + 1}"))
            paths.append(DiscretePath(act, sen, ParallelForm(float(Dd[o, j]), tuple(terms))))
    notes.append("MIMO state space is in the controller's modal coordinates (real 2×2 blocks)")
    return (Ad, Bd, Cd, Dd), tuple(paths)
