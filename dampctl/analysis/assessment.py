"""Assessment of a design on its plant: what the loop does, how robust it is, what it costs.

:func:`assess` gathers, for any design of any law (``u = −K(s) y``):

* the closed-loop modal table — every plant mode's open and closed frequency and damping,
  closed-loop poles matched to modes by assignment, and the peak reduction (dB) of the
  response at each performance output; the controller's own poles apart;
* loop-at-a-time margins at the plant input (:mod:`dampctl.analysis.margins`; phase margin = the
  phase lag that brings L to −180°), and for several loops the symmetric disk margins;
* robustness (:mod:`dampctl.analysis.robustness`): frequency drift, extra delay, hardware roll-off,
  spillover;
* random response and actuator effort (:mod:`dampctl.analysis.response`), with VC classes for
  velocity outputs;
* the plant file's requirements, each with what was achieved.

Delays: the plant's ``loop_delay_s`` plus a ZOH and one sample at ``sample_rate_hz`` are
included by default. Frequency-domain quantities (margins, FRFs, frequency integrals) use the
exact e^{−jωT}; poles (stability, damping, drift, locus, Lyapunov RMS) use a cascade of
[2/2] Padé sections accurate up to 1.5× the highest gain crossover (the result says how many).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from dampctl.analysis.closedloop import (
    closed_loop_matrix,
    match_modes,
    match_repeated,
    modal_damping,
    open_loop_poles,
    plant_loop_delay_s,
    reference_omega,
    repeated_clusters,
)
from dampctl.analysis.loopmodel import (
    GainLocus,
    delay_sections,
    gain_locus,
    loop_controller,
    loop_poles,
)
from dampctl.analysis.margins import (
    DiskMargins,
    LoopMargins,
    common_delay_margin,
    disk_margins,
    input_loops,
    loop_margins,
)
from dampctl.analysis.response import (
    ResponseResult,
    closed_loop_frf,
    integration_grid,
    random_response,
)
from dampctl.analysis.robustness import (
    BandwidthLimit,
    DelayLimit,
    DriftResult,
    SpilloverMode,
    drift_robustness,
    extra_delay_to_instability,
    roll_off_limit,
    spillover,
)
from dampctl.errors import UsageError

__all__ = ["Assessment", "Curves", "ModeRow", "RequirementCheck", "Robustness", "assess"]

PHASE_MARGIN_CONVENTION = (
    "phase margin = smallest phase lag that brings L(jw) to -180 deg at a gain crossover, "
    "(arg L + 180) mod 360; for velocity feedback this exceeds 180 deg where python-control "
    "reports the wrapped negative value"
)


@dataclass(frozen=True)
class ModeRow:
    """One row of the closed-loop modal table.

    Attributes
    ----------
    mode : int
        1-based mode number.
    open_freq_hz, open_damping : float
        Natural frequency (Hz) and damping ratio of the plant mode.
    closed_freq_hz, closed_damping : float
        |p|/2π (Hz) and −Re p/|p| of the matched closed-loop pole.
    peak_reduction_db : float or None
        Smallest reduction (dB), over the performance outputs that show the mode, of the
        response peak near the mode (positive = lower peak). An output shows the mode when
        its open-loop peak between the neighbouring modes lies within ±max(3ζ, 1 %) of the
        mode's frequency; None when no output does (the figure would measure a neighbour's
        flank).
    peak_reduction_by_output_db : dict of str to float
        The reduction of the largest response between the neighbouring modes, at each output
        (shown or not).
    """

    mode: int
    open_freq_hz: float
    open_damping: float
    closed_freq_hz: float
    closed_damping: float
    peak_reduction_db: float | None
    peak_reduction_by_output_db: dict


@dataclass(frozen=True)
class RequirementCheck:
    """One requirement of the plant file, with what the design achieves.

    Attributes
    ----------
    name : str
        ``stability``, ``min_damping``, ``min_gain_margin_db``, ``min_phase_margin_deg`` or
        ``max_rms.<output>``.
    required, achieved : float or bool
        The requirement and the achieved value.
    met : bool
        Whether it is met.
    """

    name: str
    required: Any
    achieved: Any
    met: bool

    @property
    def text(self) -> str:
        """One line: what is required, what is achieved, by how much it is missed."""
        if isinstance(self.required, bool):
            return f"{self.name}: required {self.required}, achieved {self.achieved}"
        gap = abs(float(self.achieved) - float(self.required))
        side = "short by" if not self.met else "margin"
        return (
            f"{self.name}: required {_fmt(self.required)}, achieved {_fmt(self.achieved)} "
            f"({side} {_fmt(gap)})"
        )


def _fmt(value) -> str:
    return f"{value:.4g}" if isinstance(value, float | int | np.floating) else str(value)


@dataclass(frozen=True)
class Robustness:
    """Robustness results.

    Attributes
    ----------
    drift : DriftResult
        Frequency drift of every mode.
    delay : DelayLimit or None
        Extra delay to instability (None for a passive design: no loop).
    actuator_bandwidth, sensor_bandwidth : BandwidthLimit or None
        Lowest first-order roll-off that keeps the loop stable (None for a passive design).
    spillover : tuple of SpilloverMode
        Modes above the design band.
    """

    drift: DriftResult
    delay: DelayLimit | None
    actuator_bandwidth: BandwidthLimit | None
    sensor_bandwidth: BandwidthLimit | None
    spillover: tuple[SpilloverMode, ...]


@dataclass(frozen=True)
class Curves:
    """Curves for figures.

    Attributes
    ----------
    freq_hz : ndarray
        Grid (Hz) of the FRFs and loops.
    frf_inputs, frf_outputs : tuple of str
        Inputs and outputs of the FRF overlay.
    frf_units : tuple of str
        SI unit of each FRF output (per N of input force, or per m of strut extension).
    frf_open, frf_closed : ndarray, shape (n_out, n_freq)
        Largest |H| over the inputs, open and closed loop.
    loops : ndarray of complex, shape (n_loops, n_freq)
        Loop-at-a-time return ratios at the plant input (exact delay).
    locus : GainLocus or None
        Closed-loop poles for the controller scaled 0–3× (31 full pole solves), or None when
        :func:`assess` was asked for no figure data (``figures=False``).
    frf_open_h, frf_closed_h : ndarray of complex, shape (n_out, n_in, n_freq), or None
        The FRFs themselves (magnitude and phase), each output from each input.
    """

    freq_hz: np.ndarray
    frf_inputs: tuple[str, ...]
    frf_outputs: tuple[str, ...]
    frf_units: tuple[str, ...]
    frf_open: np.ndarray
    frf_closed: np.ndarray
    loops: np.ndarray
    locus: GainLocus | None
    frf_open_h: np.ndarray | None = None
    frf_closed_h: np.ndarray | None = None


@dataclass(frozen=True)
class Assessment:
    """Everything :func:`assess` finds about a design on its plant.

    Attributes
    ----------
    plant_title, law : str
        For reports.
    stable : bool
        All closed-loop poles in the open left half plane (nominal, with delay and roll-offs).
    max_real_part : float
        Largest closed-loop real part (1/s).
    delay_s : float
        Loop delay used (s).
    pade_sections : int
        [2/2] Padé sections of the delay in pole computations.
    roll_off : bool
        Whether the stated roll-offs were included.
    target_modes : tuple of int
        Modes the damping requirement and drift check concern.
    modes : tuple of ModeRow
        Closed-loop modal table.
    controller_poles : ndarray of complex
        Closed-loop poles not matched to plant modes (controller, filters, roll-offs, delay).
    loops : tuple of LoopMargins
        Loop-at-a-time margins.
    pairs : tuple of str
        Name of each loop (pair, or actuator for MIMO controllers).
    disk : DiskMargins or None
        Symmetric disk margins (designs with several loops).
    robustness : Robustness
    response : ResponseResult
    requirements : tuple of RequirementCheck
    curves : Curves
    passive : bool
        True for a passive design (tmd, viscous, shunt): no loops, margins or delays; the
        effort entries are the parts' loads (:mod:`dampctl.analysis.passive_assessment`).
    parts : tuple
        The passive parts (empty for an active design).
    part_labels : tuple of str
        A short name of each part.
    notes : tuple of str
        Plain statements about what was not assessed and why.
    """

    plant_title: str
    law: str
    stable: bool
    max_real_part: float
    delay_s: float
    pade_sections: int
    roll_off: bool
    target_modes: tuple[int, ...]
    modes: tuple[ModeRow, ...]
    controller_poles: np.ndarray
    loops: tuple[LoopMargins, ...]
    pairs: tuple[str, ...]
    disk: DiskMargins | None
    robustness: Robustness
    response: ResponseResult
    requirements: tuple[RequirementCheck, ...]
    curves: Curves
    passive: bool = False
    parts: tuple = ()
    part_labels: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()

    @property
    def all_met(self) -> bool:
        """True when every requirement is met."""
        return all(r.met for r in self.requirements)

    @property
    def unmet(self) -> tuple[RequirementCheck, ...]:
        """The requirements not met."""
        return tuple(r for r in self.requirements if not r.met)

    def to_frame(self):
        """The closed-loop modal table as a pandas DataFrame (needs pandas)."""
        from dampctl.tables import assessment_rows, frame

        return frame(assessment_rows(self))

    def _repr_html_(self) -> str:
        from dampctl.tables import assessment_html

        return assessment_html(self)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dictionary (non-finite floats stay floats; see ``commands._common``)."""
        from dampctl.analysis.assess_json import assessment_dict

        return assessment_dict(self)


