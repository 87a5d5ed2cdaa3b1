"""A loop with finite gain and phase margins, shared by the loop-shape and loop-figure tests."""

from dataclasses import replace
from functools import cache

import numpy as np

from dampctl.analysis.assessment import assess
from dampctl.design import Branch, Design, Loop, Section
from dampctl.model.components import Requirements
from dampctl.testing import sdof_plant


@cache
def loop_assessment():
    """Velocity feedback on an oscillator through a 2nd-order roll-off and a 0.2 ms delay."""
    plant = sdof_plant(2.0, 8e4, 8.0)
    plant = replace(plant, requirements=Requirements(loop_delay_s=2e-4))
    w = 2 * np.pi * 600.0
    roll = Section(num=(w * w,), den=(1.0, 1.2 * w, w * w))
    design = Design(
        law="dvf", plant_fingerprint=plant.fingerprint, actuators=("f",), sensors=("v",),
        target_modes=(1,), loops=(Loop("fv", "f", "v", 150.0, (Branch(150.0, (roll,)),)),),
        pairs=("fv",),
    )
    return assess(plant, design, samples=2)
