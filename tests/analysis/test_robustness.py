"""Robustness checks: drift, delay, roll-off and spillover against closed forms and references."""

from dataclasses import replace

import numpy as np
import pytest

from dampctl.analysis.loopmodel import delay_sections, gain_locus, loop_controller, loop_poles
from dampctl.analysis.margins import input_loops
from dampctl.analysis.robustness import (
    ALL_CORNERS_UP_TO,
    drift_cases,
    drift_robustness,
    drifted_plant_matrices,
    roll_off_limit,
)
from dampctl.design import Branch, Design, Loop
from dampctl.model.components import Actuator, Mode, Pair, Sensor
from dampctl.model.plant import ModalPlant
from dampctl.testing import chain_plant, sdof_plant


def _dvf(plant, gain, actuator="f", sensor="v", pair="fv"):
    return Design(
        law="dvf",
        plant_fingerprint=plant.fingerprint,
        actuators=(actuator,),
        sensors=(sensor,),
        target_modes=(1,),
        loops=(Loop(pair, actuator, sensor, gain, (Branch(gain=gain),)),),
        pairs=(pair,),
    )


def test_drifted_matrices_equal_a_plant_built_with_shifted_modes():
    plant = chain_plant([1.0, 0.5, 0.8], [5e5, 2e5, 3e5], damping=0.02)
    factors = np.array([1.03, 0.96, 1.01])
    shifted = replace(
        plant,
        modes=tuple(
            replace(m, freq_hz=m.freq_hz * f) for m, f in zip(plant.modes, factors, strict=True)
        ),
    )
    ins, outs = ["f1", "f3"], ["x1", "v2", "a3"]
    for ours, truth in zip(
        drifted_plant_matrices(plant, ins, outs, factors),
        shifted.statespace_matrices(ins, outs),
        strict=True,
    ):
        np.testing.assert_allclose(ours, truth, rtol=1e-12, atol=1e-12)


def test_drift_cases_corners_subset_and_seeded_samples():
    full = drift_cases(3, 0.05, samples=10, seed=1)
    assert full.shape == (8 + 10, 3)
    corners = {tuple(np.sign(row - 1)) for row in full[:8]}
    assert len(corners) == 8
    assert np.all(np.abs(full - 1) <= 0.05 + 1e-15)
    np.testing.assert_array_equal(full, drift_cases(3, 0.05, samples=10, seed=1))
    n = ALL_CORNERS_UP_TO + 4
    subset = drift_cases(n, 0.1, samples=0, seed=0)
    assert subset.shape == (2 * (2 + n - 1), n)
    assert np.allclose(np.abs(subset - 1), 0.1)


def test_drift_worst_damping_sdof_closed_form():
    # DVF on an SDOF: ζ_cl = ζ + g/(2 m ω) (Preumont, Vibration Control of Active Structures;
    # Balas 1979). Drift keeps the structure's damping ratio ζ, so the worst case over
    # ω(1 ± δ) is the stiffest: ζ + g/(2 m ω (1 + δ)).
    m_kg, k, c, g = 2.0, 8e4, 8.0, 72.0
    plant = sdof_plant(m_kg, k, c)
    design = _dvf(plant, g)
    ctrl = loop_controller(plant, design, delay_s=0.0, omega_ref=1.0)
    result = drift_robustness(plant, design, ctrl, (1,), drift=0.05, samples=16, seed=0)
    w = np.sqrt(k / m_kg)
    zeta = c / (2 * np.sqrt(k * m_kg))
    assert result.worst_damping[1] == pytest.approx(zeta + g / (2 * m_kg * w * 1.05), rel=1e-9)
    assert result.unstable_cases == 0
    assert result.n_cases == 2 + 16 and result.all_corners