def assess(
    plant,
    design,
    *,
    delay_s: float | None = None,
    drift: float = 0.05,
    samples: int = 64,
    seed: int = 0,
    roll_off: bool = True,
    figures: bool = True,
    progress=None,
) -> Assessment:
    """Assess a design on its plant.

    Parameters
    ----------
    plant : ModalPlant
        The plant (its disturbances, outputs and requirements are used).
    design : Design
        The design; it must belong to the plant (:meth:`Design.check_plant`).
    delay_s : float, optional
        Loop delay (s); default the plant's ``loop_delay_s`` plus ZOH and one sample at its
        ``sample_rate_hz``. A passive design has no loop and no delay
        (:mod:`dampctl.analysis.passive_assessment`).
    drift : float, optional
        Largest relative shift of each natural frequency in the drift check (default 0.05).
    samples : int, optional
        Random drift samples besides the corners (default 64).
    seed : int, optional
        Seed of the random drift samples.
    roll_off : bool, optional
        Include the actuator and sensor roll-offs stated in the plant file.
    figures : bool, optional
        Compute the data only figures use (the root locus: 31 solves of every closed-loop
        pole). False leaves ``curves.locus`` None and changes no other result; ``dampctl
        assess`` passes False unless ``--plots`` asks for figures.
    progress : Progress, optional
        Advanced by one step per stage (8 stages).

    Returns
    -------
    Assessment
    """
    design.check_plant(plant)
    if not 0.0 <= drift < 1.0:
        raise UsageError(f"drift must be in [0, 1), got {drift!r}", field="drift")
    if delay_s is not None and not (np.isfinite(delay_s) and delay_s >= 0):
        raise UsageError(f"delay must be a finite number >= 0 s, got {delay_s!r}", field="delay_s")
    if samples < 0:
        raise UsageError(f"samples must be >= 0, got {samples!r}", field="samples")
    if design.passive:  # no loop: the structure with its parts
        from dampctl.analysis.passive_assessment import assess_passive

        return assess_passive(
            plant, design, drift=drift, samples=samples, seed=seed, progress=progress
        )
    step = progress.advance if progress is not None else (lambda n=1: None)
    delay = plant_loop_delay_s(plant) if delay_s is None else float(delay_s)
    targets = tuple(design.target_modes) or tuple(plant.requirements.modes)
    targets = targets or tuple(range(1, plant.n_modes + 1))

    margins = loop_margins(plant, design, delay_s=delay, roll_off=roll_off)
    common = common_delay_margin(plant, design, delay_s=delay, roll_off=roll_off)
    step()
    crossings = [f for m in margins for f in m.crossovers_hz] + list(common.crossovers_hz)
    top_target = max(plant.freqs_hz[m - 1] for m in targets)
    # the delay's phase is accurate up to 1.5 × the highest crossover, and at least up to the
    # reference every other pole computation uses (closedloop.reference_omega), so they agree
    omega_ref = max(
        2 * np.pi * max([1.5 * max(crossings, default=0.0), top_target]), reference_omega(plant)
    )
    ctrl = loop_controller(plant, design, delay_s=delay, omega_ref=omega_ref, roll_off=roll_off)
    poles = loop_poles(plant, design, ctrl)
    open_poles = open_loop_poles(plant.omegas, plant.dampings)
    matched = match_modes(open_poles, poles)
    clusters = repeated_clusters(open_poles)
    if clusters:  # exactly repeated modes: poles to shape directions by eigenvector
        mats = plant.statespace_matrices(design.actuators, design.sensors)
        matched = match_repeated(matched, clusters, closed_loop_matrix(mats, ctrl))
    step()

    multi = len(design.actuators) > 1
    disk = disk_margins(plant, design, delay_s=delay, roll_off=roll_off) if multi else None
    if disk is not None and not matched.stable:  # a disk margin means nothing for an unstable loop
        disk = replace(disk, alpha=0.0, gain_margin_db=0.0, phase_margin_deg=0.0)
    drift_result = drift_robustness(
        plant, design, ctrl, targets, drift=drift, samples=samples, seed=seed
    )
    step()
    delay_limit = extra_delay_to_instability(
        plant,
        design,
        delay_s=delay,
        delay_margin_s=common.delay_s,
        omega_ref=omega_ref,
        roll_off=roll_off,
    )
    step()
    bandwidth = [
        roll_off_limit(plant, design, which, delay_s=delay, omega_ref=omega_ref, roll_off=roll_off)
        for which in ("actuator", "sensor")
    ]
    step()
    robust = Robustness(
        drift=drift_result,
        delay=delay_limit,
        actuator_bandwidth=bandwidth[0],
        sensor_bandwidth=bandwidth[1],
        spillover=spillover(plant, matched, targets),
    )

    grid = integration_grid(plant, design, poles)
    response = random_response(plant, design, ctrl, delay_s=delay, roll_off=roll_off, freq_hz=grid)
    step()
    frf_in = tuple(d.name for d in plant.disturbances) or tuple(design.actuators)
    frf_out = tuple(o.name for o in plant.outputs) or tuple(design.sensors)
    frf = closed_loop_frf(plant, design, grid, frf_in, frf_out, delay_s=delay, roll_off=roll_off)
    mag_open = np.max(np.abs(frf.open), axis=1)
    mag_closed = np.max(np.abs(frf.closed), axis=1)
    rows = _mode_rows(plant, matched, grid, frf_out, mag_open, mag_closed)
    step()
    locus = (
        gain_locus(plant, design, delay_s=delay, omega_ref=omega_ref, roll_off=roll_off)
        if figures
        else None
    )
    loops_curve = input_loops(plant, design, grid, delay_s=delay, roll_off=roll_off)
    step()
    requirements = _requirements(plant, matched, margins, response, targets)
    return Assessment(
        plant_title=plant.title,
        law=design.law,
        stable=matched.stable,
        max_real_part=matched.max_real_part,
        delay_s=delay,
        pade_sections=delay_sections(delay, omega_ref),
        roll_off=bool(roll_off),
        target_modes=targets,
        modes=rows,
        controller_poles=matched.other_poles,
        loops=margins,
        pairs=(
            tuple(design.pairs)
            if len(design.pairs) == len(design.actuators)
            else tuple(design.actuators)
        ),
        disk=disk,
        robustness=robust,
        response=response,
        requirements=requirements,
        curves=Curves(
            freq_hz=grid,
            frf_inputs=frf_in,
            frf_outputs=frf_out,
            frf_units=tuple(_unit(plant, name) for name in frf_out),
            frf_open=mag_open,
            frf_closed=mag_closed,
            loops=loops_curve,
            locus=locus,
            frf_open_h=frf.open,
            frf_closed_h=frf.closed,
        ),
    )


