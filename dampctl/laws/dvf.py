"""Direct velocity feedback (DVF): ``u = −g · v`` on each collocated pair.

Law
    Each loop feeds the collocated velocity back through a positive gain g (physical units:
    N/(m/s) for a force actuator, m/(m/s) = s for a strut's free extension), which is a viscous
    damper between the actuator's points. In the sign convention of :mod:`dampctl.design`
    (u = −K(s) y) the controller is K(s) = +g: a positive gain damps, since the generalized
    force on mode i is −g b_i c_i q_i' with b_i c_i > 0 for a collocated pair. On one mode of
    modal mass m it adds exactly g/(2 m ω_n) to the damping ratio (Balas, J. Guidance and Control
    2(3), 1979; from memory).

Sensors
    A velocity sensor (``velocity`` / ``relative_velocity``) is used as is. A displacement
    sensor (``displacement`` / ``relative_displacement``) goes through a band-limited
    differentiator K(s) = g · s ω_d/(s + ω_d), which is a velocity up to ω_d and a constant
    g·ω_d above it.

Roll-off
    Where the plant states a loop delay (``loop_delay_s``, ``sample_rate_hz``) or an actuator or
    sensor ``bandwidth_hz``, each velocity loop gets a first-order low-pass ω_r/(s + ω_r) so
    that the gain falls at the high modes where the delay has eaten the phase. Corner rule (our
    own, stated here): f_r = max(2 f_top, min(5 f_top, 1/(8 T))), with f_top the highest target
    mode and T the loop delay: five times the highest target mode (≈ 11° of lag there), pulled
    down to where the delay alone lags 45°, but never below twice the highest target mode. The
    differentiator of a displacement sensor uses the same corner (it is its roll-off). The
    tuning runs with the delay (Padé) and every roll-off in the loop.

Tuning
    Per-loop gains g_k = s · ĝ_k, normalized by what the pair sees: ĝ_k = 1 / max_i (b_ik c_ik
    / (2 ω_i)) over the target modes (so s = 1 would add a first-order damping ratio of 1 to the
    pair's best mode). The common scale s is scanned on a log grid with batched eigenvalues,
    refined, then each loop is refined against the others (a 3 × 3 pattern search over its own
    factor and a common factor on the rest, halving the pattern when a pass gains nothing).
    Without a target the search maximizes the smallest closed-loop damping ratio over the
    target modes (smallest gains within 0.1 % on a tie); with
    ``target_damping`` it takes the smallest gains reaching it (falling back to the maximum when
    it cannot be reached, and saying so).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from dampctl.design import Branch, Design, Loop, Section
from dampctl.errors import DesignRefused, UsageError
from dampctl.laws._assemble import finish, loop_gains, search_outcome, setup
from dampctl.laws._checks import check_collocated
from dampctl.laws._objective import build_objective, constraint_info, with_margins
from dampctl.laws._tuning import search_gains, stack_loops
from dampctl.model.plant import ModalPlant, Pair

__all__ = ["design", "roll_off_corner_hz"]

LAW = "dvf"
_VELOCITY = ("velocity", "relative_velocity")
_DISPLACEMENT = ("displacement", "relative_displacement")


def roll_off_corner_hz(top_mode_hz: float, delay_s: float) -> float:
    """Corner (Hz) of the DVF roll-off / differentiator: max(2 f, min(5 f, 1/(8 T))).

    Parameters
    ----------
    top_mode_hz : float
        Highest target mode (Hz).
    delay_s : float
        Loop delay T (s); 0 for none.

    Returns
    -------
    float
        The corner frequency (Hz).
    """
    corner = 5.0 * top_mode_hz
    if delay_s > 0.0:
        corner = min(corner, 1.0 / (8.0 * delay_s))
    return max(2.0 * top_mode_hz, corner)


def design(
    plant: ModalPlant,
    pairs: Sequence[str],
    *,
    modes: Sequence[int] | None = None,
    target_damping: float | None = None,
    gain: float | Sequence[float] | None = None,
    delay_s: float | None = None,
    roll_off_hz: float | None = None,
    refine: bool = True,
    report_margins: bool = True,
) -> Design:
    """Design direct velocity feedback loops on collocated pairs.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    pairs : sequence of str
        Pair names, one loop each (force or strut actuator; velocity or displacement sensor).
    modes : sequence of int, optional
        Target modes (1-based); default the plant's required modes, or all modes.
    target_damping : float, optional
        Damping ratio to reach on the target modes with the smallest gains; default the plant's
        ``min_damping``; None then maximizes the smallest damping ratio.
    gain : float or sequence of float, optional
        Fixed velocity gain(s) g (N·s/m for a force actuator, s for a strut), one for all loops
        or one per loop, instead of tuning.
    delay_s : float, optional
        Loop delay (s) tuned against; default
        :func:`dampctl.analysis.closedloop.plant_loop_delay_s`.
    roll_off_hz : float, optional
        Corner (Hz) of the roll-off / differentiator; default the corner rule (module
        docstring) when a delay or hardware bandwidth is stated; 0 disables the roll-off on
        velocity loops (a displacement sensor's differentiator then keeps the rule's corner).

    refine : bool, optional
        Refine the gains loop by loop after the common-scale search (default). False keeps
        the common scale only: about a third of the eigenvalue solves, for fast screening
        (sizing), at some loss of damping with several loops.
    report_margins : bool, optional
        Compute the finished design's margins into ``info`` (``margins``, ``disk_margin``,
        ``margin_requirements``; default). False skips them (sizing's unit designs).
    Returns
    -------
    Design
        ``law="dvf"``; ``Loop.gain`` is g in physical units; ``info`` holds the tuning facts
        (``roll_off_hz``, ``min_damping``, ``target_met``, ``warnings`` ...).

    Raises
    ------
    DesignRefused
        For a non-collocated pair or a sensor DVF cannot use.
    UsageError
        For a bad option value.
    """
    request = setup(
        plant,
        pairs,
        LAW,
        modes=modes,
        target_damping=target_damping,
        delay_s=delay_s,
        check_pair=lambda pair: _check_pair(plant, pair),
    )
    if roll_off_hz is not None and (not math.isfinite(roll_off_hz) or roll_off_hz < 0):
        raise UsageError(f"roll-off corner must be >= 0 Hz, got {roll_off_hz}", field="roll_off_hz")
    top_hz = float(np.max(plant.freqs_hz[list(request.targets)]))
    model = request.model
    hardware = any(f is not None for f in model.actuator_bandwidth_hz + model.sensor_bandwidth_hz)
    rule_hz = roll_off_corner_hz(top_hz, request.delay_s)
    if roll_off_hz is None:
        corner_hz = rule_hz if (request.delay_s > 0.0 or hardware) else None
    else:
        corner_hz = roll_off_hz or None
    kinds = [plant.sensor(p.sensor).kind for p in request.pairs]
    filters = [_filter(kind, corner_hz, roll_off_hz or rule_hz) for kind in kinds]
    unit_loops = [_loop(p, 1.0, f) for p, f in zip(request.pairs, filters, strict=True)]
    unit = model.effective(stack_loops(unit_loops))

    fixed = loop_gains(gain, len(request.pairs))
    warnings: list[str] = []
    limits: dict = {}
    if fixed is not None:
        gains, tuning, reached, evaluations = fixed, "fixed gain", None, 0
        if np.any(gains < 0):
            warnings.append("a negative velocity gain adds energy: the loop will not damp")
    else:
        base = _normalization(plant, request)
        objective = build_objective(request, unit_loops, base, (-4.0, 3.0))
        request = objective.request
        result = search_gains(
            objective.scores,
            base,
            target=request.target_damping,
            refine_loops=refine,
            log_range=(-4.0, 3.0),
        )
        gains, evaluations = result.gains, result.evaluations
        tuning, reached = search_outcome(request.target_damping, result.reached)
        if not reached and refine:
            gains = objective.balance(gains)
        limits = constraint_info(objective, gains, reached)
    loops = [_loop(p, g, f) for p, g, f in zip(request.pairs, gains, filters, strict=True)]
    final = model.evaluate_gains(unit, gains)
    units = [_gain_unit(plant, p) for p in request.pairs]
    info = {
        "gain_units": units,
        "gains": [float(g) for g in gains],
        "roll_off_hz": corner_hz,
        "roll_off_rule": "max(2 f_top, min(5 f_top, 1/(8 T)))",
        "differentiator_hz": (roll_off_hz or rule_hz)
        if any(k in _DISPLACEMENT for k in kinds)
        else None,
        "sensor_filters": [
            "band-limited differentiator"
            if kind in _DISPLACEMENT
            else ("first-order roll-off" if corner_hz else "none")
            for kind in kinds
        ],
        "evaluations": evaluations,
        **limits,
    }
    design = finish(
        request,
        LAW,
        loops,
        final,
        tuning=tuning,
        target_met=reached,
        info=info,
        warnings=warnings,
    )
    return with_margins(design, plant, request.delay_s) if report_margins else design


def _check_pair(plant: ModalPlant, pair: Pair) -> None:
    sensor = plant.sensor(pair.sensor)
    actuator = plant.actuator(pair.actuator)
    if sensor.kind not in _VELOCITY + _DISPLACEMENT:
        hint = (
            "use --law iff for a strut force sensor"
            if sensor.kind == "force"
            else ("use a velocity or displacement sensor")
        )
        raise DesignRefused(
            f"DVF needs a velocity or displacement sensor, but pair {pair.name!r} has a "
            f"{sensor.kind} sensor ({hint})",
            field=f"pairs.{pair.name}",
        )
    if actuator.kind not in ("force", "strut"):  # pragma: no cover - plant validation
        raise DesignRefused(f"DVF cannot drive a {actuator.kind} actuator")
    check_collocated(plant, pair, LAW)


def _filter(kind: str, corner_hz: float | None, differentiator_hz: float):
    if kind in _DISPLACEMENT:  # the differentiator always needs a corner (0 means the rule)
        w = 2.0 * math.pi * differentiator_hz
        return (Section((w, 0.0), (1.0, w)),)
    if corner_hz:
        w = 2.0 * math.pi * corner_hz
        return (Section((w,), (1.0, w)),)
    return ()


def _loop(pair: Pair, gain: float, sections) -> Loop:
    label = (
        "velocity feedback"
        if not sections
        else (
            "velocity feedback with band-limited differentiator"
            if len(sections[0].num) == 2
            else "velocity feedback with roll-off"
        )
    )
    return Loop(
        pair=pair.name,
        actuator=pair.actuator,
        sensor=pair.sensor,
        gain=float(gain),
        branches=(Branch(float(gain), sections=sections, label=label),),
    )


def _normalization(plant: ModalPlant, request) -> np.ndarray:
    objective = list(request.groups.modes) or list(request.targets)
    w = plant.omegas
    base = []
    for pair in request.pairs:
        residue = plant.input_row(pair.actuator) * plant.output_row(pair.sensor)[0]
        added = residue / (2.0 * w)
        best = np.max(added[objective]) if objective else 0.0
        if best <= 0.0:
            best = float(np.max(added))
        if best <= 0.0:
            raise DesignRefused(
                f"pair {pair.name!r} sees none of the plant's modes: a loop on it cannot damp",
                field=f"pairs.{pair.name}",
            )
        base.append(1.0 / best)
    return np.array(base)


def _gain_unit(plant: ModalPlant, pair: Pair) -> str:
    actuator = plant.actuator(pair.actuator)
    return "N/(m/s)" if actuator.kind == "force" else "m/(m/s)"
