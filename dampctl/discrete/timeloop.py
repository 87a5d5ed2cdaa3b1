"""The time loop: a sampled modal structure, optionally closed by a discrete controller.

One step at t_k = kT does what the real-time target does:

1. the actuator inputs on each piece of the interval are the planned command (moves, shaped
   copies, disturbances) plus the feedback commands computed earlier — one sample of
   computation delay and the loop delay m T + τ (a command computed at step j acts from
   (j + 1 + m) T + τ) — clipped at the actuator limits (the time clipped is counted);
2. every output is sampled (:class:`~dampctl.discrete.modalzoh.SampledModes`);
3. the controller reads its sensors (plus sampled sensor noise) and computes its next command,
   ``v[k] = −(C_c x_c + D_c y[k])``, ``x_c ← A_c x_c + B_c y[k]``;
4. the structure moves on to t_{k+1}.

Work and memory are linear in the number of modes and in the number of steps; the records kept
are the sampled outputs and the actuator forces. Three engines compute the same numbers:

* ``"compiled"``: step by step, as one loop compiled by numba (the optional ``fast`` extra);
  ``"auto"`` takes it when numba is installed;
* ``"numpy"``, closed loop: step by step, two matrix–vector products and a few element-wise
  operations on the modal states per step;
* ``"numpy"``, open loop (no controller): the inputs are known in advance, so each mode's
  2×2 recursion runs over the whole record at once, in the eigenvector basis of its
  transition matrix as one complex first-order filter (:func:`scipy.signal.lfilter`, blocks
  of modes; a mode whose transition has real eigenvalues, such as a rigid-body mode, as two
  real second-order filters).

An unstable loop is stopped (checked every 32 steps) before its states overflow.
"""

from __future__ import annotations

import functools
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from dampctl.discrete.modalzoh import SampledModes
from dampctl.errors import MissingFeatureError, UsageError

__all__ = ["ENGINES", "LoopRecord", "run_loop"]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]
ENGINES: tuple[str, ...] = ("auto", "numpy", "compiled")
#: modal states beyond this magnitude mean the loop is unstable: the run stops
_DIVERGED = 1e100
_CHECK_EVERY = 32
#: samples × modes per block of the open-loop filter (bounds its scratch memory, ~16 MB/array)
_BLOCK_VALUES = 2_000_000


@dataclass(frozen=True)
class LoopRecord:
    """What a run of the loop recorded.

    Attributes
    ----------
    outputs : ndarray, shape (n_steps, n_outputs)
        Every output of the sampled structure at t_k.
    forces : ndarray, shape (n_steps, n_inputs)
        Input forces at t_k (after the lags, after clipping).
    saturated_s : ndarray, shape (n_inputs,)
        Time (s) each input spent clipped at its limit.
    diverged_at : int or None
        Step at which the states passed 1e100 (an unstable loop): the run stopped there and
        the records hold NaN from that step on. None when it ran to the end.
    """

    outputs: np.ndarray
    forces: np.ndarray
    saturated_s: np.ndarray
    diverged_at: int | None = None


def _widths(model: SampledModes) -> np.ndarray:
    return np.diff(np.append(model.breakpoints_s, model.sample_time_s))


def _clipped(planned: np.ndarray, limits, widths):
    """Planned inputs clipped at the limits, and the time each input spent clipped."""
    saturated = np.zeros(planned.shape[2])
    if limits is None or not np.any(np.isfinite(limits)):
        return planned, saturated
    over = np.abs(planned) > limits
    saturated = np.einsum("krj,r->j", over, widths)
    return np.clip(planned, -limits, limits), saturated


def _real_mode(d0, d1, p11, p12, p21, p22):
    """x[k+1] = Φ x[k] + d[k] for one mode as two second-order filters: x = (zI − Φ)⁻¹ d, the
    adjugate's numerators over det(zI − Φ)."""
    import scipy.signal

    s0 = np.zeros_like(d0)
    s1 = np.zeros_like(d1)
    s0[1:] = d0[:-1]
    s1[1:] = d1[:-1]
    s0[2:] += p12 * d1[:-2] - p22 * d0[:-2]
    s1[2:] += p21 * d0[:-2] - p11 * d1[:-2]
    a = [1.0, -(p11 + p22), p11 * p22 - p12 * p21]
    return scipy.signal.lfilter([1.0], a, s0), scipy.signal.lfilter([1.0], a, s1)


