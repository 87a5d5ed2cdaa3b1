"""Mode shapes from fitted residues: real modal constants, the rank-one split, driving-point scale.

For a structure with real (normal) modes, the receptance between a force at site j and the
displacement at site o is Σ_i φ_i(o) φ_i(j) / (ω_i² − ω² + 2jζ_iω_iω) with mass-normalized
shapes φ_i. Written with the poles λ_i = −ζ_iω_i + jω_di, mode i contributes
r/(jω − λ_i) + r*/(jω − λ_i*) with residue r = φ_i(o) φ_i(j) / (2jω_di), so the *modal constant*
A = 2jω_di r = φ_i(o) φ_i(j) is real (D. J. Ewins, *Modal Testing: Theory, Practice and
Application*, 2nd ed., Research Studies Press 2000, chapter on modal analysis of MDOF systems;
from memory, equation numbers not checked).

From the measured channels the modal constants of a mode form a matrix A (outputs × inputs)
that is rank one: A = φ_out φ_inᵀ. Its leading singular pair gives both shapes up to one factor
α/β. A *driving point* — an output at the same point and in the same direction as an input —
fixes that factor (there φ_out = φ_in, so A_pp = φ_p² > 0) and the shapes come out
mass-normalized (modal mass 1 kg). Without a driving point the factor is unknown: the shapes
reproduce every measured channel, but not a collocated response, and are marked unscaled.

Residues from noisy data are not exactly real: they are turned by the one common phase that
makes them most nearly real (the angle of Σ A², halved), and the real part is kept.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from dampctl.errors import MeasurementError

__all__ = ["ShapeSet", "modal_constants", "site_layout", "split_shapes"]

#: a driving point scales a mode only where the mode shows there: |A_pp| at least this share of
#: the mode's largest modal constant (our choice: well above 1 % noise, well below any real peak)
_SEEN = 0.01
#: a mode whose residues turn by more than this (degrees) to become real is reported as complex
_COMPLEX_DEG = 10.0
#: second singular value of A above this share of the first: the inputs see different shapes
_RANK_ONE = 0.1


@dataclass(frozen=True)
class ShapeSet:
    """Mode shapes at the measured sites.

    Parameters
    ----------
    sites : tuple of str
        Site names: one per motion output (the output's name) and one per input that is not
        the same point as an output.
    output_sites : tuple of str or None
        Site of each output (None for a force output).
    input_sites : tuple of str
        Site of each input.
    shapes : ndarray, shape (n_modes, n_sites)
        φ_i(site): in 1/√kg when the mode is scaled (mass-normalized), otherwise split evenly
        between the output and the input side.
    scaled : ndarray of bool, shape (n_modes,)
        Whether a driving point scaled the mode.
    modal_mass_kg : ndarray, shape (n_modes,)
        Modal mass with the shape set to 1 at the first driving point that sees the mode,
        1/φ_i(p)²; NaN when unscaled.
    warnings : tuple of str
        What could not be done as hoped, in plain words.
    """

    sites: tuple[str, ...]
    output_sites: tuple[str | None, ...]
    input_sites: tuple[str, ...]
    shapes: np.ndarray
    scaled: np.ndarray
    modal_mass_kg: np.ndarray
    warnings: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        for name in ("shapes", "scaled", "modal_mass_kg"):
            value = np.array(getattr(self, name), copy=True)
            value.setflags(write=False)
            object.__setattr__(self, name, value)
        if self.shapes.ndim != 2 or self.shapes.shape[1] != len(self.sites):
            raise ValueError("shapes must have shape (n_modes, n_sites)")


def modal_constants(poles: np.ndarray, residues: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Real modal constants A = Re(e^{−jθ} 2jω_d r) of each mode, and the turn θ.

    Parameters
    ----------
    poles : ndarray of complex, shape (n_modes,)
        Poles λ (rad/s), positive imaginary part.
    residues : ndarray of complex, shape (n_modes, n_out, n_in)
        Receptance residues r of 1/(jω − λ) (m/(N·s)).

    Returns
    -------
    constants : ndarray, shape (n_modes, n_out, n_in)
        Modal constants (1/kg): φ(o)·φ(j) for mass-normalized real modes.
    turn_deg : ndarray, shape (n_modes,)
        The common phase θ (degrees, in (−90, 90]) removed from each mode's constants; 0 for
        real modes.
    """
    poles = np.asarray(poles, dtype=complex)
    residues = np.asarray(residues, dtype=complex)
    complex_constants = 2j * poles.imag[:, None, None] * residues
    squares = np.sum(complex_constants**2, axis=(1, 2))
    theta = 0.5 * np.angle(squares)
    constants = (np.exp(-1j * theta)[:, None, None] * complex_constants).real
    return constants, np.degrees(theta)


def site_layout(
    outputs: Sequence[str],
    inputs: Sequence[str],
    output_kinds: Sequence[str],
    driving_points: Sequence[tuple[int, int]],
) -> tuple[tuple[str, ...], tuple[str | None, ...], tuple[str, ...]]:
    """Site names of the measured points: motion outputs, then inputs not on an output.

    Parameters
    ----------
    outputs, inputs : sequence of str
        Measured output and input names.
    output_kinds : sequence of str
        Kind of each output; ``force`` outputs have no site.
    driving_points : sequence of tuple of int
        (output index, input index) pairs measured at one point and direction.

    Returns
    -------
    sites : tuple of str
    output_sites : tuple of str or None
    input_sites : tuple of str
    """
    output_sites = tuple(None if k == "force" else o for o, k in zip(outputs, output_kinds,
                                                                     strict=True))
    merged = {j: outputs[o] for o, j in driving_points}
    input_sites = tuple(merged.get(j, name) for j, name in enumerate(inputs))
    sites = tuple(s for s in output_sites if s is not None)
    sites += tuple(s for j, s in enumerate(input_sites) if j not in merged)
    if len(set(sites)) != len(sites):
        clash = next(s for s in sites if sites.count(s) > 1)
        raise MeasurementError(
            f"input {clash!r} has the name of an output: if they are one point and direction, "
            f"declare the driving point {clash}/{clash}; otherwise rename one of them")
    return sites, output_sites, input_sites


def split_shapes(
    constants: np.ndarray,
    freqs_hz: np.ndarray,
    *,
    outputs: Sequence[str],
    inputs: Sequence[str],
    output_kinds: Sequence[str],
    driving_points: Sequence[tuple[int, int]] = (),
    turn_deg: np.ndarray | None = None,
) -> ShapeSet:
    """Mode shapes at every measured site from the modal constants of each mode.

    Parameters
    ----------
    constants : ndarray, shape (n_modes, n_out, n_in)
        Real modal constants (1/kg), see :func:`modal_constants`.
    freqs_hz : ndarray, shape (n_modes,)
        Natural frequencies (Hz), for messages.
    outputs, inputs : sequence of str
        Measured output and input names.
    output_kinds : sequence of str
        Kind of each output (``force`` outputs take no part in the shapes).
    driving_points : sequence of tuple of int, optional
        (output index, input index) of each driving point, in order of preference for the
        reported modal mass.
    turn_deg : ndarray, optional
        The phase each mode's constants were turned by (:func:`modal_constants`), to report
        strongly complex modes.

    Returns
    -------
    ShapeSet
    """
    constants = np.asarray(constants, dtype=float)
    sites, output_sites, input_sites = site_layout(outputs, inputs, output_kinds, driving_points)
    motion = [o for o, site in enumerate(output_sites) if site is not None]
    if not motion:
        raise MeasurementError("every output is a force: no mode shape can be formed")
    column = {site: k for k, site in enumerate(sites)}
    n_modes = constants.shape[0]
    shapes = np.zeros((n_modes, len(sites)))
    scaled = np.zeros(n_modes, dtype=bool)
    masses = np.full(n_modes, np.nan)
    warnings: list[str] = []
    if not driving_points:
        warnings.append("no driving point: the mode shapes are unscaled (modal masses unknown); "
                        "the plant reproduces the measured channels but not a collocated "
                        "(driving-point) response")
    for i in range(n_modes):
        name = f"mode {i + 1} ({freqs_hz[i]:.4g} Hz)"
        block = constants[i][motion, :]
        u_all, sv, vt = np.linalg.svd(block)
        u, v, sigma = u_all[:, 0], vt[0], sv[0]
        if sigma == 0.0:
            warnings.append(f"{name}: zero modal constants on every channel; no shape")
            continue
        if sv.size > 1 and sv[1] > _RANK_ONE * sigma:
            warnings.append(f"{name}: the inputs see different shapes (second singular value "
                            f"{sv[1] / sigma:.0%} of the first); the plant keeps the main one")
        if turn_deg is not None and abs(turn_deg[i]) > _COMPLEX_DEG:
            warnings.append(f"{name}: a complex mode (its residues turn by "
                            f"{turn_deg[i]:.0f}° to become real); the plant keeps the real part")
        ratios, first = [], None
        for o, j in driving_points:
            p = motion.index(o)
            value = sigma * u[p] * v[j]
            if abs(value) < _SEEN * sigma * np.max(np.abs(u)) * np.max(np.abs(v)):
                continue
            if value < 0:
                warnings.append(f"{name}: the driving point {outputs[o]}/{inputs[j]} has a "
                                "negative modal constant (a sign error in the data?); it does "
                                "not scale this mode")
                continue
            ratios.append(v[j] / u[p])
            first = (p, j) if first is None else first
        if ratios:
            alpha = np.sqrt(sigma * np.exp(np.mean(np.log(ratios))))
            beta = sigma / alpha
            if u[first[0]] < 0:
                alpha, beta = -alpha, -beta
            scaled[i] = True
            masses[i] = 1.0 / (alpha * u[first[0]]) ** 2
        else:
            if driving_points:
                warnings.append(f"{name}: not seen at any driving point; its shape is unscaled")
            alpha = beta = np.sqrt(sigma)
            if u[int(np.argmax(np.abs(u)))] < 0:
                alpha, beta = -alpha, -beta
        for p, o in enumerate(motion):
            shapes[i, column[output_sites[o]]] = alpha * u[p]
        for j, site in enumerate(input_sites):
            if all(j != jj for _, jj in driving_points):
                shapes[i, column[site]] = beta * v[j]
    return ShapeSet(sites, output_sites, input_sites, shapes, scaled, masses, tuple(warnings))
