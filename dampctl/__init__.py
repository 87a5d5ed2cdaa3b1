"""dampctl: design active vibration damping from modal parameters.

Plant
    ModalPlant, Mode, Actuator, Sensor, Pair, Output, Disturbance, Requirements
        modal plant value objects; ``plant.statespace``, ``plant.frf``
    load_plant, parse_plant, dump_plant
        plant files (TOML)
    survey_plant
        participation of candidate pairs, near-repeated clusters, dominant modes
    size_pairs, SizingResult
        how many pairs, which ones, with cost, damping per cost and effort (dampctl.sizing)

Design
    Design, Loop, Branch, Section, load_design
        a damping design (``u = −K(s) y``) and its file form

Assessment
    assess, Assessment
        closed-loop modes, margins, robustness, RMS response, effort, requirements

Discrete time
    discretize, export_design
        second-order sections / state space at a sample rate, fixed point, verified in the
        sampled loop (dampctl.discrete, dampctl.export)

Damping laws
    dampctl.laws.dvf, .iff, .ppf, .lqg: ``design(plant, ...) -> Design``

Errors
    DampctlError and its subclasses (see :mod:`dampctl.errors`)
"""

from dampctl.assess import Assessment, assess
from dampctl.design import Branch, Design, Loop, Section, load_design
from dampctl.discrete import discretize
from dampctl.errors import (
    DampctlError,
    DesignError,
    DesignRefused,
    MissingFeatureError,
    OutputError,
    PlantError,
    PlantFileError,
    UsageError,
)
from dampctl.export import export_design
from dampctl.plant import (
    Actuator,
    Disturbance,
    ModalPlant,
    Mode,
    Output,
    Pair,
    Requirements,
    Sensor,
)
from dampctl.plantfile import dump_plant, load_plant, parse_plant
from dampctl.sizing import SizingResult, size_pairs
from dampctl.survey import survey_plant

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
    "MissingFeatureError",
    "ModalPlant",
    "Mode",
    "Output",
    "OutputError",
    "Pair",
    "PlantError",
    "PlantFileError",
    "Requirements",
    "Section",
    "Sensor",
    "SizingResult",
    "UsageError",
    "assess",
    "discretize",
    "dump_plant",
    "export_design",
    "load_design",
    "load_plant",
    "parse_plant",
    "size_pairs",
    "survey_plant",
]
