"""Integral force feedback (IFF): an active strut fed back from its own force sensor.

Law and sign
    The strut's input is its free extension δ (m); its force sensor reads the tension
    F = k_s (bᵀx − δ) (:class:`dampctl.model.components.Sensor`). Preumont's IFF extends the strut
    in proportion to the integrated tension, δ = g F / (k_s s): then
    F = k_s bᵀx · s/(s + g) and the closed loop is [M s² + K* + k_s b bᵀ · s/(s + g)] x = 0,
    with K* the stiffness without the strut — a spring in series with a damper, which can only
    dissipate (Preumont, Dufour & Malekian, *J. Guidance, Control, and Dynamics* 15(2), 1992;
    from memory). In the convention u = −K(s) y of :mod:`dampctl.design` the controller is
    therefore **negative**:

        K(s) = −(g / k_s) · 1/(s + ω_c),

    with the leak ω_c (rad/s) turning the integrator into a low-pass so that the strut does
    not drift or saturate on sensor offsets at DC; ``leak_hz = 0`` is the pure integrator. The
    tests check that this sign damps and the opposite one does not.

Gain normalization
    ``gain`` and ``Loop.gain`` are Preumont's g in rad/s (dimensionless-in-time: the corner
    where the strut's series damper takes over); the branch gain in physical units is −g/k_s
    (m/N per second).

Achievable damping
    With the same g on every loop the closed loop above holds with b bᵀ summed over the struts, and
    for mode i with open-loop pole ω_i and zero z_i (natural frequency of the structure with the
    struts removed, z_i < ω_i) the single-mode model gives the maximum modal damping ξ_i,max = (ω_i
    − z_i)/(2 z_i) at g_i = ω_i √(ω_i/z_i) (Preumont, *Vibration Control of Active Structures*, 3rd
    ed. 2011, IFF, from memory; Preumont, Dufour & Malekian, J. Guidance, Control, and Dynamics
    15(2), 1992). The zeros are the transmission zeros of the loops, eig(A − B D⁻¹ C) (the strut
    force has the feedthrough D = −k_s), matched to the modes in order of frequency (removing
    stiffness lowers every natural frequency, Courant–Fischer). These values are reported per target
    mode; the search starts from them and refines the gains on the full model (all modes, leak,
    delay, roll-offs), loop by loop.
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

__all__ = ["DEFAULT_LEAK_FRACTION", "achievable_damping", "design"]

LAW = "iff"
#: default leak corner as a fraction of the lowest target mode's frequency (our choice: the
#: leak costs little damping a decade below the mode and still stops drift at DC)
DEFAULT_LEAK_FRACTION = 0.1


def achievable_damping(plant: ModalPlant, pairs: Sequence[str]) -> list[dict]:
    """Preumont's maximum damping of every mode with equal-gain IFF on the given struts.

    Parameters
    ----------
    plant : ModalPlant
        The plant.
    pairs : sequence of str
        Strut/force-sensor pairs.

    Returns
    -------
    list of dict
        Per mode (in mode order): ``mode`` (1-based), ``freq_hz``, ``zero_hz`` (structure
        with the struts removed), ``max_damping`` ξ_max = (ω − z)/(2z) and ``optimal_gain``
        g = ω√(ω/z) (rad/s); 0 and None where the struts do not see the mode.
    """
    found = [plant.pair(name) for name in pairs]
    A, B, C, D = plant.statespace_matrices([p.actuator for p in found], [p.sensor for p in found])
    try:
        zeros = np.linalg.eigvals(A - B @ np.linalg.solve(D, C))
    except np.linalg.LinAlgError:
        raise DesignRefused("the loops' force feedthrough is singular: no IFF zeros") from None
    magnitudes = np.sort(np.abs(zeros))[::2]
    order = np.argsort(plant.omegas)
    out: list[dict] = [{} for _ in range(plant.n_modes)]
    for rank, i in enumerate(order):
        w = float(plant.omegas[i])
        z = float(magnitudes[rank]) if rank < magnitudes.size else w
        useful = 0.0 < z < w * (1.0 - 1e-9)
        out[i] = {
            "mode": int(i + 1),
            "freq_hz": w / (2.0 * math.pi),
            "zero_hz": z / (2.0 * math.pi),
            "max_damping": (w - z) / (2.0 * z) if useful else 0.0,
            "optimal_gain": w * math.sqrt(w / z) if useful else None,
        }
    return out


def design(
    plant: ModalPlant,
    pairs: Sequence[str],
    *,
    modes: Sequence[int] | None = None,
    target_damping: float | None = None,
    gain: float | Sequence[float] | None = None,
    delay_s: float | None = None,
    leak_hz: float | None = None,
    refine: bool = True,
    report_margins: bool = True,
) -> Design:
    """Design integral force feedback loops on strut/force-sensor pairs.

    Parameters
    ----------
    plant : ModalPlant
        The plant (modes of the structure with the passive struts in place).
    pairs : sequence of str
        Pairs of a strut and its own force sensor, one loop each.
    modes : sequence of int, optional
        Target modes (1-based); default the plant's required modes, or all modes.
    target_damping : float, optional
        Damping ratio to reach on the target modes with the smallest gains; default the plant's
        ``min_damping``; None maximizes the smallest damping ratio.
    gain : float or sequence of float, optional
        Fixed IFF gain(s) g (rad/s, Preumont's normalization), one for all loops or one per
        loop, instead of tuning.
    delay_s : float, optional
        Loop delay (s) tuned against; default
        :func:`dampctl.analysis.closedloop.plant_loop_delay_s`.
    leak_hz : float, optional
        Leak corner ω_c/2π (Hz) of the integrator; default ``DEFAULT_LEAK_FRACTION`` × the
        lowest target mode; 0 gives the pure integrator.

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
        ``law="iff"``; ``Loop.gain`` is g (rad/s); ``info`` holds ``leak_hz``,
        ``achievable`` (Preumont's maximum per target mode beside the design's damping) and the
        tuning facts.

    Raises
    ------
    DesignRefused
        For a pair without a strut and its own force sensor, or a non-collocated pair.
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
    lowest_hz = float(np.min(plant.freqs_hz[list(request.targets)]))
    given = leak_hz is not None
    if leak_hz is None:
        leak_hz = DEFAULT_LEAK_FRACTION * lowest_hz
    leak_hz = float(leak_hz)
    if not math.isfinite(leak_hz) or leak_hz < 0.0:
        raise UsageError(f"leak must be >= 0 Hz, got {leak_hz}", field="leak_hz")
    leak = 2.0 * math.pi * leak_hz
    stiffness = [plant.actuator(p.actuator).stiffness_n_per_m for p in request.pairs]
    unit_loops = [_loop(p, 1.0, k, leak) for p, k in zip(request.pairs, stiffness, strict=True)]
    model = request.model
    unit = model.effective(stack_loops(unit_loops))
    names = [p.name for p in request.pairs]
    achievable = achievable_damping(plant, names)
    targeted = [achievable[i] for i in request.targets]

    fixed = loop_gains(gain, len(request.pairs))
    warnings: list[str] = []
    evaluations = 0
    limits: dict = {}
    if fixed is not None:
        gains, tuning, reached = fixed, "fixed gain", None
        if np.any(gains < 0):
            warnings.append("a negative IFF gain feeds energy in: the loop will not damp")
    else:
        optima = [a["optimal_gain"] for a in targeted if a["optimal_gain"]]
        optima = optima or [float(np.min(plant.omegas[list(request.targets)]))]
        low, high = math.log10(min(optima)), math.log10(max(optima))
        log_range = (low - 2.0, high + 1.5)
        objective = build_objective(request, unit_loops, np.ones(len(request.pairs)), log_range)
        request = objective.request
        result = search_gains(
            objective.scores,
            np.ones(len(request.pairs)),
            target=request.target_damping,
            refine_loops=refine,
            log_range=log_range,
            points_per_decade=8,
        )
        gains, evaluations = result.gains, result.evaluations
        tuning, reached = search_outcome(request.target_damping, result.reached)
        if not reached and refine:
            gains = objective.balance(gains)
        limits = constraint_info(objective, gains, reached)
    loops = [_loop(p, g, k, leak) for p, g, k in zip(request.pairs, gains, stiffness, strict=True)]
    final = model.evaluate_gains(unit, gains)
    for entry in targeted:
        entry["design_damping"] = float(final.damping[0, entry["mode"] - 1])
    info = {
        "gain_units": ["rad/s"] * len(loops),
        "gains": [float(g) for g in gains],
        "leak_hz": leak_hz,
        "leak_rule": _leak_rule(leak_hz, given, lowest_hz),
        "achievable": targeted,
        "achievable_rule": (
            "Preumont: max damping (w - z)/(2 z) at g = w sqrt(w/z), equal gain on every loop, "
            "z = natural frequency with the struts removed"
        ),
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


def _leak_rule(leak_hz: float, given: bool, lowest_hz: float) -> str:
    """The leak actually used, in words: given by the caller, or the default rule."""
    if given:
        if leak_hz == 0.0:
            return "0 Hz as given: pure integrator (no leak)"
        return f"{leak_hz:.4g} Hz as given ({leak_hz / lowest_hz:.3g} x lowest target mode)"
    return (
        f"{leak_hz:.4g} Hz = {DEFAULT_LEAK_FRACTION:g} x lowest target mode "
        f"({lowest_hz:.4g} Hz), the default"
    )


def _check_pair(plant: ModalPlant, pair: Pair) -> None:
    actuator = plant.actuator(pair.actuator)
    sensor = plant.sensor(pair.sensor)
    if actuator.kind == "strut" and sensor.kind == "force" and sensor.actuator != actuator.name:
        raise DesignRefused(
            f"IFF needs a collocated pair, but pair {pair.name!r} reads the force of strut "
            f"{sensor.actuator!r} while driving {actuator.name!r}: not collocated — use "
            "--law lqg (model-based) for non-collocated pairs",
            field=f"pairs.{pair.name}",
        )
    if actuator.kind != "strut" or sensor.kind != "force" or sensor.actuator != actuator.name:
        raise DesignRefused(
            f"IFF needs an active strut with its own force sensor, but pair {pair.name!r} is "
            f"{actuator.kind}/{sensor.kind}"
            + "; use --law dvf for a velocity sensor or --law ppf for a displacement sensor",
            field=f"pairs.{pair.name}",
        )
    check_collocated(plant, pair, LAW)


def _loop(pair: Pair, gain: float, stiffness: float, leak: float) -> Loop:
    label = "integral force feedback" if leak == 0.0 else "leaky integral force feedback"
    return Loop(
        pair=pair.name,
        actuator=pair.actuator,
        sensor=pair.sensor,
        gain=float(gain),
        branches=(
            Branch(-float(gain) / stiffness, sections=(Section((1.0,), (1.0, leak)),), label=label),
        ),
    )
