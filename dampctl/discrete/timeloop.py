"""The time loop: a sampled modal structure, optionally closed by a discrete controller.

One step of :func:`run_loop` at t_k = kT does what the real-time target does:

1. the actuator inputs on each piece of the interval are the planned command (moves, shaped
   copies, disturbances) plus the feedback commands computed earlier — one sample of
   computation delay and the loop delay m T + τ (a command computed at step j acts from
   (j + 1 + m) T + τ) — clipped at the actuator limits (the time clipped is counted);
2. every output is sampled (:class:`~dampctl.discrete.modalzoh.SampledModes`);
3. the controller reads its sensors (plus sampled sensor noise) and computes its next command,
   ``v[k] = −(C_c x_c + D_c y[k])``, ``x_c ← A_c x_c + B_c y[k]``;
4. the structure moves on to t_{k+1}.

Work and memory per step are linear in the number of modes (two matrix–vector products and a
few element-wise operations on the modal states); the records kept are the sampled outputs and
the actuator forces.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from dampctl.discrete.modalzoh import SampledModes

__all__ = ["LoopRecord", "run_loop"]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]


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
    """

    outputs: np.ndarray
    forces: np.ndarray
    saturated_s: np.ndarray


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

    Returns
    -------
    LoopRecord
    """
    steps, R, n_in = planned.shape
    n = model.n_modes
    ne, ns = len(model.lagged_inputs), len(model.lagged_outputs)
    n_out = model.Cy.shape[0]
    # one product for everything driven by w = [e, pieces], one for everything read from x
    Mw = np.vstack([model.Dy, model.Ge, model.Gs, model.Gx])
    Mx = np.vstack([model.Cy, model.Hs])
    Sy, Fs = model.Sy, model.Fs
    Pa, Pb = model.Pa.ravel(), model.Pb.ravel()
    o_e, o_s = n_out, n_out + ne
    o_x = o_s + ns
    lag_in = np.array(model.lagged_inputs, dtype=int)
    widths = np.diff(np.append(model.breakpoints_s, model.sample_time_s))
    outputs = np.empty((steps, n_out))
    forces = np.empty((steps, n_in))
    saturated = np.zeros(n_in)
    x = np.zeros(2 * n)
    swap = np.concatenate([np.arange(n, 2 * n), np.arange(n)])
    e = np.zeros(ne)
    s = np.zeros(ns)
    w = np.zeros(ne + R * n_in)
    clip = limits is not None and bool(np.any(np.isfinite(limits)))
    closed = controller is not None
    if closed:
        Ac, Bc, Cc, Dc = (np.asarray(m, dtype=float) for m in controller)
        xc = np.zeros(Ac.shape[0])
        lag = delay_samples + 1
        history = np.zeros((steps + lag, Cc.shape[0]))  # history[j + lag] = v[j]
        sensors = np.asarray(sensors, dtype=int)
        actuators = np.asarray(actuators, dtype=int)
    for k in range(steps):
        pieces = planned[k]
        if closed:
            late = history[k]  # v[k − m − 1]
            early = history[k - 1] if k >= 1 else history[0]  # v[k − m − 2]
            pieces = pieces.copy()
            pieces[:delay_piece, actuators] += early
            pieces[delay_piece:, actuators] += late
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
        if closed:
            ys = y[sensors] if noise is None else y[sensors] + noise[k]
            history[k + lag] = -(Cc @ xc + Dc @ ys)
            xc = Ac @ xc + Bc @ ys
        e = driven[o_e:o_s]
        if ns:
            s = Fs * s + read[n_out:] + driven[o_s:o_x]
        x = Pa * x + Pb * x[swap] + driven[o_x:]
    return LoopRecord(outputs=outputs, forces=forces, saturated_s=saturated)
