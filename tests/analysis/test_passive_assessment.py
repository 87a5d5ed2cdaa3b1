"""Assessment of passive designs: RMS and part loads against a lumped 2-DOF model solved with
python-control's H2 norm, and what a design without a loop must (not) claim."""

import control
import numpy as np
import pytest

from dampctl.analysis.assessment import assess
from dampctl.analysis.passive_assessment import NO_LOOP
from dampctl.design import Design
from dampctl.model.components import Disturbance, Mode, Output, Requirements
from dampctl.model.passive import Absorber, Damper
from dampctl.model.plant import ModalPlant
from dampctl.report.figures import assessment_pngs

M, K, CP, W0 = 2.0, 8.0e4, 8.0, 1e-4  # primary and a flat force PSD (N²/Hz)
ABSORBER = Absorber(1, "x", 0.1, 30.0, 0.12)


def plant(requirements=None):
    return ModalPlant(
        modes=[Mode(np.sqrt(K / M) / (2 * np.pi), CP / (2 * np.sqrt(K * M)), modal_mass_kg=M)],
        sites={"x": [1.0]},
        outputs=[Output("xo", "displacement", site="x")],
        disturbances=[Disturbance("push", "x", W0)],
        requirements=requirements or Requirements(),
    )


def tmd_design(p, parts=(ABSORBER,), law="tmd"):
    return Design(law=law, plant_fingerprint=p.fingerprint, actuators=(), sensors=(),
                  target_modes=(1,), parts=parts)


def lumped():
    """Primary + absorber in physical coordinates [x, x_a, v, v_a]: outputs x and x_a − x."""
    m, k, c = ABSORBER.mass_kg, ABSORBER.stiffness_n_per_m, ABSORBER.damping_n_s_per_m
    Mm = np.diag([M, m])
    Km = np.array([[K + k, -k], [-k, k]])
    Cm = np.array([[CP + c, -c], [-c, c]])
    A = np.block([[np.zeros((2, 2)), np.eye(2)],
                  [-np.linalg.solve(Mm, Km), -np.linalg.solve(Mm, Cm)]])
    B = np.concatenate([np.zeros(2), np.linalg.solve(Mm, [1.0, 0.0])])[:, None]
    C = np.array([[1.0, 0, 0, 0], [-1.0, 1.0, 0, 0]])
    return control.ss(A, B, C, np.zeros((2, 1)))


def test_rms_and_stroke_against_the_h2_norm_of_the_lumped_model():
    # σ² = W₀ ‖G‖₂² / 2 for a one-sided flat PSD W₀ (‖G‖₂ from python-control)
    p = plant()
    a = assess(p, tmd_design(p), samples=4)
    sys = lumped()
    expected_x = np.sqrt(W0 / 2) * control.system_norm(sys[0, 0], p=2)
    expected_stroke = np.sqrt(W0 / 2) * control.system_norm(sys[1, 0], p=2)
    (out,) = a.response.outputs
    assert out.closed_rms == pytest.approx(expected_x, rel=1e-8)
    assert out.closed_rms_integral == pytest.approx(expected_x, rel=2e-3)
    assert out.noise_rms == 0.0
    open_x = np.sqrt(W0 / 2) * control.system_norm(
        control.ss([[0, 1], [-K / M, -CP / M]], [[0], [1 / M]], [[1, 0]], [[0]]), p=2
    )
    assert out.open_rms == pytest.approx(open_x, rel=1e-8)
    (load,) = a.response.effort
    assert load.quantity == "stroke" and load.actuator.startswith("absorber 1")
    assert load.rms == pytest.approx(expected_stroke, rel=1e-6)


def test_no_loop_means_no_margins_and_says_so():
    req = Requirements(modes=(1,), min_damping=0.02, min_gain_margin_db=6.0,
                       min_phase_margin_deg=35.0, max_rms={"xo": 1.0})
    p = plant(req)
    a = assess(p, tmd_design(p), samples=4)
    assert a.passive and a.loops == () and a.pairs == () and a.disk is None
    assert a.robustness.delay is None and a.robustness.actuator_bandwidth is None
    names = [r.name for r in a.requirements]
    assert names == ["stability", "min_damping", "max_rms.xo"]
    assert all(NO_LOOP in n for n in a.notes) and len(a.notes) == 2
    assert a.delay_s == 0.0 and a.curves.loops.shape[0] == 0
    d = a.to_dict()
    assert d["passive"] is True and d["loops"] == [] and d["robustness"]["extra_delay"] is None
    assert d["parts"][0]["part"] == "absorber" and d["effort"][0]["unit"] == "m"
    assert "passive parts" in d["controller_poles_note"]
    assert a.curves.locus.gains[0] < 0.01 and a.curves.locus.poles.shape[1] == 4
    pngs = assessment_pngs(a)
    assert "root_locus.png" in pngs and not any(n.startswith("nyquist") for n in pngs)


def test_drift_detunes_the_absorber():
    p = plant()
    a = assess(p, tmd_design(p), drift=0.1, samples=8)
    nominal = a.modes[0].closed_damping
    assert a.robustness.drift.worst_damping[1] < nominal
    assert a.robustness.drift.unstable_cases == 0


def test_damper_load_is_its_force():
    # dashpot to ground on the mass: force c·v, σ_F = c σ_v, and σ_v² = W₀/(2·2 c_tot M)... here
    # against the H2 norm of the damped oscillator's velocity (python-control)
    p = plant()
    c = 30.0
    a = assess(p, tmd_design(p, (Damper(("x", "ground"), c),), law="viscous"), samples=2)
    oscillator = control.ss([[0, 1], [-K / M, -(CP + c) / M]], [[0], [1 / M]], [[0, 1]], [[0]])
    expected = c * np.sqrt(W0 / 2) * control.system_norm(oscillator, p=2)
    (load,) = a.response.effort
    assert load.quantity == "force"
    assert load.rms == pytest.approx(expected, rel=1e-8)
    assert a.modes[0].closed_damping == pytest.approx((CP + c) / (2 * np.sqrt(K * M)), rel=1e-9)
