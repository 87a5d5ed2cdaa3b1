"""The assessment as a whole: modal table, peak reduction, requirements and its JSON form."""

import json
from dataclasses import replace

import numpy as np
import pytest

from dampctl.analysis.assessment import assess
from dampctl.commands._common import jsonable
from dampctl.design import Branch, Design, Loop, Section
from dampctl.errors import DesignError, UsageError
from dampctl.model.components import Actuator, Disturbance, Mode, Output, Pair, Requirements, Sensor
from dampctl.model.plant import ModalPlant
from dampctl.testing import chain_plant, sdof_plant


def _dvf(plant, gains, pairs):
    loops = [
        Loop(p, plant.pair(p).actuator, plant.pair(p).sensor, g, (Branch(gain=g),))
        for p, g in zip(pairs, gains, strict=True)
    ]
    return Design(
        law="dvf",
        plant_fingerprint=plant.fingerprint,
        actuators=tuple(lp.actuator for lp in loops),
        sensors=tuple(lp.sensor for lp in loops),
        target_modes=(1,),
        loops=tuple(loops),
        pairs=tuple(pairs),
    )


def test_mode_matching_keeps_identity_for_modes_0_1_percent_apart():
    # Two modes 0.1 % apart; only mode 2 is seen by the pair, so mode 1 must keep its open-loop
    # pole exactly and mode 2 gets ζ₂ + g/(2ω₂) (decoupled SDOF, Balas 1979). Sorting the
    # closed-loop poles by imaginary part would swap the rows (mode 2 is damped below mode 1).
    f1 = 100.0
    plant = ModalPlant(
        modes=[Mode(f1, 0.002), Mode(f1 * 1.001, 0.002)],
        sites={"a": [0.0, 1.0]},
        actuators=[Actuator("f", "force", site="a")],
        sensors=[Sensor("v", "velocity", site="a")],
        pairs=[Pair("fv", "f", "v")],
    )
    g = 2 * 0.1 * plant.omegas[1]
    a = assess(plant, _dvf(plant, [g], ["fv"]), delay_s=0.0, samples=0)
    m1, m2 = a.modes
    assert m1.closed_damping == pytest.approx(0.002, abs=1e-12)
    assert m1.closed_freq_hz == pytest.approx(f1, rel=1e-12)
    assert m2.closed_damping == pytest.approx(0.102, rel=1e-9)
    assert m2.closed_freq_hz == pytest.approx(f1 * 1.001, rel=1e-9)
    # sorting by imaginary part would have put mode 2's damped pole first
    design_poles = a.curves.locus.poles[np.argmin(np.abs(a.curves.locus.gains - 1.0))]
    upper = design_poles[design_poles.imag > 0]
    by_imag = upper[np.argsort(upper.imag)]
    assert -by_imag[0].real / abs(by_imag[0]) == pytest.approx(0.102, rel=1e-6)


def _sdof_with_requirements(**req):
    plant = sdof_plant(2.0, 8e4, 8.0)
    return replace(
        plant,
        disturbances=(Disturbance("w", "x", 1e-2),),
        outputs=(Output("xo", "displacement", "x"),),
        requirements=Requirements(**req),
    )


def test_peak_reduction_sdof_closed_form():
    # Displacement peak amplification 1/(2ζ√(1−ζ²)) (Rao, Mechanical Vibrations, 2017, from
    # memory); DVF raises ζ from 0.01 to 0.1 (Balas 1979), so the peak drops by
    # 20 log10[ζ_cl√(1−ζ_cl²) / (ζ√(1−ζ²))].
    plant = _sdof_with_requirements()
    a = assess(plant, _dvf(plant, [72.0], ["fv"]), delay_s=0.0, samples=0)
    z0, z1 = 0.01, 0.1
    expected = 20 * np.log10(z1 * np.sqrt(1 - z1**2) / (z0 * np.sqrt(1 - z0**2)))
    assert a.modes[0].peak_reduction_db == pytest.approx(expected, abs=0.05)
    assert a.modes[0].closed_damping == pytest.approx(0.1, rel=1e-9)
    assert a.stable


