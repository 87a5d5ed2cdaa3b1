"""The law's controller as a product of its factors: against its state space solved densely."""

import numpy as np
import pytest
from repo import ROOT
from responsehelpers import POINTS, close, dense_response, law_design

from dampctl.analysis.closedloop import effective_controller
from dampctl.analysis.loopcontroller import LoopController, controller_response
from dampctl.laws import dvf
from dampctl.model.plantfile import load_plant


@pytest.fixture(scope="module")
def stage():
    return load_plant(ROOT / "plants" / "scanning_stage.toml")


@pytest.fixture(scope="module")
def truss():
    return load_plant(ROOT / "plants" / "light_truss.toml")


@pytest.mark.parametrize("law", ["dvf", "iff", "ppf", "lqg"])
def test_factored_response_is_the_state_space(stage, truss, law):
    plant, design = law_design(stage, truss, law)
    matrices = effective_controller(plant, design)
    loop = LoopController.for_design(plant, design)
    # the same state space as every pole computation builds ...
    assert all(np.array_equal(a, b) for a, b in zip(loop.matrices(), matrices, strict=True))
    # ... and the same transfer matrix, derivative and tr((sI − A)⁻¹) from the factors
    K, dK, trace = controller_response(loop).response(POINTS, derivative=True, log_poles=True)
    K_ref, dK_ref, trace_ref = dense_response(matrices, POINTS)
    assert close(K, K_ref, 1e-9)
    assert close(dK, dK_ref, 1e-8)
    assert np.allclose(trace, trace_ref, rtol=1e-9)


def test_single_pade_approximant(stage):
    design = dvf.design(stage, ["vx1"], gain=50.0)
    loop = LoopController.for_design(stage, design, delay_s=4e-4, pade_order=4)
    K = controller_response(loop).response(POINTS)
    assert close(K, dense_response(loop.matrices(), POINTS)[0], 1e-9)


def test_scaled_controller_scales_each_input(stage):
    design = dvf.design(stage, ["vx1", "vy2"], gain=1.0)
    loop = LoopController.for_design(stage, design)
    scaled = controller_response(loop.scaled([2.0, 5.0])).response(POINTS)
    base = controller_response(loop).response(POINTS)
    assert np.allclose(scaled, base * np.array([2.0, 5.0])[None, None, :], rtol=1e-12)