def _open_run(model: SampledModes, planned: np.ndarray, limits) -> LoopRecord:
    """Open loop over the whole record at once: each mode's recursion as a filter."""
    import scipy.signal  # here, not at import: it costs 0.3 s to load

    steps, R, n_in = planned.shape
    pieces, saturated = _clipped(planned, limits, _widths(model))
    ne, ns, n = len(model.lagged_inputs), len(model.lagged_outputs), model.n_modes
    # rows are signals, columns are steps (contiguous rows for the filters)
    W = np.empty((ne + R * n_in, steps))
    W[ne:] = pieces.reshape(steps, R * n_in).T
    for m in range(ne):  # e_m[k+1] = φ e_m[k] + Γ_m · pieces[k]
        drive = model.Ge[m, ne:] @ W[ne:]
        W[m] = scipy.signal.lfilter([0.0, 1.0], [1.0, -model.Ge[m, m]], drive)
    outputs = model.Dy @ W
    s_drive = model.Gs @ W if ns else None
    block = max(1, min(n, _BLOCK_VALUES // max(steps, 1)))
    for lo in range(0, n, block):
        idx = np.arange(lo, min(lo + block, n))
        d0 = model.Gx[idx] @ W
        d1 = model.Gx[n + idx] @ W
        p11, p22 = model.Pa[0, idx], model.Pa[1, idx]
        p12, p21 = model.Pb[0, idx], model.Pb[1, idx]
        # each mode's 2×2 transition Φ has eigenvalues μ, μ̄ with eigenvectors v = [a, b] =
        # [Φ12, μ − Φ11] and conjugate: x = 2 Re(v z), z[k+1] = μ z[k] + u·d[k] with u the first
        # row of [v, v̄]⁻¹ — one complex first-order filter per mode
        tr, det = p11 + p22, p11 * p22 - p12 * p21
        root = np.sqrt((tr * tr - 4.0 * det).astype(complex))
        mu = (tr + root) / 2.0
        a, b = p12.astype(complex), mu - p11
        gap = a * b.conj() - a.conj() * b  # det [v, v̄] = 2j Im(a b̄)
        scale = np.abs(a) * np.abs(b)
        complex_ok = (np.abs(mu.imag) > 1e-6 * np.abs(mu)) & (np.abs(gap) > 1e-6 * scale)
        if np.any(complex_ok):
            k_ok = np.flatnonzero(complex_ok)
            ua = (b.conj()[k_ok] / gap[k_ok])[:, None]
            ub = (-a.conj()[k_ok] / gap[k_ok])[:, None]
            g = ua * d0[k_ok] + ub * d1[k_ok]
            z = np.empty_like(g)
            for k in range(k_ok.size):
                z[k] = scipy.signal.lfilter([0.0, 1.0], [1.0, -mu[k_ok[k]]], g[k])
            rows = idx[k_ok]
            out0 = model.Cy[:, rows] * (2.0 * a[k_ok]) + model.Cy[:, n + rows] * (2.0 * b[k_ok])
            outputs += (out0 @ z).real
            if ns:
                h = model.Hs[:, rows] * (2.0 * a[k_ok]) + model.Hs[:, n + rows] * (2.0 * b[k_ok])
                s_drive += (h @ z).real
        for k in np.flatnonzero(~complex_ok):  # real or repeated eigenvalues (a rigid mode)
            x0, x1 = _real_mode(d0[k], d1[k], p11[k], p12[k], p21[k], p22[k])
            i = idx[k]
            outputs += np.outer(model.Cy[:, i], x0) + np.outer(model.Cy[:, n + i], x1)
            if ns:
                s_drive += np.outer(model.Hs[:, i], x0) + np.outer(model.Hs[:, n + i], x1)
    if ns:
        S = np.empty((ns, steps))
        for m in range(ns):
            S[m] = scipy.signal.lfilter([0.0, 1.0], [1.0, -model.Fs[m]], s_drive[m])
        outputs += model.Sy @ S
    forces = np.array(pieces[:, 0, :])
    if ne:
        forces[:, list(model.lagged_inputs)] = W[:ne].T
    return LoopRecord(outputs=outputs.T.copy(), forces=forces, saturated_s=saturated)


def _steps_numpy(model, planned, limits, ctrl, sensors, actuators, lag, delay_piece, noise):
    """Closed loop, step by step in numpy."""
    steps, R, n_in = planned.shape
    n = model.n_modes
    ne, ns = len(model.lagged_inputs), len(model.lagged_outputs)
    n_out = model.Cy.shape[0]
    Mw = np.vstack([model.Dy, model.Ge, model.Gs, model.Gx])
    Mx = np.vstack([model.Cy, model.Hs])
    Sy, Fs = model.Sy, model.Fs
    Pa, Pb = model.Pa.ravel(), model.Pb.ravel()
    o_e, o_s = n_out, n_out + ne
    o_x = o_s + ns
    lag_in = np.array(model.lagged_inputs, dtype=int)
    widths = _widths(model)
    outputs = np.empty((steps, n_out))
    forces = np.empty((steps, n_in))
    saturated = np.zeros(n_in)
    x = np.zeros(2 * n)
    swap = np.concatenate([np.arange(n, 2 * n), np.arange(n)])
    e, s = np.zeros(ne), np.zeros(ns)
    w = np.zeros(ne + R * n_in)
    clip = limits is not None and bool(np.any(np.isfinite(limits)))
    Ac, Bc, Cc, Dc = ctrl
    xc = np.zeros(Ac.shape[0])
    history = np.zeros((steps + lag, Cc.shape[0]))  # history[j + lag] = v[j]
    diverged = None
    for k in range(steps):
        if k % _CHECK_EVERY == 0 and not np.max(np.abs(x), initial=0.0) < _DIVERGED:
            diverged = k
            outputs[k:] = np.nan
            forces[k:] = np.nan
            break
        pieces = planned[k].copy()
        pieces[:delay_piece, actuators] += history[k - 1] if k >= 1 else history[0]
        pieces[delay_piece:, actuators] += history[k]
        if clip:
            over = np.abs(pieces) > limits
            if over.any():
                saturated += widths @ over
                pieces = np.clip(pieces, -limits, limits)
        w[:ne] = e
        w[ne:] = pieces.ravel()
        driven = Mw @ w
        read = Mx @ x
        y = driven[:n_out] + read[:n_out]
        if ns:
            y += Sy @ s
        outputs[k] = y
        forces[k] = pieces[0]
        if ne:
            forces[k, lag_in] = e
        ys = y[sensors] if noise is None else y[sensors] + noise[k]
        history[k + lag] = -(Cc @ xc + Dc @ ys)
        xc = Ac @ xc + Bc @ ys
        e = driven[o_e:o_s]
        if ns:
            s = Fs * s + read[n_out:] + driven[o_s:o_x]
        x = Pa * x + Pb * x[swap] + driven[o_x:]
    return LoopRecord(outputs, forces, saturated, diverged)


def _steps_kernel(Mw, Mx, Sy, Fs, Pa, Pb, lag_in, widths, planned, limits, clip, Ac, Bc, Cc,
                  Dc, sensors, actuators, lag, delay_piece, noise, outputs, forces, saturated):
    """The closed loop as plain loops (compiled by numba); returns the step it diverged at,
    or −1. Same arithmetic as :func:`_steps_numpy`."""
    steps, R, n_in = planned.shape
    n2 = Pa.shape[0]
    n = n2 // 2
    ne, ns = lag_in.shape[0], Fs.shape[0]
    n_out = outputs.shape[1]
    nw = ne + R * n_in
    nc, na, nsens = Ac.shape[0], Cc.shape[0], Dc.shape[1]
    rows_w, rows_x = Mw.shape[0], Mx.shape[0]
    x = np.zeros(n2)
    x_new = np.zeros(n2)
    e = np.zeros(ne)
    s = np.zeros(ns)
    w = np.zeros(nw)
    xc = np.zeros(nc)
    xc_new = np.zeros(nc)
    ys = np.zeros(nsens)
    y = np.zeros(n_out)
    driven = np.zeros(rows_w)
    read = np.zeros(rows_x)
    pieces = np.zeros((R, n_in))
    history = np.zeros((steps + lag, na))
    for k in range(steps):
        if k % 32 == 0:
            top = 0.0
            for i in range(n2):
                if not abs(x[i]) <= top:  # also catches NaN
                    top = abs(x[i])
            if not top < 1e100:
                for kk in range(k, steps):
                    outputs[kk, :] = np.nan
                    forces[kk, :] = np.nan
                return k
        for r in range(R):
            for j in range(n_in):
                pieces[r, j] = planned[k, r, j]
        for a in range(na):
            j = actuators[a]
            early = history[k - 1, a] if k >= 1 else history[0, a]
            for r in range(R):
                pieces[r, j] += early if r < delay_piece else history[k, a]
        if clip:
            for r in range(R):
                for j in range(n_in):
                    if abs(pieces[r, j]) > limits[j]:
                        saturated[j] += widths[r]
                        pieces[r, j] = limits[j] if pieces[r, j] > 0 else -limits[j]
        for i in range(ne):
            w[i] = e[i]
        for r in range(R):
            for j in range(n_in):
                w[ne + r * n_in + j] = pieces[r, j]
        for i in range(rows_w):
            acc = 0.0
            for j in range(nw):
                acc += Mw[i, j] * w[j]
            driven[i] = acc
        for i in range(rows_x):
            acc = 0.0
            for j in range(n2):
                acc += Mx[i, j] * x[j]
            read[i] = acc
        for o in range(n_out):
            acc = driven[o] + read[o]
            for m in range(ns):
                acc += Sy[o, m] * s[m]
            y[o] = acc
            outputs[k, o] = acc
        for j in range(n_in):
            forces[k, j] = pieces[0, j]
        for i in range(ne):
            forces[k, lag_in[i]] = e[i]
        for i in range(nsens):
            ys[i] = y[sensors[i]] + noise[k, i]
        for a in range(na):
            acc = 0.0
            for i in range(nc):
                acc += Cc[a, i] * xc[i]
            for i in range(nsens):
                acc += Dc[a, i] * ys[i]
            history[k + lag, a] = -acc
        for i in range(nc):
            acc = 0.0
            for j in range(nc):
                acc += Ac[i, j] * xc[j]
            for j in range(nsens):
                acc += Bc[i, j] * ys[j]
            xc_new[i] = acc
        for i in range(nc):
            xc[i] = xc_new[i]
        for i in range(ne):
            e[i] = driven[n_out + i]
        for m in range(ns):
            s[m] = Fs[m] * s[m] + read[n_out + m] + driven[n_out + ne + m]
        o_x = n_out + ne + ns
        for i in range(n):
            x_new[i] = Pa[i] * x[i] + Pb[i] * x[n + i] + driven[o_x + i]
            x_new[n + i] = Pa[n + i] * x[n + i] + Pb[n + i] * x[i] + driven[o_x + n + i]
        for i in range(n2):
            x[i] = x_new[i]
    return -1


@functools.cache
def _compiled_kernel() -> Callable | None:
    """The closed-loop kernel compiled by numba (cached on disk), or None without numba."""
    try:
        import numba
    except ImportError:
        return None
    return numba.njit(cache=True, nogil=True)(_steps_kernel)


def _steps_compiled(model, planned, limits, ctrl, sensors, actuators, lag, delay_piece, noise):
    kernel = _compiled_kernel()
    steps, _R, n_in = planned.shape
    n_out = model.Cy.shape[0]
    Ac, Bc, Cc, Dc = (np.ascontiguousarray(m, dtype=float) for m in ctrl)
    outputs = np.empty((steps, n_out))
    forces = np.empty((steps, n_in))
    saturated = np.zeros(n_in)
    clip = limits is not None and bool(np.any(np.isfinite(limits)))
    lims = np.full(n_in, np.inf) if limits is None else np.asarray(limits, dtype=float)
    noise = np.zeros((steps, Dc.shape[1])) if noise is None else np.asarray(noise, float)
    stopped = kernel(
        np.ascontiguousarray(np.vstack([model.Dy, model.Ge, model.Gs, model.Gx])),
        np.ascontiguousarray(np.vstack([model.Cy, model.Hs])),
        np.ascontiguousarray(model.Sy), np.ascontiguousarray(model.Fs),
        np.ascontiguousarray(model.Pa.ravel()), np.ascontiguousarray(model.Pb.ravel()),
        np.array(model.lagged_inputs, dtype=np.int64), _widths(model),
        np.ascontiguousarray(planned, dtype=float), lims, clip, Ac, Bc, Cc, Dc,
        np.asarray(sensors, dtype=np.int64), np.asarray(actuators, dtype=np.int64), int(lag),
        int(delay_piece), np.ascontiguousarray(noise), outputs, forces, saturated,
    )
    return LoopRecord(outputs, forces, saturated, None if stopped < 0 else int(stopped))


def run_loop(
    model: SampledModes,
    planned: np.ndarray,
    *,
    limits: np.ndarray | None = None,
    controller: Matrices | None = None,
    sensors: np.ndarray | None = None,
    actuators: np.ndarray | None = None,
    delay_samples: int = 0,
    delay_piece: int = 0,
    noise: np.ndarray | None = None,
    engine: str = "auto",
) -> LoopRecord:
    """Step the sampled structure through ``planned`` inputs, closing the loop when asked.

    Parameters
    ----------
    model : SampledModes
        The sampled structure (R pieces per interval, n_inputs inputs).
    planned : ndarray, shape (n_steps, R, n_inputs)
        Planned input on each piece of each interval (commands, disturbances).
    limits : ndarray, shape (n_inputs,), optional
        Largest |input| of each input (inf: none); None: no clipping.
    controller : tuple of ndarray, optional
        Discrete controller (A_c, B_c, C_c, D_c), ``v = −(C_c x_c + D_c y)``; None: open loop.
    sensors : ndarray of int, optional
        Output index of each controller input.
    actuators : ndarray of int, optional
        Input index of each controller output.
    delay_samples : int, optional
        m, whole samples of loop delay besides the sample of computation.
    delay_piece : int, optional
        First piece at or after the fractional delay τ: pieces before it still carry the
        previous command. 0 when τ = 0.
    noise : ndarray, shape (n_steps, n_sensors), optional
        Sampled sensor noise added to the controller's inputs.
    engine : {"auto", "numpy", "compiled"}, optional
        How the loop is stepped (see the module notes); ``"compiled"`` needs numba.

    Returns
    -------
    LoopRecord

    Raises
    ------
    UsageError
        An unknown engine.
    MissingFeatureError
        ``"compiled"`` without numba.
    """
    if engine not in ENGINES:
        raise UsageError(f"unknown engine {engine!r} (expected one of: {', '.join(ENGINES)})")
    planned = np.asarray(planned, dtype=float)
    compiled = engine != "numpy" and _compiled_kernel() is not None
    if engine == "compiled" and not compiled:
        raise MissingFeatureError(
            "the compiled engine needs numba: install it with pip install 'dampctl[fast]' (or "
            "use engine='numpy')"
        )
    if controller is None:
        if not compiled:
            return _open_run(model, planned, limits)
        empty = np.zeros((0, 0))
        controller = (empty, np.zeros((0, 0)), np.zeros((0, 0)), np.zeros((0, 0)))
        sensors, actuators = np.zeros(0, dtype=int), np.zeros(0, dtype=int)
    ctrl = tuple(np.asarray(m, dtype=float) for m in controller)
    args = (model, planned, limits, ctrl, np.asarray(sensors, dtype=int),
            np.asarray(actuators, dtype=int), int(delay_samples) + 1, int(delay_piece), noise)
    return _steps_compiled(*args) if compiled else _steps_numpy(*args)
