"""Passive parts in the structure: the plant's state space augmented with the parts' own states.

A passive part acts on the structure through a **port**: a generalized force distribution (the
modal input row of the port's input u) and the port motion y it reacts to. Each part is exactly
a linear element from y to u with its own states, written like a controller, ``u = −Z(s) y``:

absorber (mass m, spring k, dashpot c at a site)
    y = velocity of the site, u = force on it. Z(s) = m s (c s + k)/(m s² + c s + k), the
    absorber's dynamic mass times s. Below its own frequency it moves with the site (Z ≈ m s:
    its mass loads every mode); near it, it pulls against the site. States: ω_a × stroke
    (absorber minus site displacement) and the absorber's velocity.
damper (coefficient c between two sites, or a site and the ground)
    y = relative velocity (second minus first), u = force pushing them apart. Z = c, or, with
    a mounting of stiffness k_s in series (a Maxwell element), Z(s) = c k_s/(c s + k_s) with
    one state (the force in the element).
shunt (network of impedance Z_e(s) = R or R + L s across a piezoelectric strut)
    The strut (short-circuit stiffness k_s, free capacitance C, coupling k, blocked
    capacitance C_ε = C(1 − k²)) obeys f = k_s(Δ − d V) and Q = d k_s Δ + C_ε V with
    k² = d² k_s/C; the network imposes V = −Z_e(s) s Q. Eliminating Q and V, the strut's free
    extension δ = d V answers its extension Δ: δ = −Z(s) Δ with
    Z(s) = k² C s Z_e/(1 + C_ε s Z_e) = κ (1 − 1/(1 + C_ε s Z_e)), κ = k²/(1 − k²) — open
    circuit (Z_e → ∞) gives the open-circuit stiffness k_s/(1 − k²). y = Δ, u = δ (the plant's
    strut input). States: the network's charge (and current), scaled to metres. (N. W. Hagood
    & A. von Flotow, "Damping of structural vibrations with piezoelectric materials and passive
    electrical networks", J. Sound Vib. 146(2), 1991, from memory.)

:func:`passive_statespace` is the one place where the parts join the plant: the plant with a
port per part (:func:`passive_model`) closed through the block-diagonal elements. Everything
else — closed-loop modes, frequency responses, RMS, part loads, drift — is computed on that
augmented system or, for frequency responses, from the same ports with the exact element
response Z(jω) and the plant's modal sum. No sensor, no sampling, no delay, no roll-off.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np
from scipy.optimize import linear_sum_assignment

from dampctl.analysis.closedloop import (
    MatchedModes,
    block_diagonal,
    match_modes,
    match_repeated,
    modal_damping,
    open_loop_poles,
    repeated_clusters,
)
from dampctl.analysis.response import ClosedLoopFrf
from dampctl.errors import DesignError
from dampctl.model.components import Actuator, Sensor
from dampctl.model.passive import GROUND, Absorber, Damper, PassivePart, Shunt
from dampctl.model.plant import ModalPlant

__all__ = [
    "SPLIT_BAND",
    "PartElement",
    "PassiveModel",
    "PassiveModes",
    "PassiveSweep",
    "PortLoops",
    "pair_part_poles",
    "part_element",
    "part_label",
    "passive_frf",
    "passive_model",
    "passive_modes",
    "passive_statespace",
    "piezo_constants",
    "with_parts",
]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]

#: a tuned part's own pole counts with its mode when within this factor of the mode's
#: frequency (an absorber of mass ratio 0.1 splits its mode by about ±20 %)
SPLIT_BAND = 1.5


# ---------------------------------------------------------------------- elements
@dataclass(frozen=True)
class PartElement:
    """A part's own dynamics from its port motion y to its port input u = −(C x + D y).

    Attributes
    ----------
    matrices : tuple of ndarray
        (A, B, C, D), one input (port motion) and one output (minus the port input).
    load_row : tuple of ndarray
        (C_l, D_l): the part's load ℓ = C_l x + D_l y (absorber stroke in m, damper force in
        N, shunt voltage in V).
    load : str
        What the load is: ``stroke``, ``force`` or ``voltage``.
    load_unit : str
        Its SI unit.
    load_limit : float or None
        A limit on the load when the plant states one (a shunt's voltage: the strut's
        ``max_stroke_m`` over its extension per volt d).
    tuning_omega : float or None
        Frequency (rad/s) the part is tuned to (absorber, RL shunt), where its own pole lies.
    """

    matrices: Matrices
    load_row: tuple[np.ndarray, np.ndarray]
    load: str
    load_unit: str
    load_limit: float | None
    tuning_omega: float | None

    def response(self, s: np.ndarray) -> np.ndarray:
        """Z(s) at complex frequencies.

        Parameters
        ----------
        s : array_like of complex
            Laplace variable (rad/s).

        Returns
        -------
        ndarray of complex
            Z(s) = C (sI − A)⁻¹ B + D, same shape as ``s``.
        """
        return _siso_response(self.matrices, s)

    def load_response(self, s: np.ndarray) -> np.ndarray:
        """ℓ(s)/y(s): the load per unit port motion.

        Parameters
        ----------
        s : array_like of complex
            Laplace variable (rad/s).

        Returns
        -------
        ndarray of complex
        """
        A, B, _, _ = self.matrices
        return _siso_response((A, B, *self.load_row), s)


def _siso_response(system: Matrices, s) -> np.ndarray:
    A, B, C, D = system
    s = np.asarray(s, dtype=complex)
    if A.shape[0] == 0:
        return np.full(s.shape, complex(D[0, 0]))
    eye = np.eye(A.shape[0])
    flat = s.ravel()
    x = np.linalg.solve(flat[:, None, None] * eye - A, np.broadcast_to(B, (flat.size, *B.shape)))
    return ((C @ x)[:, 0, 0] + D[0, 0]).reshape(s.shape)


def piezo_constants(actuator: Actuator) -> tuple[float, float, float]:
    """Constants of a piezoelectric strut: κ = k²/(1 − k²), blocked capacitance, d.

    Parameters
    ----------
    actuator : Actuator
        A strut with ``capacitance_f`` (free capacitance C) and ``coupling_k`` (k).

    Returns
    -------
    kappa : float
        k²/(1 − k²): the open-circuit stiffening of the strut, as a fraction of k_s.
    blocked_capacitance_f : float
        C_ε = C (1 − k²) (F).
    extension_per_volt_m : float
        d = k √(C / k_s) (m/V), from k² = d² k_s / C.
    """
    if not actuator.piezo:
        raise DesignError(
            f"{actuator.name!r} is not a piezoelectric strut (it needs capacitance_f and "
            "coupling_k in the plant file)"
        )
    k2 = actuator.coupling_k**2
    kappa = k2 / (1.0 - k2)
    c_blocked = actuator.capacitance_f * (1.0 - k2)
    d = actuator.coupling_k * math.sqrt(actuator.capacitance_f / actuator.stiffness_n_per_m)
    return kappa, c_blocked, d


def part_element(plant: ModalPlant, part: PassivePart) -> PartElement:
    """The element of one passive part (module docstring).

    Parameters
    ----------
    plant : ModalPlant
        The plant (a shunt's strut constants come from it).
    part : Absorber, Damper or Shunt
        The part.

    Returns
    -------
    PartElement
    """
    if isinstance(part, Absorber):
        w, z, m = part.omega, part.damping, part.mass_kg
        c = part.damping_n_s_per_m
        # states [ω_a p, v_a], p = absorber − site displacement, v_a absorber velocity
        A = np.array([[0.0, w], [-w, -2.0 * z * w]])
        B = np.array([[-w], [2.0 * z * w]])
        C = np.array([[-m * w, -c]])
        D = np.array([[c]])
        load = (np.array([[1.0 / w, 0.0]]), np.zeros((1, 1)))
        return PartElement((A, B, C, D), load, "stroke", "m", None, w)
    if isinstance(part, Damper):
        c, ks = part.coefficient_n_s_per_m, part.stiffness_n_per_m
        if ks is None:
            empty = (np.zeros((0, 0)), np.zeros((0, 1)), np.zeros((1, 0)), np.array([[c]]))
            return PartElement(empty, (np.zeros((1, 0)), np.array([[c]])), "force", "N", None,
                               None)
        A, B = np.array([[-ks / c]]), np.array([[ks]])
        C, D = np.array([[1.0]]), np.zeros((1, 1))
        return PartElement((A, B, C, D), (C, D), "force", "N", None, None)
    if isinstance(part, Shunt):
        strut = plant.actuator(part.actuator)
        kappa, c_blocked, d = piezo_constants(strut)
        limit = None if strut.max_stroke_m is None else strut.max_stroke_m / d
        if part.kind == "R":
            tau = part.resistance_ohm * c_blocked
            A, B = np.array([[-1.0 / tau]]), np.array([[1.0 / tau]])
            C, D = np.array([[-kappa]]), np.array([[kappa]])
            tuning = None
        else:
            w = 1.0 / math.sqrt(part.inductance_h * c_blocked)
            z = 0.5 * part.resistance_ohm * math.sqrt(c_blocked / part.inductance_h)
            # states [x1, x2]: x1 = ω_e²/(s² + 2ζ_e ω_e s + ω_e²) Δ, balanced like a mode
            A = np.array([[0.0, w], [-w, -2.0 * z * w]])
            B = np.array([[0.0], [w]])
            C, D = np.array([[-kappa, 0.0]]), np.array([[kappa]])
            tuning = w
        # voltage V = δ / d = −(C x + D y) / d
        return PartElement((A, B, C, D), (-C / d, -D / d), "voltage", "V", limit, tuning)
    raise DesignError(f"not a passive part: {part!r}")


def part_label(part: PassivePart, index: int) -> str:
    """Short name of a part for tables: ``absorber 1 (mode 4, stage_x)``.

    Parameters
    ----------
    part : Absorber, Damper or Shunt
        The part.
    index : int
        Its position in the design (0-based).

    Returns
    -------
    str
    """
    if isinstance(part, Absorber):
        return f"absorber {index + 1} (mode {part.mode}, {part.site})"
    if isinstance(part, Damper):
        return f"damper {index + 1} ({part.between[0]}-{part.between[1]})"
    return f"{part.kind} shunt {index + 1} ({part.pair}, mode {part.mode})"


# ---------------------------------------------------------------------- ports
@dataclass(frozen=True)
class PortLoops:
    """The parts seen from their ports, in the form the loop code reads.

    It offers what :mod:`dampctl.analysis.response` and :mod:`dampctl.analysis.robustness`
    read from a design — ``actuators``, ``sensors``, ``response`` and
    ``statespace_matrices`` — so the ports' closed loop (which *is* the structure with its
    parts) is computed by the same, tested code as an active loop, with no delay and no
    roll-off.

    Attributes
    ----------
    actuators : tuple of str
        The port inputs (names in :attr:`PassiveModel.plant`).
    sensors : tuple of str
        The port outputs.
    elements : tuple of PartElement
        The parts' elements, one per port.
    """

    actuators: tuple[str, ...]
    sensors: tuple[str, ...]
    elements: tuple[PartElement, ...]

    def statespace_matrices(self) -> Matrices:
        """Block-diagonal (A, B, C, D) of the elements: ``u = −(C x + D y)``."""
        return block_diagonal([e.matrices for e in self.elements])

    def response(self, freq_hz: np.ndarray) -> np.ndarray:
        """Element responses Z(j2πf) on the diagonal, shape (n_ports, n_ports, n_freq).

        Parameters
        ----------
        freq_hz : array_like
            Frequencies (Hz).

        Returns
        -------
        ndarray of complex
        """
        s = 2j * np.pi * np.asarray(freq_hz, dtype=float).ravel()
        out = np.zeros((len(self.elements), len(self.elements), s.size), dtype=complex)
        for k, element in enumerate(self.elements):
            out[k, k] = element.response(s)
        return out


@dataclass(frozen=True)
class PassiveModel:
    """A plant with a port for every passive part, and the parts' elements.

    Attributes
    ----------
    plant : ModalPlant
        The plant with, for every part, a port input and output added (named ``~part<k>.u``
        / ``~part<k>.y``; a shunt's input is its strut). Modes, shapes and requirements are
        the original plant's.
    parts : tuple of Absorber, Damper or Shunt
        The parts, in order.
    ports : PortLoops
        Port names and elements.
    labels : tuple of str
        :func:`part_label` of each part.
    """

    plant: ModalPlant
    parts: tuple[PassivePart, ...]
    ports: PortLoops
    labels: tuple[str, ...]


def _free(name: str, taken) -> str:
    while name in taken:
        name = "~" + name
    return name


def passive_model(plant: ModalPlant, parts: Sequence[PassivePart]) -> PassiveModel:
    """The plant with the parts' ports added, and the parts' elements.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    parts : sequence of Absorber, Damper or Shunt
        The passive parts (their sites and struts must exist in the plant).

    Returns
    -------
    PassiveModel
    """
    parts = tuple(parts)
    if not parts:
        raise DesignError("no passive parts")
    sites = dict(plant.sites)
    taken = set(sites) | {a.name for a in plant.actuators} | {s.name for s in plant.sensors}
    taken |= {o.name for o in plant.outputs} | {d.name for d in plant.disturbances}
    actuators, sensors, inputs, outputs = [], [], [], []
    for k, part in enumerate(parts):
        y = _free(f"~part{k + 1}.y", taken)
        taken.add(y)
        if isinstance(part, Shunt):
            strut = plant.actuator(part.actuator)
            sensors.append(Sensor(y, "relative_displacement", between=strut.between))
            inputs.append(strut.name)
            outputs.append(y)
            continue
        u = _free(f"~part{k + 1}.u", taken)
        taken.add(u)
        if isinstance(part, Absorber):
            site = part.site
        else:
            site = _free(f"~part{k + 1}.port", taken)
            taken.add(site)
            sites[site] = _row(plant, part.between[1]) - _row(plant, part.between[0])
        actuators.append(Actuator(u, "force", site=site))
        sensors.append(Sensor(y, "velocity", site=site))
        inputs.append(u)
        outputs.append(y)
    ported = replace(
        plant,
        sites=sites,
        actuators=plant.actuators + tuple(actuators),
        sensors=plant.sensors + tuple(sensors),
    )
    elements = tuple(part_element(plant, p) for p in parts)
    return PassiveModel(
        plant=ported,
        parts=parts,
        ports=PortLoops(tuple(inputs), tuple(outputs), elements),
        labels=tuple(part_label(p, k) for k, p in enumerate(parts)),
    )


def with_parts(
    model: PassiveModel, plant: ModalPlant, parts: Sequence[PassivePart]
) -> PassiveModel:
    """The same ports with other part values (cheap: the ported plant is kept).

    Parameters
    ----------
    model : PassiveModel
        A model built by :func:`passive_model`.
    plant : ModalPlant
        The original plant (for the elements).
    parts : sequence of parts
        New parts, of the same kinds on the same sites / struts, in the same order.

    Returns
    -------
    PassiveModel
    """
    parts = tuple(parts)
    if len(parts) != len(model.parts):
        raise DesignError("with_parts: the parts must match the model's ports one for one")
    elements = tuple(part_element(plant, p) for p in parts)
    ports = PortLoops(model.ports.actuators, model.ports.sensors, elements)
    return replace(model, parts=parts, ports=ports)


def _row(plant: ModalPlant, site: str) -> np.ndarray:
    if site == GROUND and GROUND not in plant.sites:
        return np.zeros(plant.n_modes)
    return np.asarray(plant.sites[site], dtype=float)


# ---------------------------------------------------------------------- the augmentation
def passive_statespace(
    plant: ModalPlant,
    parts: Sequence[PassivePart] | PassiveModel,
    inputs: Sequence[str] = (),
    outputs: Sequence[str] = (),
    *,
    loads: bool = False,
) -> Matrices:
    """The structure with its passive parts: plant states, then every part's own states.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    parts : sequence of parts, or PassiveModel
        The passive parts (or their model, built once by :func:`passive_model`).
    inputs : sequence of str, optional
        External inputs: disturbances, or actuators (a force or extension added there).
    outputs : sequence of str, optional
        External outputs: performance outputs or sensors.
    loads : bool, optional
        Append each part's load (stroke, force or voltage) to the outputs.

    Returns
    -------
    tuple of ndarray
        (A, B, C, D) over the states ``[plant modes, part states]``.
    """
    model = parts if isinstance(parts, PassiveModel) else passive_model(plant, parts)
    ports = model.ports
    n_p = len(ports.actuators)
    A, B, C, D = model.plant.statespace_matrices(
        list(ports.actuators) + list(inputs), list(ports.sensors) + list(outputs)
    )
    Ae, Be, Ce, De = ports.statespace_matrices()
    Bu, Bw = B[:, :n_p], B[:, n_p:]
    Cy, Cz = C[:n_p], C[n_p:]
    Dyu, Dyw, Dzu, Dzw = D[:n_p, :n_p], D[:n_p, n_p:], D[n_p:, :n_p], D[n_p:, n_p:]
    # u = −(Ce xe + De y), y = Cy x + Dyu u + Dyw w  ⇒  u = E(−De Cy x − Ce xe − De Dyw w)
    E = np.linalg.inv(np.eye(n_p) + De @ Dyu)
    Ux, Ue, Uw = -E @ De @ Cy, -E @ Ce, -E @ De @ Dyw
    Yx, Ye, Yw = Cy + Dyu @ Ux, Dyu @ Ue, Dyw + Dyu @ Uw
    A_aug = np.block([[A + Bu @ Ux, Bu @ Ue], [Be @ Yx, Ae + Be @ Ye]])
    B_aug = np.vstack([Bw + Bu @ Uw, Be @ Yw])
    C_aug = np.hstack([Cz + Dzu @ Ux, Dzu @ Ue])
    D_aug = Dzw + Dzu @ Uw
    if loads:
        Cl = block_diagonal([(np.zeros((0, 0)), np.zeros((0, 1)), *e.load_row)
                             for e in ports.elements])
        Cl_x, Dl = Cl[2], Cl[3]  # ℓ = Cl_x xe + Dl y
        C_aug = np.vstack([C_aug, np.hstack([Dl @ Yx, Cl_x + Dl @ Ye])])
        D_aug = np.vstack([D_aug, Dl @ Yw])
    return A_aug, B_aug, C_aug, D_aug


# ---------------------------------------------------------------------- modes
@dataclass(frozen=True)
class PassiveModes:
    """Poles of the structure with its parts, matched to the plant's modes.

    A tuned part (absorber, RL shunt) splits its mode into two poles; the mode's row then holds
    the **less damped** of the two (the one that limits), and the other is listed with the
    part's own poles. A part whose own pole lies more than :data:`SPLIT_BAND` away from its
    mode's frequency has not split it and is left with the parts' poles.

    Attributes
    ----------
    matched : MatchedModes
        One pole per plant mode (as above); ``other_poles`` holds the parts' poles.
    part_poles : tuple of complex or None
        Each part's own pole (upper half plane; None for a part without an oscillating pole).
    """

    matched: MatchedModes
    part_poles: tuple[complex | None, ...]


def passive_modes(
    plant: ModalPlant, parts: Sequence[PassivePart] | PassiveModel
) -> PassiveModes:
    """Closed-loop poles of the structure with its parts, one row per plant mode.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    parts : sequence of parts, or PassiveModel
        The parts.

    Returns
    -------
    PassiveModes
    """
    model = parts if isinstance(parts, PassiveModel) else passive_model(plant, parts)
    A = passive_statespace(plant, model)[0]
    poles = np.linalg.eigvals(A)
    return pair_part_poles(plant, model, poles, state_matrix=A)


def pair_part_poles(
    plant: ModalPlant,
    model: PassiveModel,
    poles: np.ndarray,
    open_poles: np.ndarray | None = None,
    *,
    state_matrix: np.ndarray | None = None,
) -> PassiveModes:
    """Match poles to modes, find each tuned part's own pole, keep the less damped per mode.

    Parameters
    ----------
    plant : ModalPlant
        The plant (its open-loop poles anchor the matching).
    model : PassiveModel
        The parts and their elements (their tuning frequencies anchor the parts' poles).
    poles : array_like of complex
        Every pole of the structure with its parts (rad/s).
    open_poles : array_like of complex, optional
        The modes' open-loop poles to match against (default the plant's; a drifted plant's
        in a drift study).
    state_matrix : ndarray, optional
        The state matrix the poles are of (plant states first): with it, the poles of exactly
        repeated modes go to the shape directions by eigenvector
        (:func:`~dampctl.analysis.closedloop.match_repeated`).

    Returns
    -------
    PassiveModes
    """
    if open_poles is None:
        open_poles = open_loop_poles(plant.omegas, plant.dampings)
    matched = match_modes(open_poles, poles)
    clusters = repeated_clusters(open_poles) if state_matrix is not None else []
    if clusters:
        matched = match_repeated(matched, clusters, state_matrix)
    rest = np.asarray(matched.other_poles, dtype=complex)
    tuned = [k for k, e in enumerate(model.ports.elements) if e.tuning_omega]
    own: list[complex | None] = [None] * len(model.parts)
    taken = np.zeros(rest.size, dtype=bool)
    if tuned and rest.size:
        oscillating = rest.imag > 1e-9 * np.maximum(np.abs(rest), 1.0)
        targets = np.array([model.ports.elements[k].tuning_omega for k in tuned])
        safe = np.where(rest == 0, 1e-300, rest)
        cost = np.abs(np.log(safe[None, :] / (1j * targets[:, None])))
        cost[:, ~oscillating] = 1e6
        rows, cols = linear_sum_assignment(cost)
        for r, c in zip(rows, cols, strict=True):
            if oscillating[c]:
                own[tuned[r]] = complex(rest[c])
                taken[c] = True
    chosen = np.array(matched.poles, dtype=complex)
    others = list(rest[~taken])
    for k in tuned:
        pole, mode = own[k], model.parts[k].mode - 1
        if pole is None:
            continue
        if abs(math.log(abs(pole) / abs(open_poles[mode]))) > math.log(SPLIT_BAND):
            others.append(pole)  # tuned far from its mode: it did not split it
            continue
        _, z_part = modal_damping(np.array([pole]))
        _, z_mode = modal_damping(chosen[mode : mode + 1])
        if z_part[0] < z_mode[0]:
            others.append(chosen[mode])
            chosen[mode] = pole
        else:
            others.append(pole)
    omega, damping = modal_damping(chosen)
    others = np.array(others, dtype=complex)
    return PassiveModes(
        matched=MatchedModes(
            poles=chosen,
            freq_hz=omega / (2.0 * np.pi),
            damping=damping,
            other_poles=others[np.argsort(np.abs(others))],
            stable=matched.stable,
            max_real_part=matched.max_real_part,
        ),
        part_poles=tuple(own),
    )


# ---------------------------------------------------------------------- frequency responses
def passive_frf(
    plant: ModalPlant,
    parts: Sequence[PassivePart] | PassiveModel,
    freq_hz: np.ndarray,
    inputs: Sequence[str],
    outputs: Sequence[str],
) -> ClosedLoopFrf:
    """Responses of the structure with and without its parts (modal sum, exact elements).

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    parts : sequence of parts, or PassiveModel
        The parts.
    freq_hz : array_like
        Frequencies (Hz).
    inputs : sequence of str
        Disturbances or actuators (a force or extension added there).
    outputs : sequence of str
        Performance outputs or sensors.

    Returns
    -------
    ClosedLoopFrf
        ``open`` without the parts, ``closed`` with them; ``effort`` holds the parts' loads
        per input (n_parts, n_in, n_freq): stroke (m), force (N) or voltage (V); no sensor,
        so ``noise`` and ``effort_noise`` have no columns.
    """
    return PassiveSweep(plant, parts, freq_hz, inputs, outputs).frf()


class PassiveSweep:
    """Frequency responses with the parts, for many part values on the same ports (tuning).

    The plant's responses at the ports are computed once; each evaluation only closes the
    small port loop at every frequency with the elements' exact responses.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    parts : sequence of parts, or PassiveModel
        Parts that fix the ports (their values may change in :meth:`closed`).
    freq_hz : array_like
        Frequencies (Hz).
    inputs, outputs : sequence of str
        External inputs and outputs, as for :func:`passive_frf`.
    """

    def __init__(self, plant, parts, freq_hz, inputs, outputs) -> None:
        self.model = parts if isinstance(parts, PassiveModel) else passive_model(plant, parts)
        self.plant = plant
        self.freq_hz = np.asarray(freq_hz, dtype=float).ravel()
        self.inputs, self.outputs = tuple(inputs), tuple(outputs)
        ports = self.model.ports
        n = len(ports.actuators)
        G = self.model.plant.frf(
            self.freq_hz, list(ports.actuators) + list(inputs), list(ports.sensors) + list(outputs)
        )
        f = lambda x: np.moveaxis(x, -1, 0)  # noqa: E731  (…, n_f) -> (n_f, …)
        self._Gyu, self._Gyw = f(G[:n, :n]), f(G[:n, n:])
        self._Gzu, self._Gzw = f(G[n:, :n]), f(G[n:, n:])
        self._s = 2j * np.pi * self.freq_hz

    def _solve(self, parts):
        elements = [part_element(self.plant, p) for p in parts]
        n = len(elements)
        Z = np.zeros((self._s.size, n, n), dtype=complex)
        L = np.zeros((self._s.size, n, n), dtype=complex)
        for k, e in enumerate(elements):
            Z[:, k, k] = e.response(self._s)
            L[:, k, k] = e.load_response(self._s)
        # y = Gyw w + Gyu u, u = −Z y  ⇒  y = (I + Gyu Z)⁻¹ Gyw w
        Y = np.linalg.solve(np.eye(n)[None] + self._Gyu @ Z, self._Gyw)
        return Y, Z, L

    def closed(self, parts: Sequence[PassivePart] | None = None) -> np.ndarray:
        """|closed| is what tuning needs: z/w with the parts, shape (n_out, n_in, n_freq).

        Parameters
        ----------
        parts : sequence of parts, optional
            Part values on the same ports (default the parts given at construction).

        Returns
        -------
        ndarray of complex
        """
        parts = self.model.parts if parts is None else tuple(parts)
        Y, Z, _ = self._solve(parts)
        return np.moveaxis(self._Gzw - self._Gzu @ (Z @ Y), 0, -1)

    def frf(self, parts: Sequence[PassivePart] | None = None) -> ClosedLoopFrf:
        """All responses, open and closed, with the parts' loads.

        Parameters
        ----------
        parts : sequence of parts, optional
            Part values on the same ports (default the parts given at construction).

        Returns
        -------
        ClosedLoopFrf
        """
        parts = self.model.parts if parts is None else tuple(parts)
        Y, Z, L = self._solve(parts)
        back = lambda x: np.moveaxis(x, 0, -1)  # noqa: E731
        n_f = self.freq_hz.size
        return ClosedLoopFrf(
            freq_hz=self.freq_hz,
            inputs=self.inputs,
            outputs=self.outputs,
            open=back(self._Gzw),
            closed=back(self._Gzw - self._Gzu @ (Z @ Y)),
            noise=np.zeros((len(self.outputs), 0, n_f), dtype=complex),
            effort=back(L @ Y),
            effort_noise=np.zeros((len(parts), 0, n_f), dtype=complex),
        )