def test_requirements_met_and_not_met_with_shortfall():
    plant = _sdof_with_requirements(
        modes=(1,), min_damping=0.05, min_phase_margin_deg=30.0, max_rms={"xo": 1e-5}
    )
    a = assess(plant, _dvf(plant, [72.0], ["fv"]), samples=8)
    checks = {r.name: r for r in a.requirements}
    assert checks["stability"].met and checks["min_damping"].met
    assert checks["min_phase_margin_deg"].met
    rms = checks["max_rms.xo"]
    # σ_x = √(W₀/(4k(c+g))) = 1.976e-5 m > 1e-5 m (Crandall & Mark 1963)
    assert rms.achieved == pytest.approx(np.sqrt(1e-2 / (4 * 8e4 * 80)), rel=2e-3)
    assert not rms.met and not a.all_met
    assert "short by" in rms.text and a.unmet == (rms,)


def test_unstable_design_fails_stability_and_margins():
    # Positive velocity feedback (negative gain) destabilizes the SDOF.
    plant = _sdof_with_requirements(min_gain_margin_db=6.0)
    a = assess(plant, _dvf(plant, [-72.0], ["fv"]), samples=4)
    assert not a.stable
    checks = {r.name: r for r in a.requirements}
    assert not checks["stability"].met and not checks["min_gain_margin_db"].met


def test_json_form_has_the_issue_keys_and_is_strict_json():
    plant = chain_plant([1.0, 0.5, 0.8], [5e5, 2e5, 3e5], damping=0.005)
    plant = replace(
        plant,
        disturbances=(Disturbance("w", "m3", 1e-2),),
        outputs=(Output("v3", "velocity", "m3"),),
        requirements=Requirements(sample_rate_hz=10000.0, modes=(1, 2), min_damping=0.05),
    )
    design = replace(_dvf(plant, [100.0, 100.0], ["p1", "p3"]), target_modes=(1, 2))
    a = assess(plant, design, samples=8)
    data = a.to_dict()
    text = json.dumps(jsonable(data), allow_nan=False)
    assert json.loads(text)["stable"] is True
    for key in ("stable", "modes", "loops", "robustness", "rms", "effort", "requirements"):
        assert key in data
    assert set(data["modes"][0]) >= {
        "mode",
        "open_freq_hz",
        "open_damping",
        "closed_freq_hz",
        "closed_damping",
        "peak_reduction_db",
    }
    assert set(data["loops"][0]) >= {
        "pair",
        "gain_margin_db",
        "phase_margin_deg",
        "delay_margin_s",
        "crossover_hz",
    }
    assert set(data["requirements"][0]) == {"name", "required", "achieved", "met"}
    assert data["disk_margin"]["alpha"] > 0  # two loops: disk margin reported
    assert data["robustness"]["drift"]["all_corners"] is True
    assert data["robustness"]["extra_delay"]["confirmed_by_poles"] is True
    assert data["robustness"]["spillover"][0]["mode"] == 3
    assert data["rms"][0]["vc_closed"] is not None
    assert data["delay"]["delay_s"] == pytest.approx(1.5e-4)
    assert [m["mode"] for m in data["modes"]] == [1, 2, 3]


def test_bad_input_is_refused():
    plant = _sdof_with_requirements()
    design = _dvf(plant, [72.0], ["fv"])
    other = sdof_plant(2.0, 9e4, 8.0)
    with pytest.raises(DesignError, match="fingerprint"):
        assess(other, design)
    with pytest.raises(UsageError, match="drift"):
        assess(plant, design, drift=1.5)
    with pytest.raises(UsageError, match="delay"):
        assess(plant, design, delay_s=-1.0)