def test_roll_off_boundary_is_where_nyquist_touches_minus_one():
    # DVF with delay T and a low actuator corner ω_a: above both corners L ≈ g ω_a/(m s²)·e^{−sT},
    # unstable once g T/m > 1 (while the ideal loop is stable for g T/m < π/2); here 1.2. At
    # the corner found on the poles (Padé), the exact response passes through −1.
    plant = sdof_plant(2.0, 8e4, 8.0)
    design = _dvf(plant, 12000.0)
    delay = 2e-4
    limit = roll_off_limit(plant, design, "actuator", delay_s=delay, omega_ref=2 * np.pi * 1e3)
    assert limit.min_stable_hz is not None and np.isfinite(limit.min_stable_hz)
    corner = limit.min_stable_hz
    slow = replace(plant, actuators=(replace(plant.actuators[0], bandwidth_hz=corner),))
    slow_design = replace(design, plant_fingerprint=slow.fingerprint)
    f = np.geomspace(1, 1e4, 200001)
    L = input_loops(slow, slow_design, f, delay_s=delay)[0]
    assert np.min(np.abs(1 + L)) < 2e-2  # boundary bisected to 1 % in corner frequency
    # and without delay a first-order lag alone never destabilizes (Routh–Hurwitz on
    # (m s² + c s + k)(s + ω_a) + g ω_a s: every coefficient product stays positive)
    ideal = roll_off_limit(plant, design, "actuator", delay_s=0.0, omega_ref=1.0)
    assert ideal.min_stable_hz is None


def test_balas_spillover_example_poles():
    # Observer-based control designed on mode 1 of ω = 1, 3 rad/s (ζ = 0.005), actuator shape
    # (1, b₂ = 1), displacement sensor shape (1, c₂ = −1): the residual mode is destabilized,
    # poles +0.35873 ± 2.67885j, −2.6679 ± 2.97006j, −0.70583 ± 0.86409j (Balas, "Feedback
    # control of flexible systems", IEEE TAC 1978; values computed with numpy).
    plant = ModalPlant(
        modes=[Mode(1 / (2 * np.pi), 0.005), Mode(3 / (2 * np.pi), 0.005)],
        sites={"a": [1.0, 1.0], "s": [1.0, -1.0]},
        actuators=[Actuator("u", "force", site="a")],
        sensors=[Sensor("y", "displacement", site="s")],
        pairs=[Pair("uy", "u", "y")],
    )
    A1 = np.array([[0.0, 1.0], [-1.0, -0.01]])
    B1 = np.array([[0.0], [1.0]])
    C1 = np.array([[1.0, 0.0]])
    Kf = np.array([[1.00, 1.99]])
    Lo = np.array([[3.99], [6.9601]])
    ctrl = (A1 - B1 @ Kf - Lo @ C1, Lo, Kf, np.zeros((1, 1)))
    design = Design(
        law="lqg",
        plant_fingerprint=plant.fingerprint,
        actuators=("u",),
        sensors=("y",),
        target_modes=(1,),
        controller=ctrl,
    )
    poles = loop_poles(plant, design, loop_controller(plant, design, delay_s=0, omega_ref=1))
    expected = [0.35873 + 2.67885j, -2.6679 + 2.97006j, -0.70583 + 0.86409j]
    expected = np.concatenate([expected, np.conj(expected)])
    np.testing.assert_allclose(np.sort_complex(poles), np.sort_complex(expected), atol=2e-5)


def test_gain_locus_starts_at_open_loop_and_passes_the_design():
    plant = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    design = _dvf(plant, 150.0, actuator="f1", sensor="v1", pair="p1")
    locus = gain_locus(plant, design, delay_s=0.0, omega_ref=1.0, gains=[0.0, 1.0, 3.0])
    open_poles = np.linalg.eigvals(plant.statespace_matrices(["f1"], ["v1"])[0])
    np.testing.assert_allclose(np.sort_complex(locus.poles[0]), np.sort_complex(open_poles))
    ctrl = loop_controller(plant, design, delay_s=0.0, omega_ref=1.0)
    np.testing.assert_allclose(
        np.sort_complex(locus.poles[1]), np.sort_complex(loop_poles(plant, design, ctrl))
    )


def test_delay_sections_keep_each_pade_section_within_one_radian():
    # [2/2] Padé phase error at ωT = 1 is 1.3e-3 rad: −2 atan((x/2)/(1 − x²/12)) vs −x.
    x = 1.0
    assert abs(-2 * np.arctan((x / 2) / (1 - x**2 / 12)) + x) < 1.4e-3
    assert delay_sections(0.0, 1e4) == 0
    assert delay_sections(1e-4, 2.5e4) == 3
    assert delay_sections(1.0, 1e6) == 12  # capped
