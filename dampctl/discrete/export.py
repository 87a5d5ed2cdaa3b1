"""Export pipeline: discretize a design, quantize it when asked, verify the sampled loop.

:func:`export_design` is what ``dampctl export`` runs; the files are written by
:mod:`dampctl.discrete.writers`. Every realisation that runs on the target is held as a
:class:`~dampctl.discrete.sections.ParallelForm` (a loop in cascade form is a parallel form with one
branch), so the fixed-point coefficients, the verification and the C routine all see the same
structure.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

from dampctl.design import Design
from dampctl.discrete.equivalents import (
    DiscreteController,
    DiscretePath,
    discretize,
    paths_matrices,
)
from dampctl.discrete.fixedpoint import (
    DAMPING_TOLERANCE,
    FORMATS,
    FREQUENCY_TOLERANCE,
    QuantizedSection,
    cascade_peak_gains,
    quantize_cascade,
    rate_for_format,
)
from dampctl.discrete.sampledloop import DiscreteVerification, sampled_reference, verify_discrete
from dampctl.discrete.scaling import NORMS, LoopScaling, scale_form
from dampctl.discrete.sections import ParallelForm, _block_diagonal
from dampctl.errors import UsageError
from dampctl.model.plant import ModalPlant
from dampctl.model.summary import plant_summary

__all__ = ["ExportResult", "Realisation", "export_design", "modes_above_nyquist", "realisations"]

FIXED = ("none", "q15", "q31")


@dataclass(frozen=True)
class Realisation:
    """What runs on the target for one loop (or one path of a MIMO controller).

    Attributes
    ----------
    name : str
        The pair, or ``actuator<-sensor`` for a MIMO path.
    actuator, sensor : str
        Output and input.
    form : ParallelForm
        ``feedthrough + Σ gain_b · Π sections`` (float or rounded coefficients).
    sections : tuple of tuple of QuantizedSection
        Fixed-point sections per branch; empty when not quantized.
    peak_gains : tuple of tuple of float
        Per branch, the peak gain from the loop's input word (a fraction of the input full
        scale) to each section's output word, with the rounded coefficients
        (:func:`dampctl.discrete.fixedpoint.cascade_peak_gains`): 1 or a hair off it after
        scaling; empty when not quantized.
    scaling : LoopScaling or None
        The signal scaling (input full scale, output scale per branch, the norms behind them);
        None when not quantized.
    noise_rms : float
        RMS actuator-command noise (actuator units) from rounding each section output to the
        word; 0 when not quantized.
    coefficient_error_rms : float
        RMS actuator-command error (actuator units) from rounding the coefficients, for a white
        input spread uniformly over the full scale: X/√3 · RMS over frequency of
        |K_rounded − K|; 0 when not quantized.
    """

    name: str
    actuator: str
    sensor: str
    form: ParallelForm
    sections: tuple[tuple[QuantizedSection, ...], ...] = ()
    peak_gains: tuple[tuple[float, ...], ...] = ()
    scaling: LoopScaling | None = None
    noise_rms: float = 0.0
    coefficient_error_rms: float = 0.0


def modes_above_nyquist(plant: ModalPlant, modes, rate_hz: float) -> tuple[tuple[int, float], ...]:
    """Controlled modes at or above the Nyquist frequency of a sample rate.

    A loop sampled at ``rate_hz`` cannot act on a mode at ``f >= rate_hz / 2``: the mode
    aliases to a lower frequency and a filter tuned to it (PPF) cannot be realised (Shannon's
    sampling theorem; Franklin, Powell & Workman, *Digital Control of Dynamic Systems*, 1998).

    Parameters
    ----------
    plant : ModalPlant
    modes : iterable of int
        Mode numbers (1-based), e.g. a design's ``target_modes``.
    rate_hz : float
        Sample rate (Hz).

    Returns
    -------
    tuple of (int, float)
        (mode, frequency in Hz) of each mode at or above ``rate_hz / 2``.
    """
    nyquist = 0.5 * float(rate_hz)
    return tuple((m, plant.modes[m - 1].freq_hz) for m in modes
                 if 1 <= m <= plant.n_modes and plant.modes[m - 1].freq_hz >= nyquist)


def realisations(controller: DiscreteController) -> tuple[Realisation, ...]:
    """The float realisations of a discrete controller, loop by loop or path by path.

    Parameters
    ----------
    controller : DiscreteController
        The discretized controller.

    Returns
    -------
    tuple of Realisation
        The recommended form of each loop; the modal paths of a MIMO design (empty when it
        has none).
    """
    out = []
    for lp in controller.loops:
        form = ParallelForm(0.0, (lp.cascade,)) if lp.form == "cascade" else lp.parallel
        out.append(Realisation(lp.pair, lp.actuator, lp.sensor, form))
    for path in controller.paths:
        name = f"{path.actuator}<-{path.sensor}"
        out.append(Realisation(name, path.actuator, path.sensor, path.parallel))
    return tuple(out)


def _output_limit(plant: ModalPlant, actuator: str) -> float | None:
    act = next((a for a in plant.actuators if a.name == actuator), None)
    if act is None:
        return None
    return act.max_force_n if act.kind == "force" else act.max_stroke_m


def _coefficient_error(float_form: ParallelForm, rounded: ParallelForm, rate_hz: float,
                       input_full_scale: float) -> float:
    freq = np.linspace(0.0, 0.5 * rate_hz, 16385)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        delta = rounded.response(freq, rate_hz) - float_form.response(freq, rate_hz)
        value = float(input_full_scale / np.sqrt(3.0) * np.sqrt(np.mean(np.abs(delta) ** 2)))
    return value if np.isfinite(value) else float("inf")  # a pole rounded onto |z| = 1


def _quantized(
    real: Realisation,
    rate_hz: float,
    fmt: str,
    *,
    tolerance: float,
    frequency_tolerance: float,
    input_full_scale: float | None,
    output_limit: float | None,
    norm: str,
) -> Realisation:
    scaling = scale_form(
        real.form, input_full_scale=input_full_scale, output_limit=output_limit, norm=norm
    )
    scaled = scaling.form()
    rounded_rows, sections, peaks = [], [], []
    for b, branch in enumerate(scaled.branches):
        label = f"{real.name}, {branch.label or f'branch {b + 1}'}"
        if len(scaled.branches) == 1:
            label = real.name
        rounded, secs = quantize_cascade(
            branch,
            rate_hz,
            fmt=fmt,
            label=f"loop {label}",
            tolerance=tolerance,
            frequency_tolerance=frequency_tolerance,
        )
        rounded_rows.append(rounded.sos)
        sections.append(secs)
        peaks.append(tuple(float(g) for g in cascade_peak_gains(rounded.sos, rate_hz)))
    form = scaling.form(rounded_rows)
    return Realisation(
        real.name,
        real.actuator,
        real.sensor,
        form,
        tuple(sections),
        tuple(peaks),
        scaling=scaling,
        noise_rms=scaling.noise_rms(FORMATS[fmt]),
        coefficient_error_rms=_coefficient_error(
            real.form, form, rate_hz, scaling.input_full_scale
        ),
    )


def _advice(section: QuantizedSection, fmt: str, rate_hz: float) -> str:
    """What to do about a refused section: the other format, or the rate it would hold at."""
    if not section.stable or not section.before.complex_pair:
        return "use q31" if fmt == "q15" else "use floating point"
    limit = rate_for_format(
        section.before.freq_hz,
        section.before.damping,
        fmt,
        tolerance=section.tolerance,
        frequency_tolerance=section.frequency_tolerance,
    )
    other = "use q31" if fmt == "q15" else "use floating point"
    if limit < rate_hz:
        return f"{other}, or a sample rate of at most about {limit:.3g} Hz"
    return other


def _matrices(controller: DiscreteController, reals: tuple[Realisation, ...]):
    if controller.loops:
        return _block_diagonal([r.form.matrices() for r in reals])
    paths = [DiscretePath(r.actuator, r.sensor, r.form) for r in reals]
    return paths_matrices(paths, controller.actuators, controller.sensors)


@dataclass(frozen=True)
class ExportResult:
    """Discrete controller, fixed-point coefficients and the sampled-loop verification.

    Attributes
    ----------
    controller : DiscreteController
        Float discretization.
    fixed : {"none", "q15", "q31"}
        Fixed-point format.
    realisations : tuple of Realisation
        Float realisations (what the float C routine runs).
    fixed_realisations : tuple of Realisation
        Rounded realisations with their sections; empty without ``fixed``.
    verification : DiscreteVerification
        Sampled loop with the float realisation.
    fixed_verification : DiscreteVerification or None
        Sampled loop with the rounded coefficients.
    refused : tuple of str
        One message per refused fixed-point section.
    tolerance : float
        Damping tolerance used for the refusal.
    frequency_tolerance : float
        Frequency tolerance used for the refusal.
    scaling : {"linf", "l2"}
        Node norm of the fixed-point scaling.
    plant_summary : mapping or None
        :func:`~dampctl.model.summary.plant_summary` of the plant exported for, so that a
        report given the export can name what changed when the plant no longer matches.
    """

    controller: DiscreteController
    fixed: str
    realisations: tuple[Realisation, ...]
    fixed_realisations: tuple[Realisation, ...]
    verification: DiscreteVerification
    fixed_verification: DiscreteVerification | None
    refused: tuple[str, ...]
    tolerance: float
    frequency_tolerance: float = FREQUENCY_TOLERANCE
    scaling: str = "linf"
    plant_summary: Mapping[str, Any] | None = None

    @property
    def stable(self) -> bool:
        """The sampled loop is stable (float, and fixed point when quantized)."""
        fixed_ok = self.fixed_verification is None or self.fixed_verification.stable
        return self.verification.stable and fixed_ok

    @property
    def failures(self) -> tuple[str, ...]:
        """Why the export must not be used: refused sections, unstable sampled loops."""
        out = list(self.refused)
        v = self.verification
        if not v.stable:
            cont = "stable" if v.continuous_stable else "also unstable"
            out.append(
                f"the sampled closed loop is unstable (largest |z| = {v.max_pole_radius:.6f} at "
                f"{v.max_pole_freq_hz:.4g} Hz; the continuous loop is {cont})"
            )
        fv = self.fixed_verification
        if fv is not None and not fv.stable:
            out.append(
                f"the sampled closed loop with {self.fixed} coefficients is unstable "
                f"(largest |z| = {fv.max_pole_radius:.6f} at {fv.max_pole_freq_hz:.4g} Hz)"
            )
        return tuple(out)


def export_design(
    plant: ModalPlant,
    design: Design,
    rate_hz: float,
    *,
    method: Literal["tustin", "zoh"] = "tustin",
    prewarp: Literal["auto", "none"] | float = "auto",
    fixed: Literal["none", "q15", "q31"] = "none",
    tolerance: float = DAMPING_TOLERANCE,
    frequency_tolerance: float = FREQUENCY_TOLERANCE,
    input_range: float | dict[str, float] | None = None,
    scaling: Literal["linf", "l2"] = "linf",
) -> ExportResult:
    """Discretize, optionally quantize, and verify a design in the sampled loop.

    Parameters
    ----------
    plant : ModalPlant
        The plant the design was made for (checked by fingerprint).
    design : Design
        The design.
    rate_hz : float
        Sample rate (Hz).
    method : {"tustin", "zoh"}, optional
        Discretization method. Default ``"tustin"``.
    prewarp : {"auto", "none"} or float, optional
        Tustin prewarping (see :func:`dampctl.discrete.equivalents.discretize`). Default ``"auto"``.
    fixed : {"none", "q15", "q31"}, optional
        Fixed-point format of the coefficients. Default ``"none"``.
    tolerance : float, optional
        Largest relative damping change a rounded section may cause. Default 0.05.
    frequency_tolerance : float, optional
        Largest relative pole-frequency change a rounded section may cause. Default 0.002.
    input_range : float or dict of str to float, optional
        Fixed point: sensor units at full scale of the input word, for every loop or per loop
        (pair name, or ``actuator<-sensor`` for a MIMO path). Default: the input that asks the
        actuator for its stated limit (``max_force_n`` or, for a strut, ``max_stroke_m``) at
        the frequency of largest controller gain (:func:`dampctl.discrete.scaling.scale_form`).
    scaling : {"linf", "l2"}, optional
        Fixed point: node norm of the section scaling (Jackson 1970). Default ``"linf"``.

    Returns
    -------
    ExportResult

    Raises
    ------
    DesignError
        The design does not belong to the plant.
    UsageError
        Bad rate, method, prewarp or fixed-point option, or fixed point requested for a MIMO
        controller without a modal realisation.
    """
    design.check_plant(plant)
    if fixed not in FIXED:
        raise UsageError(f"fixed must be one of {', '.join(FIXED)}, got {fixed!r}")
    controller = discretize(design, rate_hz, method=method, prewarp=prewarp)
    reals = realisations(controller)
    reference = sampled_reference(plant, design, controller.rate_hz)
    verification = verify_discrete(
        plant, design, controller.rate_hz, _float_matrices(controller), reference=reference
    )
    fixed_reals: tuple[Realisation, ...] = ()
    fixed_verification = None
    refused: list[str] = []
    if fixed != "none":
        if not reals:
            raise UsageError(
                "fixed point needs second-order sections, and this MIMO controller has no "
                "modal realisation; export it in floating point (--fixed none)"
            )
        if scaling not in NORMS:
            raise UsageError(f"scaling must be one of {', '.join(NORMS)}, got {scaling!r}")
        ranges = input_range if isinstance(input_range, dict) else {}
        unknown = sorted(set(ranges) - {r.name for r in reals})
        if unknown:
            raise UsageError(
                f"input range given for {', '.join(unknown)}: not a loop of this design "
                f"(loops: {', '.join(r.name for r in reals)})"
            )
        fixed_reals = tuple(
            _quantized(
                r,
                controller.rate_hz,
                fixed,
                tolerance=tolerance,
                frequency_tolerance=frequency_tolerance,
                input_full_scale=ranges.get(r.name) if ranges else input_range,
                output_limit=_output_limit(plant, r.actuator),
                norm=scaling,
            )
            for r in reals
        )
        refused = [
            f"{s.reason}; {_advice(s, fixed, controller.rate_hz)}"
            for r in fixed_reals
            for b in r.sections
            for s in b
            if s.reason
        ]
        fixed_verification = verify_discrete(
            plant,
            design,
            controller.rate_hz,
            _matrices(controller, fixed_reals),
            reference=reference,
        )
    return ExportResult(
        controller=controller,
        fixed=fixed,
        realisations=reals,
        fixed_realisations=fixed_reals,
        verification=verification,
        fixed_verification=fixed_verification,
        refused=tuple(refused),
        tolerance=float(tolerance),
        frequency_tolerance=float(frequency_tolerance),
        scaling=scaling,
        plant_summary=plant_summary(plant),
    )


def _float_matrices(controller: DiscreteController):
    mats = controller.realisation_matrices()
    return tuple(np.asarray(m, dtype=float) for m in mats)
