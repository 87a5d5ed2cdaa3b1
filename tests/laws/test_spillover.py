"""Tests of dampctl.laws.spillover on Balas's example, and the LQG cure by a larger model."""

import numpy as np
import pytest
from repo import ROOT

from dampctl import Actuator, ModalPlant, Mode, Sensor
from dampctl.analysis.closedloop import closed_loop_matrix
from dampctl.design import Design
from dampctl.laws import lqg
from dampctl.laws.spillover import check_on_plant


# ---------------------------------------------------------------------- spillover (Balas 1978)
def _balas_plant(c2: float) -> ModalPlant:
    # Modes w = 1, 3 rad/s, zeta 0.005; actuator shape [1, 1], displacement sensor [1, c2]
    # (Balas 1978 example with b2 = 1, computed).
    return ModalPlant(
        modes=[
            Mode(freq_hz=1.0 / (2 * np.pi), damping=0.005),
            Mode(freq_hz=3.0 / (2 * np.pi), damping=0.005),
        ],
        sites={"a": [1.0, 1.0], "s": [1.0, c2]},
        actuators=[Actuator(name="fa", kind="force", site="a")],
        sensors=[Sensor(name="xs", kind="displacement", site="s")],
    )


def _balas_design(plant: ModalPlant) -> Design:
    # Design on mode 1 only, physical states [x1, x1']: state feedback poles −1 ± j
    # (K = [1, 1.99]), observer poles −2 ± 2j (L = [3.99, 6.9601]').
    A1 = np.array([[0.0, 1.0], [-1.0, -0.01]])
    B1 = np.array([[0.0], [1.0]])
    C1 = np.array([[1.0, 0.0]])
    K = np.array([[1.0, 1.99]])
    L = np.array([[3.99], [6.9601]])
    np.testing.assert_allclose(np.sort_complex(np.linalg.eigvals(A1 - B1 @ K)), [-1 - 1j, -1 + 1j])
    np.testing.assert_allclose(
        np.sort_complex(np.linalg.eigvals(A1 - L @ C1)), [-2 - 2j, -2 + 2j], atol=1e-12
    )
    controller = lqg.lqg_controller(A1, B1, C1, np.zeros((1, 1)), K, L)
    return Design(
        law="lqg",
        plant_fingerprint=plant.fingerprint,
        actuators=("fa",),
        sensors=("xs",),
        target_modes=(1,),
        controller=controller,
    )


# M. J. Balas, "Feedback control of flexible systems", IEEE TAC 23(4):673–679, 1978 (from
# memory); worked numbers computed with numpy.
def test_spillover_example_reproduces_unstable_residual_pole():
    plant = _balas_plant(-1.0)
    design = _balas_design(plant)
    report = check_on_plant(plant, design, model_modes=[1], delay_s=0.0).to_dict()
    assert not report["stable"]
    assert report["spillover_unstable"] == [2]
    mats = plant.statespace_matrices(["fa"], ["xs"])
    poles = np.linalg.eigvals(closed_loop_matrix(mats, design.controller))
    upper = np.sort_complex(poles[poles.imag > 0])
    np.testing.assert_allclose(
        upper,
        np.sort_complex([0.35873 + 2.67885j, -2.6679 + 2.97006j, -0.70583 + 0.86409j]),
        atol=1e-5,
    )
    residual = report["residual_modes"][0]
    assert residual["mode"] == 2 and residual["unstable"]
    assert residual["closed_loop_damping"] < 0


def test_spillover_cures():
    # Same-sign ("collocated-like") sensor shape: stable, max Re = −0.1518.
    plant = _balas_plant(+1.0)
    report = check_on_plant(plant, _balas_design(plant), model_modes=[1], delay_s=0.0)
    report = report.to_dict()
    assert report["stable"] and report["spillover_unstable"] == []
    assert report["max_real_part"] == pytest.approx(-0.1518, abs=1e-4)
    # Observation spillover removed (c2 = 0): spectrum = designed poles ∪ open-loop residual.
    plant0 = _balas_plant(0.0)
    mats = plant0.statespace_matrices(["fa"], ["xs"])
    poles = np.linalg.eigvals(closed_loop_matrix(mats, _balas_design(plant0).controller))
    expected = [-2 + 2j, -1 + 1j, -0.015 + 2.99996j]
    np.testing.assert_allclose(np.sort_complex(poles[poles.imag > 0]), expected, atol=1e-5)
    # Residual mode in the design model: the LQG design on the non-collocated plant is stable
    # and leaves mode 2 its damping.
    bad = _balas_plant(-1.0)
    design = lqg.design(bad, ["fa"], ["xs"], modes=[1], neighbours=3.0, target_damping=0.3)
    info = design.info
    assert info["design_model"]["modes"] == [1, 2]
    assert info["design_model"]["neighbours"] == [2]
    assert info["closed_loop"]["stable"]
    assert info["closed_loop"]["spillover_unstable"] == []
    assert info["closed_loop"]["target_damping_min"] == pytest.approx(
        0.3 * (1 + lqg.GOAL_HEADROOM), rel=1e-6
    )
    mode2 = info["closed_loop"]["residual_modes"][0]
    assert mode2["closed_loop_damping"] == pytest.approx(0.005, rel=1e-3)


def test_lqg_adds_modes_it_drives_unstable_to_the_design_model(monkeypatch):
    # Balas's cure applied by the design itself: on the demo truss two struts designed on the
    # default model (targets 1–3 and one neighbour) drive residual modes 7 and 9 unstable; the
    # design adds them to its model and designs again, and the loop is stable with the target
    # met, as the independent assessment (closed-loop eigenvalues with the delay) also finds.

    import dampctl
    from dampctl.model.plantfile import load_plant

    plant = load_plant(ROOT / "plants" / "light_truss.toml")
    monkeypatch.setattr(lqg, "SPILLOVER_ROUNDS", 0)
    monkeypatch.setattr(lqg, "BACKOFF_FACTORS", ())
    plain = lqg.design(plant, [], [], pairs=["iff_1", "iff_2"]).info
    assert not plain["closed_loop"]["stable"]
    assert plain["closed_loop"]["spillover_unstable"] == [7, 9]
    monkeypatch.undo()
    design = lqg.design(plant, [], [], pairs=["iff_1", "iff_2"])
    info = design.info
    assert info["design_model"]["added_for_spillover"] == [7, 9]
    assert {7, 9} <= set(info["design_model"]["modes"])
    assert info["closed_loop"]["stable"] and info["closed_loop"]["spillover_unstable"] == []
    target = info["target_damping"]
    assert info["closed_loop"]["target_damping_min"] >= target * (1 - lqg.TARGET_TOL)
    assessed = dampctl.assess(plant, design).to_dict()
    assert assessed["stable"]
