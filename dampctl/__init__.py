"""dampctl: design vibration damping of precision structures from modal parameters.

The package follows the job, one folder per stage; imports run one way, from the top of this
list to the bottom (a stage imports only the stages above it):

errors, fileio, progress
    the error tree, atomic writes, the progress bar (any stage may use them)
model/
    the plant: value objects, plant files, modal basis, survey
design
    the :class:`Design` value and its file form: the currency between stages
analysis/
    closed-loop modes, margins, robustness, response, effort, the assessment
laws/
    one damping law per module, their shared tuning, controller reduction
discrete/
    discrete equivalents, sections, fixed point, sampled-loop check, export files
sizing/
    how many pairs and which (tunes candidate sets with the laws)
report/
    figures and the HTML report
commands/
    the ``dampctl`` program, one module per subcommand
testing
    reference plants and checks for users' own tests

Plant
    ModalPlant, Mode, Actuator, Sensor, Pair, Output, Disturbance, Requirements, PartPrice
        modal plant value objects; ``plant.statespace``, ``plant.frf``
    load_plant, parse_plant, dump_plant
        plant files (TOML)
    survey_plant
        participation of candidate pairs, near-repeated clusters, dominant modes
    load_frf, MeasuredFRF, fit_modes, ModalFit
        measured FRFs (.npz, .csv) and the modes fitted to them (vector fitting with a
        stability chart, residual terms, driving-point scaling)
    compare_plant, PlantComparison
        a plant held against measured FRFs: modes, MAC, FRF error per channel

Sizing
    size_pairs, SizingResult
        how many pairs, which ones, with cost, damping per cost and effort

Design
    Design, Loop, Branch, Section, load_design
        a damping design (``u = −K(s) y``) and its file form
    design_from_statespace
        any linear controller (python-control ``StateSpace`` or arrays) as a design
        (``law = "custom"``)

Damping laws
    dampctl.laws.dvf, .iff, .ppf, .lqg: ``design(plant, ...) -> Design``

Assessment
    assess, Assessment
        closed-loop modes, margins, robustness, RMS response, effort, requirements
    closed_loop, signal_name
        the closed loop as a named python-control ``StateSpace``; names ``interconnect`` can
        address

Discrete time
    discretize, export_design
        second-order sections / state space at a sample rate, fixed point, verified in the
        sampled loop (:mod:`dampctl.discrete.equivalents`)
    simulate_move, simulate_disturbance
        time simulation, open loop and as the loop will run (:mod:`dampctl.discrete.simulate`)

Input shaping
    design_shaper, load_shaper
        ZV/ZVD/ZVDD/EI shapers for a plant's modes, and the shaper file

Figures (matplotlib; each returns what it drew, with its ``figure`` to show or save)
    plot_frf, plot_damping, plot_cumulative_rms, plot_third_octave
        an assessment: FRF (magnitude above phase), damping per mode, RMS, velocity spectrum
    plot_loop_gain, plot_loop_sensitivity, plot_nyquist, plot_root_locus
        a loop: Bode of L with crossovers and margins, |S| and |T|, Nyquist zoomed on −1,
        closed-loop poles in Hz with lines of constant damping
    plot_damping_and_cost, plot_mode_damping
        a sizing result
    plot_response, plot_forces, plot_moves, plot_sensitivity, plot_impulses
        simulations and input shapers
    plot_frf_overlay, plot_cost_result, plot_frf_match, plot_stability_chart
        several designs or options; a plant against measurement, a modal fit

Notebooks
    ``ModalPlant``, ``Design``, ``Assessment`` and ``SizingResult`` show a compact table
    (``_repr_html_``) and give ``to_frame()`` (pandas, optional) and ``to_dict()``

Errors
    DampctlError and its subclasses (see :mod:`dampctl.errors`)
"""

from dampctl.analysis.assessment import Assessment, assess
from dampctl.analysis.interconnect import closed_loop
from dampctl.design import Branch, Design, Loop, Section, load_design
from dampctl.discrete.equivalents import discretize
from dampctl.discrete.export import export_design
from dampctl.discrete.simulate import simulate_disturbance, simulate_move
from dampctl.errors import (
    DampctlError,
    DesignError,
    DesignRefused,
    MeasurementError,
    MissingFeatureError,
    OutputError,
    PlantError,
    PlantFileError,
    UsageError,
)
from dampctl.laws.custom import design_from_statespace
from dampctl.laws.shapers import load_shaper
from dampctl.laws.shaping import design_shaper
from dampctl.model.comparison import PlantComparison, compare_plant
from dampctl.model.measured import MeasuredFRF, load_frf
from dampctl.model.modalfit import ModalFit, fit_modes
from dampctl.model.plant import (
    Actuator,
    Disturbance,
    ModalPlant,
    Mode,
    Output,
    Pair,
    PartPrice,
    Requirements,
    Sensor,
    signal_name,
)
from dampctl.model.plantfile import dump_plant, load_plant, parse_plant
from dampctl.model.survey import survey_plant
from dampctl.report.figures import (
    plot_cumulative_rms,
    plot_damping,
    plot_frf,
    plot_loop_gain,
    plot_loop_sensitivity,
    plot_nyquist,
    plot_root_locus,
    plot_third_octave,
)
from dampctl.report.figures_compare import plot_cost_result, plot_frf_overlay
from dampctl.report.figures_measured import plot_frf_match, plot_stability_chart
from dampctl.report.figures_sizing import plot_damping_and_cost, plot_mode_damping
from dampctl.report.figures_time import (
    plot_forces,
    plot_impulses,
    plot_moves,
    plot_response,
    plot_sensitivity,
)
from dampctl.sizing.size import SizingResult, size_pairs

__version__ = "0.1.0"

__all__ = [
    "Actuator",
    "Assessment",
    "Branch",
    "DampctlError",
    "Design",
    "DesignError",
    "DesignRefused",
    "Disturbance",
    "Loop",
    "MeasuredFRF",
    "MeasurementError",
    "MissingFeatureError",
    "ModalFit",
    "ModalPlant",
    "Mode",
    "Output",
    "OutputError",
    "Pair",
    "PartPrice",
    "PlantComparison",
    "PlantError",
    "PlantFileError",
    "Requirements",
    "Section",
    "Sensor",
    "SizingResult",
    "UsageError",
    "assess",
    "closed_loop",
    "compare_plant",
    "design_from_statespace",
    "design_shaper",
    "discretize",
    "dump_plant",
    "export_design",
    "fit_modes",
    "load_design",
    "load_frf",
    "load_plant",
    "load_shaper",
    "parse_plant",
    "plot_cost_result",
    "plot_cumulative_rms",
    "plot_damping",
    "plot_damping_and_cost",
    "plot_forces",
    "plot_frf",
    "plot_frf_match",
    "plot_frf_overlay",
    "plot_impulses",
    "plot_loop_gain",
    "plot_loop_sensitivity",
    "plot_mode_damping",
    "plot_moves",
    "plot_nyquist",
    "plot_response",
    "plot_root_locus",
    "plot_sensitivity",
    "plot_stability_chart",
    "plot_third_octave",
    "signal_name",
    "simulate_disturbance",
    "simulate_move",
    "size_pairs",
    "survey_plant",
]