def test_iff_strut_closed_loop_poles_preumont_example():
    # Active strut (k_a = 0.2) between ground and m₁ in series with a force sensor, IFF
    # δ = g F/(k_a s), i.e. u = −K y with K = −g/(k_a s). 2-DOF example m₁ = m₂ = 1, k_p = 1,
    # k₂ = 1 at g = 0.7: poles −0.016407 ± 1.656364j, −0.020987 ± 0.638446j, −0.625211
    # (Preumont, Dufour & Malekian, J. Guidance 15(2), 1992; values computed from their closed
    # forms).
    # The force sensor's feedthrough (−k_a from δ) is in the loop.
    ka, g = 0.2, 0.7
    Mm = np.eye(2)
    Km = np.array([[1.0 + ka + 1.0, -1.0], [-1.0, 1.0]])
    base = ModalPlant.from_lumped(Mm, Km, ["m1", "m2"])
    plant = replace(
        base,
        sites={**base.sites, "ground": [0.0, 0.0]},
        actuators=(
            Actuator(
                "strut", "strut", between=("ground", "m1"), stiffness_n_per_m=ka, max_stroke_m=1.0
            ),
        ),
        sensors=(Sensor("F", "force", actuator="strut"),),
        pairs=(Pair("iff", "strut", "F"),),
        disturbances=(Disturbance("w", "m2", 1e-4),),
        outputs=(Output("x2", "displacement", "m2"),),
    )
    design = Design(
        law="iff",
        plant_fingerprint=plant.fingerprint,
        actuators=("strut",),
        sensors=("F",),
        target_modes=(1, 2),
        loops=(
            Loop(
                "iff",
                "strut",
                "F",
                g,
                (Branch(gain=-g / ka, sections=(Section((1.0,), (1.0, 0.0)),)),),
            ),
        ),
        pairs=("iff",),
    )
    a = assess(plant, design, delay_s=0.0, samples=0)
    poles = np.concatenate([[m.closed_freq_hz for m in a.modes]])
    expected = np.array([-0.020987 + 0.638446j, -0.016407 + 1.656364j])
    np.testing.assert_allclose(poles, np.abs(expected) / (2 * np.pi), rtol=2e-6)
    np.testing.assert_allclose(
        [m.closed_damping for m in a.modes], -expected.real / np.abs(expected), atol=1e-6
    )  # reference values are given to 6 decimals
    assert a.controller_poles.size == 1
    assert a.controller_poles[0] == pytest.approx(-0.625211, abs=2e-6)
    effort = a.response.effort[0]
    assert effort.quantity == "extension" and effort.within_limit is True
    assert effort.strut_force_rms_n == pytest.approx(ka * effort.rms)
    rms = a.response.outputs[0]
    assert rms.closed_rms < rms.open_rms
    assert rms.closed_rms_integral == pytest.approx(rms.closed_rms, rel=5e-3)


def test_balas_spillover_reported_by_assess_for_a_mimo_form_controller():
    # Observer-based controller on mode 1 destabilizes the residual mode 2 (Balas, "Feedback
    # control of flexible systems", IEEE TAC 1978; poles computed with numpy): the
    # assessment must call the loop unstable and flag mode 2 as spillover.
    plant = ModalPlant(
        modes=[Mode(1 / (2 * np.pi), 0.005), Mode(3 / (2 * np.pi), 0.005)],
        sites={"a": [1.0, 1.0], "s": [1.0, -1.0]},
        actuators=[Actuator("u", "force", site="a")],
        sensors=[Sensor("y", "displacement", site="s")],
        pairs=[Pair("uy", "u", "y")],
    )
    A1 = np.array([[0.0, 1.0], [-1.0, -0.01]])
    B1, C1 = np.array([[0.0], [1.0]]), np.array([[1.0, 0.0]])
    Kf, Lo = np.array([[1.00, 1.99]]), np.array([[3.99], [6.9601]])
    design = Design(
        law="lqg",
        plant_fingerprint=plant.fingerprint,
        actuators=("u",),
        sensors=("y",),
        target_modes=(1,),
        controller=(A1 - B1 @ Kf - Lo @ C1, Lo, Kf, np.zeros((1, 1))),
    )
    a = assess(plant, design, delay_s=0.0, samples=0)
    assert not a.stable and a.max_real_part == pytest.approx(0.35873, abs=2e-5)
    (spill,) = a.robustness.spillover
    assert spill.mode == 2 and spill.unstable and spill.lost_damping
    # the pole that mode 1 becomes (Balas 1978 example, computed with numpy)
    p1 = -0.70583 + 0.86409j
    assert a.modes[0].closed_damping == pytest.approx(-p1.real / abs(p1), abs=2e-5)
    assert not a.all_met


def test_disk_margin_of_an_unstable_mimo_loop_is_zero():
    # python-control's disk_margins does not check stability (LIBRARY-NOTES); dampctl does.
    plant = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    stable = assess(plant, _dvf(plant, [100.0, 100.0], ["p1", "p2"]), delay_s=0.0, samples=0)
    assert stable.stable and 0 < stable.disk.alpha <= min(stable.disk.loop_alpha) + 1e-9
    bad = assess(plant, _dvf(plant, [-100.0, -100.0], ["p1", "p2"]), delay_s=0.0, samples=0)
    assert not bad.stable and bad.disk.alpha == 0.0
    assert bad.to_dict()["disk_margin"]["valid"] is False