def _unit(plant, name: str) -> str:
    if any(o.name == name for o in plant.outputs):
        return plant.output(name).unit
    return plant.sensor(name).unit


def _mode_rows(plant, matched, grid, outputs, mag_open, mag_closed) -> tuple[ModeRow, ...]:
    """Modal table; the peak of mode i is sought between the geometric means with its
    neighbours' frequencies (modes sorted by frequency)."""
    freqs = plant.freqs_hz
    order = np.argsort(freqs)
    sorted_f = freqs[order]
    mids = np.sqrt(sorted_f[1:] * sorted_f[:-1])
    lower = np.concatenate([[0.0], mids])
    upper = np.concatenate([mids, [np.inf]])
    rows = []
    for rank, k in enumerate(order):
        window = (grid >= lower[rank]) & (grid <= upper[rank])
        by_output, showing = {}, []
        # an output shows the mode when its open-loop peak in the window lies on the mode's
        # resonance (within ±max(3 ζ, 1 %) of its frequency), not on a neighbour's flank
        band = max(3.0 * float(plant.dampings[k]), 0.01)
        f_window = grid[window]
        # modes at exactly the same frequency share one peak: an output shows mode k only when
        # its shape on k is not negligible next to the others of that frequency
        twins = np.flatnonzero(np.abs(freqs - freqs[k]) <= 1e-9 * freqs[k])
        if np.any(window):
            for o, name in enumerate(outputs):
                if twins.size > 1:
                    row = np.abs(plant.output_row(name)[0])
                    if row[k] < 1e-3 * np.max(row[twins]):
                        continue
                peak_open = np.max(mag_open[o, window])
                peak_closed = np.max(mag_closed[o, window])
                if peak_open > 0 and peak_closed > 0:
                    by_output[name] = float(20 * np.log10(peak_open / peak_closed))
                    at = f_window[int(np.argmax(mag_open[o, window]))]
                    if abs(at / freqs[k] - 1.0) <= band:
                        showing.append(name)
        rows.append((k, by_output, showing))
    rows.sort(key=lambda r: r[0])
    _, dampings = modal_damping(matched.poles)
    return tuple(
        ModeRow(
            mode=int(k) + 1,
            open_freq_hz=float(freqs[k]),
            open_damping=float(plant.dampings[k]),
            closed_freq_hz=float(matched.freq_hz[k]),
            closed_damping=float(dampings[k]),
            peak_reduction_db=min(by[n] for n in showing) if showing else None,
            peak_reduction_by_output_db=by,
        )
        for k, by, showing in rows
    )


