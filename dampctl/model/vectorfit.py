"""Vector fitting: one common set of poles for many frequency responses.

The responses (channels) are approximated by rational functions that share their poles,

    F_c(s) ≈ Σ_m r_cm / (s − a_m) + U_c + L_c / s²,

with complex poles in conjugate pairs (only the one with positive imaginary part is stored) and
real poles alone. ``U`` (a constant) and ``L / s²`` are optional terms; in a receptance
(displacement per force) they are the upper and lower residuals of the modes outside the band.

The poles are found by vector fitting (B. Gustavsen & A. Semlyen, "Rational approximation of
frequency domain responses by vector fitting", IEEE Trans. Power Delivery 14(3):1052–1061,
1999): starting from guessed poles, each iteration fits σ(s)F(s) ≈ p(s) with σ and p sharing
the current poles, linear in the unknowns, and takes the zeros of σ as the next poles. The
zeros are the eigenvalues of A − b c̃ᵀ / d̃ in the real form of the poles (ibid., appendix).
Two published refinements are used: the relaxed normalization of σ (B. Gustavsen, "Improving
the pole relocating properties of vector fitting", IEEE Trans. Power Delivery
21(3):1587–1592, 2006), whose constant d̃ is free under one extra equation, and the fast
form for many channels (D. Deschrijver, M. Mrozowski, T. Dhaene & D. De Zutter,
"Macromodeling of multiport systems using a fast implementation of the vector fitting
method", IEEE Microwave Wireless Compon. Lett. 18(6):383–385, 2008), where a QR factorization
per channel removes that channel's own unknowns before the poles are solved. Poles that come
out in the right half plane are reflected into the left one (Gustavsen & Semlyen 1999).

Everything is in float64 on the frequencies given; the caller scales s (for example by the top
of the band) so that the numbers stay near 1. The least-squares problems are tall and thin
(thousands of rows, tens of columns): the BLAS runs them on one thread (threadpoolctl), which
on a loaded 2-core machine was 18 to 25 times faster than its own threads.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from threadpoolctl import threadpool_limits

from dampctl.errors import MeasurementError

__all__ = ["RationalFit", "evaluate_rational", "fit_residues", "start_poles", "vector_fit"]

#: smallest |d̃| of the relaxed σ accepted before it is held at this value (Gustavsen 2006)
_SMALLEST_D = 1e-8


@dataclass(frozen=True)
class RationalFit:
    """Poles and residues of a rational fit shared by several channels.

    Parameters
    ----------
    poles : ndarray of complex, shape (n_poles,)
        The poles (same unit as ``s``): complex ones with positive imaginary part (each stands
        for a conjugate pair) and real ones (imaginary part exactly 0).
    residues : ndarray of complex, shape (n_channels, n_poles)
        r_cm of each pole; the conjugate pole of a complex pair has the conjugate residue.
    constant : ndarray, shape (n_channels,)
        The constant term U_c (zero when it was not fitted).
    inverse_square : ndarray, shape (n_channels,)
        The coefficient L_c of 1/s² (zero when it was not fitted).
    iterations : int
        Pole-relocation iterations made.
    converged : bool
        Whether the poles stopped moving (relative change below the tolerance) before the
        iteration limit.
    """

    poles: np.ndarray
    residues: np.ndarray
    constant: np.ndarray
    inverse_square: np.ndarray
    iterations: int = 0
    converged: bool = True

    def __post_init__(self) -> None:
        poles = np.array(self.poles, dtype=complex).ravel()
        residues = np.array(self.residues, dtype=complex)
        if residues.ndim != 2 or residues.shape[1] != poles.size:
            raise ValueError("residues must have shape (n_channels, n_poles)")
        n = residues.shape[0]
        constant = np.array(self.constant, dtype=float).reshape(n)
        inverse_square = np.array(self.inverse_square, dtype=float).reshape(n)
        for name, value in (
            ("poles", poles),
            ("residues", residues),
            ("constant", constant),
            ("inverse_square", inverse_square),
        ):
            value.setflags(write=False)
            object.__setattr__(self, name, value)


def start_poles(low: float, high: float, n_pairs: int) -> np.ndarray:
    """Starting poles: complex pairs spread evenly over a band, lightly damped.

    Parameters
    ----------
    low, high : float
        Band edges (angular frequency, same unit as ``s``), 0 <= low < high.
    n_pairs : int
        Number of complex pole pairs, >= 1.

    Returns
    -------
    ndarray of complex, shape (n_pairs,)
        β_k evenly spaced in [low, high] (the ends excluded), poles −β_k/100 + jβ_k, as
        Gustavsen & Semlyen (1999, section 4) recommend for responses with resonances.
    """
    if n_pairs < 1:
        raise ValueError("n_pairs must be >= 1")
    beta = low + (high - low) * (np.arange(n_pairs) + 0.5) / n_pairs
    return (-0.01 + 1j) * beta


def _columns(s: np.ndarray, poles: np.ndarray) -> np.ndarray:
    """Real-coefficient basis: per complex pair 1/(s−a) + 1/(s−a*) and j/(s−a) − j/(s−a*),
    per real pole 1/(s−a); shape (n_s, n_columns)."""
    cols = []
    for a in poles:
        if a.imag == 0.0:
            cols.append(1.0 / (s - a.real))
        else:
            p, q = 1.0 / (s - a), 1.0 / (s - np.conj(a))
            cols.append(p + q)
            cols.append(1j * (p - q))
    return np.array(cols).T.reshape(s.size, -1)


def _extras(s: np.ndarray, constant: bool, inverse_square: bool) -> np.ndarray:
    cols = []
    if constant:
        cols.append(np.ones_like(s))
    if inverse_square:
        cols.append(1.0 / (s * s))
    return np.array(cols).T.reshape(s.size, len(cols))


def _check(s: np.ndarray, data: np.ndarray, weights: np.ndarray) -> None:
    if s.ndim != 1 or data.shape != (data.shape[0], s.size) or weights.shape != data.shape:
        raise MeasurementError("data and weights must have shape (n_channels, n_s)")
    if np.any(s == 0):
        raise MeasurementError("frequency 0 cannot be fitted (the basis has 1/s²)")


def _relocate(s, data, weights, poles, constant, inverse_square) -> np.ndarray:
    """One pole-relocation step: the zeros of the fitted σ (fast, relaxed form).

    Per channel, the rows w·[p-basis, −F·σ-basis] are reduced to the triangle R22 that acts on
    σ's unknowns alone (Deschrijver et al. 2008): the σ part projected off the span of the
    weighted p-basis, then a QR. Channels whose weights differ only by a factor share that
    span, so its orthonormal basis is computed once per weight profile.
    """
    phi = _columns(s, poles)
    n_basis = phi.shape[1]
    num = np.hstack([phi, _extras(s, constant, inverse_square)])
    den = np.hstack([phi, np.ones((s.size, 1))])  # σ = Σ c̃ φ + d̃
    rows = []
    for group in _weight_groups(weights):
        profile = weights[group[0]]
        span = profile[:, None] * num
        q = np.linalg.qr(np.vstack([span.real, span.imag]), mode="reduced")[0]
        x = -(weights[group][:, :, None] * data[group][:, :, None]) * den[None, :, :]
        x = np.concatenate([x.real, x.imag], axis=1)  # (n_group, 2 n_s, n_den)
        y = x - q @ (q.T @ x)
        rows.append(np.linalg.qr(y, mode="r").reshape(-1, den.shape[1]))
    system = np.vstack(rows)
    # relaxed normalization: Re Σ_k σ(s_k) = n_s, weighted like the data (Gustavsen 2006)
    scale = np.linalg.norm(weights * data) / s.size
    extra = np.concatenate([np.sum(phi.real, axis=0), [s.size]]) * scale
    system = np.vstack([system, extra])
    rhs = np.zeros(system.shape[0])
    rhs[-1] = s.size * scale
    norms = np.linalg.norm(system, axis=0)
    norms[norms == 0] = 1.0
    solution = np.linalg.lstsq(system / norms, rhs, rcond=None)[0] / norms
    c_sigma, d_sigma = solution[:n_basis], solution[n_basis]
    if abs(d_sigma) < _SMALLEST_D:
        d_sigma = _SMALLEST_D if d_sigma >= 0 else -_SMALLEST_D
    A = np.zeros((n_basis, n_basis))
    b = np.zeros(n_basis)
    k = 0
    for a in poles:
        if a.imag == 0.0:
            A[k, k] = a.real
            b[k] = 1.0
            k += 1
        else:
            A[k : k + 2, k : k + 2] = [[a.real, a.imag], [-a.imag, a.real]]
            b[k] = 2.0
            k += 2
    zeros = np.linalg.eigvals(A - np.outer(b, c_sigma) / d_sigma)
    kept = zeros[zeros.imag >= 0.0]
    return -np.abs(kept.real) + 1j * kept.imag  # reflect right-half-plane poles


def fit_residues(
    s: np.ndarray,
    data: np.ndarray,
    weights: np.ndarray,
    poles: np.ndarray,
    *,
    constant: bool = True,
    inverse_square: bool = True,
) -> RationalFit:
    """Residues (and the optional terms) of every channel for fixed poles: linear least squares.

    Parameters
    ----------
    s : ndarray of complex, shape (n_s,)
        Evaluation points jω (any consistent unit), none zero.
    data : ndarray of complex, shape (n_channels, n_s)
        Responses to fit.
    weights : ndarray, shape (n_channels, n_s)
        Weight of each point (the fit minimizes Σ |w (F̂ − F)|²), >= 0.
    poles : ndarray of complex
        Poles as in :class:`RationalFit`.
    constant, inverse_square : bool, optional
        Fit the constant term U and the term L/s² (default both).

    Returns
    -------
    RationalFit
        The poles given, the residues and terms that minimize the weighted error.
    """
    s = np.asarray(s, dtype=complex)
    data = np.asarray(data, dtype=complex)
    weights = np.asarray(weights, dtype=float)
    _check(s, data, weights)
    poles = np.asarray(poles, dtype=complex)
    with threadpool_limits(limits=1, user_api="blas"):
        coefficients = _coefficients(s, data, weights, poles, constant, inverse_square)
    residues = np.empty((data.shape[0], poles.size), dtype=complex)
    k = 0
    for m, a in enumerate(poles):
        if a.imag == 0.0:
            residues[:, m] = coefficients[:, k]
            k += 1
        else:
            residues[:, m] = coefficients[:, k] + 1j * coefficients[:, k + 1]
            k += 2
    zero = np.zeros(data.shape[0])
    u = coefficients[:, k] if constant else zero
    low = coefficients[:, k + int(constant)] if inverse_square else zero
    return RationalFit(poles, residues, u, low)


def _coefficients(s, data, weights, poles, constant, inverse_square) -> np.ndarray:
    """Per channel, the weighted least-squares coefficients of the basis (real form)."""
    phi = _columns(s, poles)
    basis = np.hstack([phi, _extras(s, constant, inverse_square)])
    coefficients = np.empty((data.shape[0], basis.shape[1]))
    for c in range(data.shape[0]):
        w = weights[c][:, None]
        a = np.vstack([(w * basis).real, (w * basis).imag])
        rhs = np.concatenate([(weights[c] * data[c]).real, (weights[c] * data[c]).imag])
        norms = np.linalg.norm(a, axis=0)
        norms[norms == 0] = 1.0
        coefficients[c] = np.linalg.lstsq(a / norms, rhs, rcond=None)[0] / norms
    return coefficients


def vector_fit(
    s: np.ndarray,
    data: np.ndarray,
    weights: np.ndarray,
    initial_poles: np.ndarray,
    *,
    constant: bool = True,
    inverse_square: bool = True,
    max_iterations: int = 30,
    tolerance: float = 1e-10,
) -> RationalFit:
    """Fit common poles and per-channel residues to frequency responses by vector fitting.

    Parameters
    ----------
    s : ndarray of complex, shape (n_s,)
        Evaluation points jω (any consistent unit; scale it so that |s| is near 1), none zero.
    data : ndarray of complex, shape (n_channels, n_s)
        Responses to fit.
    weights : ndarray, shape (n_channels, n_s)
        Weight of each point, >= 0 (the fit minimizes Σ |w (F̂ − F)|² at convergence).
    initial_poles : ndarray of complex
        Starting poles as in :class:`RationalFit` (see :func:`start_poles`).
    constant, inverse_square : bool, optional
        Fit the constant term U and the term L/s² (default both).
    max_iterations : int, optional
        Most pole-relocation iterations (default 30).
    tolerance : float, optional
        The poles count as converged when none moves by more than this fraction of its
        magnitude in one iteration (default 1e-10).

    Returns
    -------
    RationalFit
        Final poles, residues and terms, with the iteration count and whether it converged.
    """
    s = np.asarray(s, dtype=complex)
    data = np.asarray(data, dtype=complex)
    weights = np.asarray(weights, dtype=float)
    _check(s, data, weights)
    poles = np.asarray(initial_poles, dtype=complex)
    order = sum(1 if a.imag == 0 else 2 for a in poles)
    if 2 * s.size < order + 2 + int(constant) + int(inverse_square):
        raise MeasurementError(
            f"{s.size} frequencies cannot hold a rational model with {order} poles"
        )
    converged = False
    iterations = 0
    with threadpool_limits(limits=1, user_api="blas"):
        for iterations in range(1, max_iterations + 1):  # noqa: B007 (reported after loop)
            new = _relocate(s, data, weights, poles, constant, inverse_square)
            converged = new.size == poles.size and _moved(poles, new) < tolerance
            poles = new
            if converged:
                break
    fit = fit_residues(
        s, data, weights, poles, constant=constant, inverse_square=inverse_square
    )
    return RationalFit(
        fit.poles, fit.residues, fit.constant, fit.inverse_square, iterations, converged
    )


def _weight_groups(weights: np.ndarray) -> list[np.ndarray]:
    """Channels whose weights are one profile times a factor, as index arrays."""
    peak = np.max(weights, axis=1, keepdims=True)
    peak[peak == 0] = 1.0
    shapes = weights / peak
    groups: list[np.ndarray] = []
    left = np.arange(weights.shape[0])
    while left.size:
        same = np.all(np.abs(shapes[left] - shapes[left[0]]) <= 1e-12, axis=1)
        groups.append(left[same])
        left = left[~same]
    return groups


def _moved(old: np.ndarray, new: np.ndarray) -> float:
    """Largest relative move between two pole sets of one size, matched in sorted order."""
    key_old = np.lexsort((old.real, old.imag))
    key_new = np.lexsort((new.real, new.imag))
    a, b = old[key_old], new[key_new]
    return float(np.max(np.abs(a - b) / np.maximum(np.abs(a), 1e-300)))


def evaluate_rational(fit: RationalFit, s: np.ndarray) -> np.ndarray:
    """The fitted responses at ``s``.

    Parameters
    ----------
    fit : RationalFit
        A fit.
    s : ndarray of complex, shape (n_s,)
        Evaluation points (same unit as the fit), none zero when L/s² was fitted.

    Returns
    -------
    ndarray of complex, shape (n_channels, n_s)
        Σ r/(s − a) (with conjugates for complex pairs) + U + L/s².
    """
    s = np.asarray(s, dtype=complex).ravel()
    out = np.zeros((fit.residues.shape[0], s.size), dtype=complex)
    for m, a in enumerate(fit.poles):
        r = fit.residues[:, m][:, None]
        if a.imag == 0.0:
            out += r.real / (s - a.real)
        else:
            out += r / (s - a) + np.conj(r) / (s - np.conj(a))
    out += fit.constant[:, None]
    if np.any(fit.inverse_square != 0.0):
        out += fit.inverse_square[:, None] / (s * s)
    return out
