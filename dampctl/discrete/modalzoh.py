"""Exact sampled model of a modal structure, one mode at a time, for time simulation.

The structure is driven by inputs that are constant on fixed pieces of every sample interval
(a command held by a zero-order hold and delayed by a fraction of a sample, or several copies
of a command delayed by the impulse times of a shaper, switch at fixed offsets θ_r inside the
interval), optionally through a first-order actuator lag; its outputs are read at the sampling
instants, optionally through a first-order sensor lag. All of that is discretized exactly:

* a constant input v on [θ_r, θ_{r+1}) of the interval moves the state at its end by
  (Γ(T − θ_r) − Γ(T − θ_{r+1})) v, with Γ(h) = ∫₀^h e^{As} ds B (the zero-order-hold input
  matrix over a span h) — the "modified z-transform" treatment of a delay that is not a whole
  number of samples (K. J. Åström & B. Wittenmark, *Computer-Controlled Systems*, 3rd ed.
  1997, sampling of systems with time delay; from memory);
* the continuous system is block triangular — lag states e → modes x_i → sensor-lag states s,
  the modes not coupled to each other — so e^{Ah} is assembled from one small matrix
  exponential per mode (lag states, that mode's two states, the sensor-lag states and the
  inputs: the Van Loan augmented form [[A, B], [0, 0]], all modes in one batch,
  :func:`expm_batch`), plus one for the paths that bypass
  the modes (feedthrough into a lagged sensor). The blocks from the lags to the sensor lags
  are sums over the modes of their own paths.

Memory and work per step are linear in the number of modes: no transition matrix of the
whole structure is ever formed. States per mode are the plant's ``[ω_i q_i, q_i']``
(``[q_i, q_i']`` for a rigid-body mode, ω_i = 0: a double integrator;
:mod:`dampctl.model.plant`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from dampctl.errors import PlantError, UsageError

__all__ = ["SampledModes", "expm_batch", "sample_modes"]

#: Padé [13/13] coefficients and the 1-norm bound θ₁₃ of the scaling and squaring method
#: (N. J. Higham, "The scaling and squaring method for the matrix exponential revisited",
#: SIAM J. Matrix Anal. Appl. 26(4), 2005, table 2.3 and eq. 2.1)
_PADE13 = (64764752532480000.0, 32382376266240000.0, 7771770303897600.0,
           1187353796428800.0, 129060195264000.0, 10559470521600.0, 670442572800.0,
           33522128640.0, 1323241920.0, 40840800.0, 960960.0, 16380.0, 182.0, 1.0)
_THETA13 = 5.371920351148152


def _balance(A: np.ndarray) -> np.ndarray:
    """Diagonal scalings d (powers of 2) such that D⁻¹ A D has rows and columns of like norm,
    for every matrix of a stack (B. N. Parlett & C. Reinsch, "Balancing a matrix for
    calculation of eigenvalues and eigenvectors", Numer. Math. 13, 1969)."""
    k = A.shape[-1]
    d = np.ones(A.shape[:-1])
    off = ~np.eye(k, dtype=bool)
    B = A.copy()
    for _ in range(20):
        done = True
        for i in range(k):
            col = np.sum(np.abs(B[..., :, i]) * off[:, i], axis=-1)
            row = np.sum(np.abs(B[..., i, :]) * off[i, :], axis=-1)
            ok = (col > 0) & (row > 0)
            f = np.ones_like(col)
            f[ok] = 2.0 ** np.round(0.5 * np.log2(row[ok] / col[ok]))
            change = f != 1.0
            if np.any(change & ok & ((col * f + row / f) < 0.95 * (col + row))):
                done = False
            # B ← F⁻¹ B F with F = diag(1, …, f, …, 1): column i times f, row i over f
            B[..., :, i] *= f[..., None]
            B[..., i, :] /= f[..., None]
            d[..., i] *= f
        if done:
            break
    return d


def expm_batch(matrices: np.ndarray) -> np.ndarray:
    """Matrix exponentials of a stack of small matrices, all at once.

    Each matrix is first balanced by a diagonal similarity of powers of two (exact), then the
    [13/13] Padé approximant with scaling and squaring is applied (Higham 2005), each matrix
    with its own number of squarings: a few batched matrix products and one batched solve,
    where :func:`scipy.linalg.expm` treats the matrices one by one.

    Parameters
    ----------
    matrices : ndarray, shape (..., k, k)
        The matrices.

    Returns
    -------
    ndarray, shape (..., k, k)
        e^A of each.
    """
    A = np.asarray(matrices, dtype=float)
    k = A.shape[-1]
    if A.size == 0 or k == 0:
        return np.broadcast_to(np.eye(k), A.shape).copy()
    d = _balance(A)
    A = A / d[..., :, None] * d[..., None, :]  # D⁻¹ A D
    norm = np.max(np.sum(np.abs(A), axis=-2), axis=-1)
    with np.errstate(divide="ignore"):
        squarings = np.where(norm > _THETA13, np.ceil(np.log2(norm / _THETA13)), 0.0)
    squarings = squarings.astype(int)
    A = A / (2.0 ** squarings)[..., None, None]
    b = _PADE13
    eye = np.broadcast_to(np.eye(k), A.shape)
    A2 = A @ A
    A4 = A2 @ A2
    A6 = A4 @ A2
    U = A @ (A6 @ (b[13] * A6 + b[11] * A4 + b[9] * A2) + b[7] * A6 + b[5] * A4 + b[3] * A2
             + b[1] * eye)
    V = A6 @ (b[12] * A6 + b[10] * A4 + b[8] * A2) + b[6] * A6 + b[4] * A4 + b[2] * A2 \
        + b[0] * eye
    out = np.linalg.solve(V - U, V + U)
    for j in range(int(np.max(squarings))):
        more = squarings > j
        out[more] = out[more] @ out[more]
    return out * d[..., :, None] / d[..., None, :]  # D e^{D⁻¹AD} D⁻¹


@dataclass(frozen=True)
class SampledModes:
    """The sampled structure: one step maps (x, e, s, inputs) at t_k to the state at t_{k+1}.

    With ``w = [e, v_0, v_1, …, v_{R−1}]`` (lag states, then the input vector on each piece of
    the interval) a step is::

        y     = Cy @ x + Dy @ w + Sy @ s          (outputs sampled at t_k)
        e'    = Ge @ w
        x'    = Pa * x + Pb * x[::-1] + Gx @ w    (x as a (2, n_modes) array)
        s'    = Fs * s + Hs @ x + Gs @ w

    Attributes
    ----------
    sample_time_s : float
        T (s).
    breakpoints_s : ndarray
        θ_0 = 0 < θ_1 < … < θ_{R−1} < T: where the inputs may switch inside an interval (s).
    n_inputs : int
        Inputs (each one value per piece).
    lagged_inputs : tuple of int
        Inputs with a first-order lag (one state e each, in that order).
    lagged_outputs : tuple of int
        Outputs read through a first-order lag (one state s each, in that order).
    Pa, Pb : ndarray, shape (2, n_modes)
        Per mode ZOH transition: ``x0' = Pa[0] x0 + Pb[0] x1``, ``x1' = Pa[1] x1 + Pb[1] x0``.
    Gx : ndarray, shape (2 n_modes, n_w)
        Effect of w on the modal states (rows: all x0, then all x1).
    Ge : ndarray, shape (n_lag_in, n_w)
        Lag-state update.
    Fs : ndarray, shape (n_lag_out,)
        Sensor-lag decay e^{−ω_s T}.
    Hs, Gs : ndarray
        Effect of the modal states and of w on the sensor-lag states.
    Cy, Dy, Sy : ndarray
        Output rows on the modal states (n_out, 2 n_modes), on w and on s.
    """

    sample_time_s: float
    breakpoints_s: np.ndarray
    n_inputs: int
    lagged_inputs: tuple[int, ...]
    lagged_outputs: tuple[int, ...]
    Pa: np.ndarray
    Pb: np.ndarray
    Gx: np.ndarray
    Ge: np.ndarray
    Fs: np.ndarray
    Hs: np.ndarray
    Gs: np.ndarray
    Cy: np.ndarray
    Dy: np.ndarray
    Sy: np.ndarray

    @property
    def n_pieces(self) -> int:
        """R, the number of pieces of a sample interval."""
        return int(self.breakpoints_s.size)

    @property
    def n_modes(self) -> int:
        """Number of modes."""
        return int(self.Pa.shape[1])

    def w_vector(self, e: np.ndarray, pieces: np.ndarray) -> np.ndarray:
        """Stack lag states and the inputs on each piece into w.

        Parameters
        ----------
        e : ndarray, shape (n_lag_in,)
            Lag states.
        pieces : ndarray, shape (R, n_inputs)
            Input value on each piece of the interval.

        Returns
        -------
        ndarray, shape (n_w,)
        """
        return np.concatenate([e, pieces.ravel()])


def _corners(values, count: int, what: str) -> np.ndarray:
    if values is None:
        return np.full(count, np.nan)
    out = np.array([np.nan if v is None else float(v) for v in values], dtype=float)
    if out.size != count:
        raise UsageError(f"{what}: expected {count} corner frequencies, got {out.size}")
    bad = np.isfinite(out) & (out <= 0)
    if np.any(bad):
        raise UsageError(f"{what}: corner frequencies must be > 0")
    return out


def sample_modes(
    omegas: np.ndarray,
    dampings: np.ndarray,
    B: np.ndarray,
    C: np.ndarray,
    orders: Sequence[int],
    D: np.ndarray,
    sample_time_s: float,
    *,
    breakpoints_s: Sequence[float] = (0.0,),
    input_corners_rad_s: Sequence[float | None] | None = None,
    output_corners_rad_s: Sequence[float | None] | None = None,
) -> SampledModes:
    """Exact sampled model of modes driven through optional lags, read through optional lags.

    Parameters
    ----------
    omegas, dampings : array_like, shape (n_modes,)
        Natural frequencies (rad/s, ≥ 0) and damping ratios of the modes. A mode at 0 rad/s is
        a rigid-body mode (damping 0): its states are ``[q, q']`` (a double integrator), as in
        the plant's state space.
    B : array_like, shape (n_modes, n_inputs)
        Modal input rows b_i (per unit input, divided by the modal mass): q_i'' + 2ζω q_i' +
        ω² q_i = Σ_j B[i, j] f_j.
    C : array_like, shape (n_outputs, n_modes)
        Modal output rows c: an output is Σ_i C[o, i] d^order q_i / dt^order + D f.
    orders : sequence of int
        Derivative order of each output (0, 1 or 2); an acceleration output gets its direct
        term Σ_i c_i b_i f.
    D : array_like, shape (n_outputs, n_inputs)
        Constant feedthrough from the (lagged) input forces f (residual flexibility, a strut's
        own force).
    sample_time_s : float
        T (s), > 0.
    breakpoints_s : sequence of float, optional
        Offsets inside the interval where inputs may switch; 0 is always one. Default (0,).
    input_corners_rad_s : sequence of float or None, optional
        First-order lag corner (rad/s) of each input (f = lag(input)); None: no lag.
    output_corners_rad_s : sequence of float or None, optional
        First-order lag corner (rad/s) of each output as sampled; None: no lag.

    Returns
    -------
    SampledModes

    Raises
    ------
    PlantError
        A negative natural frequency, or a damped rigid-body mode.
    UsageError
        Shapes that do not match, a non-positive sample time, breakpoints outside [0, T).
    """
    w = np.asarray(omegas, dtype=float).ravel()
    z = np.asarray(dampings, dtype=float).ravel()
    n = w.size
    rigid = w == 0.0
    if np.any(w < 0.0) or np.any(z[rigid] != 0.0):
        raise PlantError("natural frequencies must be >= 0 and a rigid-body mode undamped")
    B = np.asarray(B, dtype=float).reshape(n, -1)
    n_in = B.shape[1]
    C = np.asarray(C, dtype=float).reshape(-1, n)
    n_out = C.shape[0]
    orders = np.asarray(orders, dtype=int).ravel()
    D = np.asarray(D, dtype=float).reshape(n_out, n_in)
    T = float(sample_time_s)
    if not (math.isfinite(T) and T > 0.0) or orders.size != n_out:
        raise UsageError("sample time must be > 0 and every output needs an order")
    theta = np.unique(np.concatenate([[0.0], np.asarray(breakpoints_s, dtype=float)]))
    if theta[0] < 0.0 or theta[-1] >= T:
        raise UsageError(f"breakpoints must lie in [0, T) = [0, {T:.6g}) s, got {theta}")
    in_corner = _corners(input_corners_rad_s, n_in, "input lags")
    out_corner = _corners(output_corners_rad_s, n_out, "output lags")
    lag_in = tuple(int(j) for j in np.flatnonzero(np.isfinite(in_corner)))
    lag_out = tuple(int(o) for o in np.flatnonzero(np.isfinite(out_corner)))
    ne, ns = len(lag_in), len(lag_out)
    R = theta.size

    # force f = Fe e + Fa a
    Fe = np.zeros((n_in, ne))
    Fe[list(lag_in), np.arange(ne)] = 1.0
    Fa = np.diag(np.where(np.isfinite(in_corner), 0.0, 1.0))
    # per-mode output rows on [ω q, q'] and the acceleration feedthrough c_i b_i
    Cx = np.zeros((n_out, n, 2))
    for o, order in enumerate(orders):
        if order == 0:
            Cx[o, :, 0] = C[o] / np.where(rigid, 1.0, w)  # a rigid mode's first state is q
        elif order == 1:
            Cx[o, :, 1] = C[o]
        elif order == 2:
            Cx[o, :, 0] = -w * C[o]
            Cx[o, :, 1] = -2.0 * z * w * C[o]
        else:
            raise UsageError(f"output order must be 0, 1 or 2, got {order}")
    accel = (orders == 2)[:, None, None] * C[:, :, None] * B[None, :, :]  # (n_out, n, n_in)

    we = in_corner[list(lag_in)]
    ws = out_corner[list(lag_out)]
    K = ne + 2 + ns
    xs = slice(ne, ne + 2)
    ss = slice(ne + 2, K)
    Z = np.zeros((n, K + n_in, K + n_in))
    Z[:, np.arange(ne), np.arange(ne)] = -we
    Z[:, np.arange(ne), K + np.array(lag_in, dtype=int)] = we
    Z[:, ne, ne + 1] = np.where(rigid, 1.0, w)
    Z[:, ne + 1, ne] = -w
    Z[:, ne + 1, ne + 1] = -2.0 * z * w
    Z[:, ne + 1, :ne] = B @ Fe
    Z[:, ne + 1, K:] = B @ Fa
    for m, o in enumerate(lag_out):
        Z[:, ne + 2 + m, ne + 2 + m] = -ws[m]
        Z[:, ne + 2 + m, xs] = ws[m] * Cx[o]
        Z[:, ne + 2 + m, :ne] = ws[m] * accel[o] @ Fe
        Z[:, ne + 2 + m, K:] = ws[m] * accel[o] @ Fa
    # paths that bypass the modes: lags e and inputs straight into the sensor lags through D
    Kd = ne + ns
    Zd = np.zeros((Kd + n_in, Kd + n_in))
    Zd[np.arange(ne), np.arange(ne)] = -we
    Zd[np.arange(ne), Kd + np.array(lag_in, dtype=int)] = we
    for m, o in enumerate(lag_out):
        Zd[ne + m, ne + m] = -ws[m]
        Zd[ne + m, :ne] = ws[m] * D[o] @ Fe
        Zd[ne + m, Kd:] = ws[m] * D[o] @ Fa

    spans = T - theta  # h_r = T − θ_r, r = 0..R−1 (h_0 = T)
    E = expm_batch(Z[None, :, :, :] * spans[:, None, None, None])  # (R, n, ., .)
    Ed = expm_batch(Zd[None, :, :] * spans[:, None, None])  # (R, ., .)
    # input effect of each piece: Γ(h_r) − Γ(h_{r+1}), Γ(h_R) = Γ(0) = 0
    gam = E[:, :, :K, K:]
    gam_d = Ed[:, :Kd, Kd:]
    piece = gam - np.concatenate([gam[1:], np.zeros_like(gam[:1])])
    piece_d = gam_d - np.concatenate([gam_d[1:], np.zeros_like(gam_d[:1])])
    full = E[0, :, :K, :K]  # Φ over T, per mode
    full_d = Ed[0, :Kd, :Kd]

    n_w = ne + R * n_in
    Gx = np.zeros((2, n, n_w))
    Gx[:, :, :ne] = np.moveaxis(full[:, xs, :ne], 1, 0)
    Ge = np.zeros((ne, n_w))
    Ge[:, :ne] = full_d[:ne, :ne]
    Gs = np.zeros((ns, n_w))
    Gs[:, :ne] = np.sum(full[:, ss, :ne], axis=0) + full_d[ne:, :ne]
    for r in range(R):
        cols = slice(ne + r * n_in, ne + (r + 1) * n_in)
        Gx[:, :, cols] = np.moveaxis(piece[r][:, xs, :], 1, 0)
        Ge[:, cols] = piece_d[r][:ne]
        Gs[:, cols] = np.sum(piece[r][:, ss, :], axis=0) + piece_d[r][ne:]
    Pa = np.stack([full[:, ne, ne], full[:, ne + 1, ne + 1]])
    Pb = np.stack([full[:, ne, ne + 1], full[:, ne + 1, ne]])
    Hs = np.concatenate([full[:, ss, ne].T, full[:, ss, ne + 1].T], axis=1)
    Fs = np.exp(-ws * T)

    # sampled outputs: unlagged ones read the modes and the force at t_k (lag state, or the
    # input on the first piece); lagged ones read their lag state
    total_D = D + np.sum(accel, axis=1)
    Cy = np.concatenate([Cx[:, :, 0], Cx[:, :, 1]], axis=1)
    Dy = np.zeros((n_out, n_w))
    Dy[:, :ne] = total_D @ Fe
    Dy[:, ne : ne + n_in] = total_D @ Fa
    Sy = np.zeros((n_out, ns))
    for m, o in enumerate(lag_out):
        Cy[o] = 0.0
        Dy[o] = 0.0
        Sy[o, m] = 1.0
    arrays = {
        "Pa": Pa, "Pb": Pb, "Gx": Gx.reshape(2 * n, n_w), "Ge": Ge, "Fs": Fs, "Hs": Hs,
        "Gs": Gs, "Cy": Cy, "Dy": Dy, "Sy": Sy, "breakpoints_s": theta,
    }
    for value in arrays.values():
        value.setflags(write=False)
    return SampledModes(
        sample_time_s=T, n_inputs=n_in, lagged_inputs=lag_in, lagged_outputs=lag_out, **arrays
    )
