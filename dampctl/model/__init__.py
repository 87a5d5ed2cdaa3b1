"""Stage 1, the plant: what the structure is, from what the engineer knows.

Takes modal data (a plant file, or values built in code) and gives a validated, immutable
:class:`~dampctl.model.plant.ModalPlant` with its state space and frequency response.

components
    value objects a plant is made of: Mode, Actuator, Sensor, Pair, Output, Disturbance,
    Requirements, PartPrice (the price of a kind of passive part)
passive
    passive parts added to the structure: Absorber, Damper, Shunt (what a passive design holds)
plant
    ModalPlant: validation, modal input/output rows, state space, FRF by the modal sum
modalbasis
    the FRF's modal basis per frequency block (numpy, or one loop compiled by numba)
plantfile
    TOML plant files in and out, errors naming the file and the field
measured
    measured FRFs (MeasuredFRF) and their files (.npz, .csv)
vectorfit
    vector fitting: common poles and residues of many frequency responses
stability
    stability chart over model order, choice of the physical poles
modalshapes
    modal constants, mode shapes, driving-point scaling
modalfit
    fit_modes: modes, residual terms and fit errors from measured FRFs (ModalFit)
comparison
    compare_plant: a plant held against measured FRFs
survey
    what each candidate pair sees (Hankel-singular-value shares), near-repeated clusters,
    output-dominant modes

Imports nothing above it (only :mod:`dampctl.errors`).
"""

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
)
from dampctl.model.plantfile import dump_plant, load_plant, parse_plant
from dampctl.model.survey import survey_plant

__all__ = [
    "Actuator",
    "Disturbance",
    "MeasuredFRF",
    "ModalFit",
    "ModalPlant",
    "Mode",
    "Output",
    "Pair",
    "PartPrice",
    "PlantComparison",
    "Requirements",
    "Sensor",
    "compare_plant",
    "dump_plant",
    "fit_modes",
    "load_frf",
    "load_plant",
    "parse_plant",
    "survey_plant",
]