def _requirements(plant, matched, margins, response, targets) -> tuple[RequirementCheck, ...]:
    req = plant.requirements
    out = [RequirementCheck("stability", True, bool(matched.stable), bool(matched.stable))]
    if req.min_damping is not None:
        modes = req.modes or targets
        achieved = float(min(matched.damping[m - 1] for m in modes))
        out.append(
            RequirementCheck("min_damping", req.min_damping, achieved, achieved >= req.min_damping)
        )
    if req.min_gain_margin_db is not None:
        achieved = min((m.gain_margin_db for m in margins), default=np.inf)
        ok = achieved >= req.min_gain_margin_db and matched.stable
        out.append(RequirementCheck("min_gain_margin_db", req.min_gain_margin_db, achieved, ok))
    if req.min_phase_margin_deg is not None:
        achieved = min((m.phase_margin_deg for m in margins), default=np.inf)
        ok = achieved >= req.min_phase_margin_deg and matched.stable
        out.append(RequirementCheck("min_phase_margin_deg", req.min_phase_margin_deg, achieved, ok))
    by_name = {o.output: o for o in response.outputs}
    for name, limit in req.max_rms.items():
        achieved = by_name[name].closed_rms if matched.stable else np.inf
        out.append(RequirementCheck(f"max_rms.{name}", limit, achieved, achieved <= limit))
    return tuple(out)