def test_peak_reduction_left_out_where_no_output_shows_the_mode():
    # the output site has no motion in mode 2: its peak between the modes is mode 1's flank,
    # so no reduction is stated for mode 2; mode 1 still gets the closed-form figure's sign
    plant = ModalPlant(
        modes=[Mode(20.0, 0.01), Mode(60.0, 0.01)],
        sites={"a": [1.0, 1.0], "x": [1.0, 0.0]},
        actuators=[Actuator("f", "force", site="a")],
        sensors=[Sensor("v", "velocity", site="a")],
        pairs=[Pair("fv", "f", "v")],
        disturbances=(Disturbance("w", "a", 1e-2),),
        outputs=(Output("xo", "displacement", "x"),),
    )
    a = assess(plant, _dvf(plant, [5.0], ["fv"]), delay_s=0.0, samples=0)
    assert a.modes[0].peak_reduction_db > 1.0
    assert a.modes[1].peak_reduction_db is None
    assert "xo" in a.modes[1].peak_reduction_by_output_db


def test_repeated_modes_a_loop_does_not_see_get_no_credit():
    # two modes at exactly 100.0 Hz, one pair that sees mode 1 only: mode 2 keeps its open-loop
    # pole (its closed-loop damping is the open 0.01), no peak reduction is claimed for it at
    # the pair's sensor (which does not move in mode 2), and the requirement is not met
    plant = ModalPlant(
        modes=(Mode(100.0, 0.01), Mode(100.0, 0.01), Mode(260.0, 0.01)),
        sites={"a": np.array([1.0, 0.0, 0.4]), "b": np.array([0.0, 1.0, 0.3])},
        actuators=(Actuator("fa", "force", site="a"),),
        sensors=(Sensor("va", "velocity", site="a"),),
        pairs=(Pair("pa", "fa", "va"),),
        requirements=Requirements(modes=(1, 2), min_damping=0.05),
    )
    design = Design(law="dvf", plant_fingerprint=plant.fingerprint, actuators=("fa",),
                    sensors=("va",), target_modes=(1, 2),
                    loops=(Loop("pa", "fa", "va", 60.0, branches=(Branch(60.0),)),))
    result = assess(plant, design, delay_s=0.0, samples=0)
    one, two = result.modes[0], result.modes[1]
    assert two.closed_damping == pytest.approx(0.01, rel=1e-6)
    assert one.closed_damping > 0.03
    assert two.peak_reduction_db is None and one.peak_reduction_db > 3.0
    assert not result.all_met


def test_figure_data_only_when_asked_and_nothing_else_changes():
    # Issue 20 point 4: the root locus (31 solves of every pole) is figure data only. Without
    # it every result is the same. The locus itself: an SDOF under velocity feedback of gain
    # k·g has s² + (2ζω + k·g)s + ω² = 0 (closed form), so the real part of its pole pair is
    # affine in the scale g while |s| stays ω (up to the overdamped split).
    plant = _sdof_with_requirements(min_gain_margin_db=6.0)
    design = _dvf(plant, [30.0], ["fv"])
    full = assess(plant, design, samples=4, roll_off=False, delay_s=0.0)
    lean = assess(plant, design, samples=4, roll_off=False, delay_s=0.0, figures=False)
    assert lean.curves.locus is None and full.curves.locus is not None
    assert lean.modes == full.modes and lean.loops == full.loops
    assert lean.requirements == full.requirements and lean.stable == full.stable
    w = plant.omegas[0]
    gains, poles = full.curves.locus.gains, full.curves.locus.poles
    upper = np.array([p[np.argmax(p.imag)] for p in poles])
    under = upper.imag > 0
    fit = np.polyfit(gains[under], upper.real[under], 1)
    np.testing.assert_allclose(np.polyval(fit, gains[under]), upper.real[under], atol=1e-6 * w)
    np.testing.assert_allclose(np.abs(upper[under]), w, rtol=1e-9)
    from dampctl.report.figures_loop import plot_root_locus

    with pytest.raises(UsageError, match="root-locus"):
        plot_root_locus(lean)
