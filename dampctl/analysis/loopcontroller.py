"""The controller as the damping laws build it, evaluated as a product of its factors.

Every pole computation closes the loop through the design's controller K(s) between
first-order sensor and actuator roll-offs, with the loop delay as a cascade of [2/2] Padé
sections on each actuator channel (:func:`dampctl.analysis.closedloop.lag_elements`). As a
state space the delay alone has up to 24 states per channel; as a product,
K_eff(s) = R_a(s) · Δ(s) · K(s) · R_s(s), it costs a handful of operations per point, and
its derivative and tr((sI − A)⁻¹) follow factor by factor.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from dampctl.analysis.loopresponse import ControllerResponse

__all__ = ["LoopController", "controller_response"]

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]


@dataclass(frozen=True)
class LoopController:
    """A controller as every pole computation builds it: the design's K(s) between first-order
    sensor and actuator roll-offs, with the loop delay as [2/2] Padé sections on every actuator
    channel (:func:`dampctl.analysis.closedloop.lag_elements`).

    Its transfer matrix is evaluated as the product of those factors,
    K_eff(s) = R_a(s) · Δ(s) · K(s) · R_s(s), a handful of operations per point whatever the
    number of delay sections; :meth:`matrices` gives the same system as a state space.

    Parameters
    ----------
    base : tuple of ndarray
        (A, B, C, D) of the design's controller, ``u = −(C x + D y)``.
    delay_s : float, optional
        Loop delay (s) on every actuator channel.
    omega_ref : float or None, optional
        Frequency (rad/s) up to which the delay's phase is accurate: the delay is a cascade of
        :func:`~dampctl.analysis.closedloop.delay_sections` [2/2] sections; None: one Padé
        approximant of order ``pade_order``.
    pade_order : int, optional
        Order of the single approximant when ``omega_ref`` is None.
    actuator_bandwidth_hz, sensor_bandwidth_hz : tuple of float or None, optional
        First-order roll-off corner (Hz) of each actuator / sensor channel (None or absent:
        ideal).
    """

    base: Matrices
    delay_s: float = 0.0
    omega_ref: float | None = None
    pade_order: int = 2
    actuator_bandwidth_hz: tuple = ()
    sensor_bandwidth_hz: tuple = ()

    @classmethod
    def for_design(
        cls,
        plant,
        design,
        *,
        delay_s: float | None = None,
        roll_off: bool = True,
        pade_order: int | None = None,
        gain_scale: float = 1.0,
        actuator_bandwidth_hz: float | None = None,
        sensor_bandwidth_hz: float | None = None,
        omega_ref: float | None = None,
    ) -> LoopController:
        """The effective controller of a design on its plant, as
        :func:`~dampctl.analysis.closedloop.effective_controller` builds it.

        Parameters
        ----------
        plant : ModalPlant
            Supplies the stated roll-offs and the default delay.
        design : Design
            The design.
        delay_s : float, optional
            Loop delay (s); default the plant's
            (:func:`~dampctl.analysis.closedloop.plant_loop_delay_s`).
        roll_off : bool, optional
            Include the roll-offs stated in the plant file.
        pade_order : int, optional
            One Padé approximant of this order for the whole delay; default a cascade of [2/2]
            sections accurate up to ``omega_ref``.
        gain_scale : float, optional
            Factor on the whole controller.
        actuator_bandwidth_hz, sensor_bandwidth_hz : float, optional
            A corner (Hz) replacing the stated one on every actuator / sensor channel.
        omega_ref : float, optional
            Delay accuracy frequency (rad/s); default
            :func:`~dampctl.analysis.closedloop.reference_omega` of the plant.

        Returns
        -------
        LoopController
        """
        from dampctl.analysis.closedloop import plant_loop_delay_s, reference_omega

        A, B, C, D = design.statespace_matrices()
        base = (A, B, gain_scale * C, gain_scale * D)
        act = [plant.actuator(a).bandwidth_hz for a in design.actuators] if roll_off else []
        sen = [_sensor_corner(plant, s) for s in design.sensors] if roll_off else []
        if actuator_bandwidth_hz is not None:
            act = [actuator_bandwidth_hz] * len(design.actuators)
        if sensor_bandwidth_hz is not None:
            sen = [sensor_bandwidth_hz] * len(design.sensors)
        delay = plant_loop_delay_s(plant) if delay_s is None else float(delay_s)
        if pade_order is None:
            ref = reference_omega(plant) if omega_ref is None else float(omega_ref)
            return cls(base, delay, ref, 2, tuple(act), tuple(sen))
        return cls(base, delay, None, int(pade_order), tuple(act), tuple(sen))

    def matrices(self) -> Matrices:
        """The effective controller as a state space (A, B, C, D).

        Returns
        -------
        tuple of ndarray
        """
        from dampctl.analysis.closedloop import lag_elements

        return lag_elements(
            self.base,
            delay_s=self.delay_s,
            actuator_bandwidth_hz=self.actuator_bandwidth_hz,
            sensor_bandwidth_hz=self.sensor_bandwidth_hz,
            pade_order=self.pade_order,
            omega_ref=self.omega_ref,
        )

    def scaled(self, gains: np.ndarray) -> LoopController:
        """The same controller with its input k scaled by gains[k] (loop gains of a
        decentralized controller).

        Parameters
        ----------
        gains : array_like, shape (n_inputs,)
            Factor per controller input (sensor channel).

        Returns
        -------
        LoopController
        """
        A, B, C, D = self.base
        g = np.asarray(gains, dtype=float)
        return LoopController(
            (A, B * g[None, :], C, D * g[None, :]),
            self.delay_s,
            self.omega_ref,
            self.pade_order,
            tuple(self.actuator_bandwidth_hz),
            tuple(self.sensor_bandwidth_hz),
        )


class _FactoredResponse:
    """Response of a :class:`LoopController` as a product of its factors."""

    def __init__(self, controller: LoopController):
        from dampctl.analysis.closedloop import delay_sections, pade_matrices

        self.base = ControllerResponse(controller.base)
        p, q = self.base.D.shape  # actuators × sensors
        self.shape = (p, q)
        self.sensor = _corners(controller.sensor_bandwidth_hz, q)
        self.actuator = _corners(controller.actuator_bandwidth_hz, p)
        delay = float(controller.delay_s)
        if delay > 0.0 and controller.omega_ref is not None:
            self.count = delay_sections(delay, controller.omega_ref)
            section = pade_matrices(delay / self.count, 2) if self.count else None
        elif delay > 0.0:
            self.count = 1
            section = pade_matrices(delay, controller.pade_order)
        else:
            self.count, section = 0, None
        self.section = None if section is None else ControllerResponse(section)
        self._matrices = controller.matrices
        self._full = None
        parts = [self.base.poles]
        if self.section is not None:
            parts.append(np.tile(self.section.poles, self.count * p))
        parts.extend(-w * np.ones(1) for w in self.sensor + self.actuator if w is not None)
        self.poles = np.concatenate(parts) if parts else np.zeros(0, dtype=complex)
        self.n_states = self.poles.size

    @property
    def full(self) -> ControllerResponse:
        """The state-space form (for the controller-side determinant)."""
        if self._full is None:
            self._full = ControllerResponse(self._matrices())
        return self._full

    @property
    def state_space(self) -> Matrices:
        """(A, B, C, D) of the effective controller."""
        return self.full.state_space

    def response(self, s, *, derivative: bool = False, log_poles: bool = False):
        s = np.atleast_1d(np.asarray(s, dtype=complex)).ravel()
        K, dK, trace = self.base.response(s, derivative=True, log_poles=True)
        P = s.size
        p = self.shape[0]
        ra, dra = _lowpass(s, self.actuator)  # (P, p)
        rs, drs = _lowpass(s, self.sensor)  # (P, q)
        if self.section is not None:
            d1, dd1, tr1 = self.section.response(s, derivative=True, log_poles=True)
            d1, dd1 = d1[:, 0, 0], dd1[:, 0, 0]
            delay = d1**self.count
            ddelay = self.count * d1 ** (self.count - 1) * dd1
            trace = trace + self.count * p * tr1
        else:
            delay, ddelay = np.ones(P, dtype=complex), np.zeros(P, dtype=complex)
        left = ra * delay[:, None]  # (P, p)
        dleft = dra * delay[:, None] + ra * ddelay[:, None]
        out_K = left[:, :, None] * K * rs[:, None, :]
        out = [out_K]
        if derivative:
            out.append(
                dleft[:, :, None] * K * rs[:, None, :]
                + left[:, :, None] * dK * rs[:, None, :]
                + left[:, :, None] * K * drs[:, None, :]
            )
        if log_poles:
            for w in self.sensor + self.actuator:
                if w is not None:
                    trace = trace + 1.0 / (s + w)
            out.append(trace)
        return out[0] if len(out) == 1 else tuple(out)


def _sensor_corner(plant, name: str):
    return next((s.bandwidth_hz for s in plant.sensors if s.name == name), None)


def _corners(corners_hz, n: int) -> list:
    values = list(corners_hz) if corners_hz else [None] * n
    return [None if c is None else 2.0 * np.pi * float(c) for c in values]


def _lowpass(s: np.ndarray, corners: list) -> tuple[np.ndarray, np.ndarray]:
    """ω/(s + ω) per channel and its derivative (1 and 0 for an ideal channel)."""
    r = np.ones((s.size, len(corners)), dtype=complex)
    dr = np.zeros_like(r)
    for k, w in enumerate(corners):
        if w is not None:
            r[:, k] = w / (s + w)
            dr[:, k] = -w / (s + w) ** 2
    return r, dr


def controller_response(controller):
    """A response object (K, K', tr((sI − A)⁻¹), poles) for matrices or a LoopController.

    Parameters
    ----------
    controller : tuple of ndarray or LoopController or ControllerResponse
        The controller.

    Returns
    -------
    ControllerResponse or an object with the same methods
    """
    if isinstance(controller, LoopController):
        return _FactoredResponse(controller)
    if isinstance(controller, ControllerResponse | _FactoredResponse):
        return controller
    return ControllerResponse(controller)
