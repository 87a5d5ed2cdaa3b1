"""The closed loop as a python-control ``StateSpace`` with names ``interconnect`` can use.

For users who go on in python-control (a disturbance-to-output Bode plot, a step, their own
``interconnect`` with a reference filter): the plant with the design's controller closed as
u = −K y, the loop delay as the same [2/2] Padé cascade every pole computation of dampctl uses
and the hardware roll-offs the plant file states, both optional. Signal names are identifiers
(:func:`dampctl.model.plant.signal_name`).
"""

from __future__ import annotations

from collections.abc import Sequence

from dampctl.analysis.closedloop import effective_controller
from dampctl.analysis.response import closed_loop_statespace
from dampctl.errors import UsageError
from dampctl.model.plant import signal_name

__all__ = ["closed_loop"]


def closed_loop(
    plant,
    design,
    *,
    inputs: Sequence[str] | None = None,
    outputs: Sequence[str] | None = None,
    delay_s: float | None = None,
    roll_off: bool = True,
):
    """The plant with the design's controller closed, as a named python-control system.

    Parameters
    ----------
    plant : ModalPlant
        The plant (the design must belong to it).
    design : Design
        The design (any law; a discrete custom controller enters as its continuous bilinear
        equivalent).
    inputs : sequence of str, optional
        External inputs: disturbance names (in the disturbance's unit) or actuator names (a force
        or elongation added at that actuator). Default: the plant's disturbances, or, without
        any, the design's actuators. Sensor noise inputs ``<sensor>_noise`` (sensor units,
        added to each sensor the controller reads) always follow.
    outputs : sequence of str, optional
        Performance outputs or sensors. Default: the plant's outputs, or, without any, the
        design's sensors. The actuator commands (named after the actuators) always follow.
    delay_s : float, optional
        Loop delay (s) as a Padé cascade; default the plant's loop delay plus 1.5 samples at its
        sample rate (as ``assess``); 0 for none.
    roll_off : bool, optional
        Include the actuator and sensor roll-offs the plant file states. Default True.

    Returns
    -------
    control.StateSpace
        States: the plant's modal states, then the controller's (with the delay and roll-off
        states); inputs ``inputs`` then ``<sensor>_noise``; outputs ``outputs`` then the
        actuator commands.

    Raises
    ------
    DesignError
        The design does not belong to the plant.
    UsageError
        An unknown input or output name.
    """
    import control

    design.check_plant(plant)
    if inputs is None:
        inputs = [d.name for d in plant.disturbances] or list(design.actuators)
    if outputs is None:
        outputs = [o.name for o in plant.outputs] or list(design.sensors)
    known_in = {*(d.name for d in plant.disturbances), *(a.name for a in plant.actuators)}
    known_out = {*(o.name for o in plant.outputs), *(s.name for s in plant.sensors)}
    bad = [n for n in inputs if n not in known_in] + [n for n in outputs if n not in known_out]
    if bad:
        raise UsageError(f"unknown input or output name(s): {', '.join(map(repr, bad))}")
    controller = effective_controller(plant, design, delay_s=delay_s, roll_off=roll_off)
    A, B, C, D = closed_loop_statespace(plant, design, controller, list(inputs), list(outputs))
    return control.ss(
        A,
        B,
        C,
        D,
        inputs=[signal_name(n) for n in inputs]
        + [signal_name(f"{s}_noise") for s in design.sensors],
        outputs=[signal_name(n) for n in outputs] + [signal_name(a) for a in design.actuators],
        name=signal_name(f"{plant.title or 'plant'}_{design.law}_closed_loop"),
    )
