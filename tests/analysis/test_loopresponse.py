"""Loop transfer matrices at complex s: against the state space solved densely (numpy)."""

import numpy as np
import pytest
from repo import ROOT
from responsehelpers import POINTS, close, dense_response, law_design

from dampctl.analysis.closedloop import effective_controller
from dampctl.analysis.loopresponse import ControllerResponse, ModalChannels
from dampctl.model.plantfile import load_plant


@pytest.fixture(scope="module")
def stage():
    return load_plant(ROOT / "plants" / "scanning_stage.toml")


@pytest.fixture(scope="module")
def truss():
    return load_plant(ROOT / "plants" / "light_truss.toml")


@pytest.mark.parametrize("which", ["velocity", "displacement", "strut force"])
def test_plant_response_matches_state_space(stage, truss, which):
    # the modal sum against C (sI − A)⁻¹ B + D of ModalPlant.statespace_matrices, solved densely
    plant, inputs, outputs = {
        "velocity": (stage, ["coil_x1", "coil_y2"], ["vel_x1", "vel_y2"]),
        "displacement": (stage, ["coil_x1", "coil_y1"], ["gap_x1", "gap_y1"]),
        "strut force": (truss, ["strut_1", "strut_2"], ["load_1", "load_2"]),
    }[which]
    channels = ModalChannels.from_plant(plant, inputs, outputs)
    G, dG, dlog = channels.response(POINTS, derivative=True, log_poles=True)
    G_ref, dG_ref, trace = dense_response(plant.statespace_matrices(inputs, outputs), POINTS)
    assert close(G, G_ref, 1e-9)
    assert close(dG, dG_ref, 1e-8)
    assert np.allclose(dlog, trace, rtol=1e-10)


def test_plant_response_on_the_axis_is_the_frf(stage):
    # the same modal sum as ModalPlant.frf on s = jω
    acts, sens = ["coil_x1", "coil_y1"], ["vel_x1", "vel_y1"]
    freq = np.array([50.0, 222.85, 900.0])
    channels = ModalChannels.from_plant(stage, acts, sens)
    G = channels.response(2j * np.pi * freq)
    H = stage.frf(freq, acts, sens)
    assert np.allclose(np.moveaxis(H, 2, 0), G, rtol=1e-12, atol=0)


@pytest.mark.parametrize("law", ["dvf", "iff", "ppf", "lqg"])
def test_controller_response_matches_dense(stage, truss, law):
    # block-by-block evaluation against the dense solve; the LQG controller with its delay
    # sections is one large block (forward substitution over its strongly connected parts)
    plant, design = law_design(stage, truss, law)
    matrices = effective_controller(plant, design)
    K, dK, trace = ControllerResponse(matrices).response(POINTS, derivative=True, log_poles=True)
    K_ref, dK_ref, trace_ref = dense_response(matrices, POINTS)
    assert close(K, K_ref, 1e-9)
    assert close(dK, dK_ref, 1e-8)
    assert np.allclose(trace, trace_ref, rtol=1e-9)


def test_modal_channels_refuse_inconsistent_shapes():
    with pytest.raises(ValueError, match="inconsistent"):
        ModalChannels(np.ones(3), np.ones(2) * 0.01, np.ones((3, 1)), np.ones((1, 3)), [1],
                      np.zeros((1, 1)))  # fmt: skip
