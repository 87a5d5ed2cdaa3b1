"""Margins against closed forms and python-control (Åström & Murray 2008), loop-at-a-time vs
feedback."""

import control
import numpy as np
import pytest

from dampctl.analysis.margins import default_grid, input_loops, loop_margins, siso_margins
from dampctl.design import Branch, Design, Loop
from dampctl.testing import chain_plant, sdof_plant

W100 = 2 * np.pi * 100.0
GRID = np.geomspace(0.1, 1e5, 4000)


def integrator(f):
    return W100 / (2j * np.pi * f)


def second_order(f):
    s = 2j * np.pi * f
    return 2 * W100**2 / (s * (s + 2 * W100))


def test_integrator_loop():
    # K. J. Åström & R. M. Murray, Feedback Systems (2008), frequency-domain robustness (from
    # memory): L = ω_c/s, ω_c = 2π·100 → PM = 90°, DM = (π/2)/ω_c = 2.5 ms.
    m = siso_margins(integrator, GRID, name="int")
    assert m.phase_margin_deg == pytest.approx(90.0, rel=1e-9)
    assert m.delay_margin_s == pytest.approx(2.5e-3, rel=1e-9)
    assert m.crossover_hz == pytest.approx(100.0, rel=1e-9)
    assert m.gain_margin_db == np.inf
    assert m.loop == "int"


def test_second_order_loop_and_delay_insertion():
    # Closed form: L = 2ω²/(s(s+2ω)), ω = 2π·100: ω_c = 571.8828 rad/s, PM = 65.5302°,
    # DM = 1.99992 ms; inserting e^{−s·DM} puts the loop phase at −180° at ω_c.
    m = siso_margins(second_order, GRID)
    assert 2 * np.pi * m.crossover_hz == pytest.approx(571.8828, rel=1e-6)
    assert m.phase_margin_deg == pytest.approx(65.5302, rel=1e-6)
    assert m.delay_margin_s == pytest.approx(1.99992e-3, rel=1e-5)
    f_c = m.crossover_hz
    delayed = second_order(np.array([f_c]))[0] * np.exp(-2j * np.pi * f_c * m.delay_margin_s)
    assert abs(delayed) == pytest.approx(1.0, rel=1e-9)
    assert np.degrees(np.angle(delayed)) == pytest.approx(-180.0, abs=1e-7) or np.degrees(
        np.angle(delayed)
    ) == pytest.approx(180.0, abs=1e-7)


def test_agreement_with_python_control_stability_margins():
    # python-control 0.10.2 stability_margins on frequency data (FRD) of a loop whose phase
    # stays in (−360°, 0°): L = 3/(s(s+1)(s+2)) (gain and phase crossovers both present).
    def loop(f):
        s = 2j * np.pi * f
        return 3.0 / (s * (s + 1) * (s + 2))

    grid = np.geomspace(1e-3, 10.0, 2000)
    ours = siso_margins(loop, grid)
    gm, pm, _, wpc, wgc, _ = control.stability_margins(control.frd(loop(grid), 2 * np.pi * grid))
    assert ours.gain_margin_db == pytest.approx(20 * np.log10(gm), rel=1e-5)
    assert ours.phase_margin_deg == pytest.approx(pm, rel=1e-5)
    assert ours.crossover_hz == pytest.approx(wgc / (2 * np.pi), rel=1e-5)
    assert ours.phase_crossovers_hz[0] == pytest.approx(wpc / (2 * np.pi), rel=1e-5)
    # closed form: phase crossover at ω = √2 where |L| = 3/(√2·√3·√6) = 0.5 → GM = 6.0206 dB
    assert ours.phase_crossovers_hz[0] * 2 * np.pi == pytest.approx(np.sqrt(2), rel=1e-9)
    assert ours.gain_margin_db == pytest.approx(20 * np.log10(2.0), rel=1e-9)


def dvf_design(plant, pairs, gain):
    loops = tuple(
        Loop(
            pair=p,
            actuator=plant.pair(p).actuator,
            sensor=plant.pair(p).sensor,
            gain=gain,
            branches=(Branch(gain),),
        )
        for p in pairs
    )
    return Design(
        law="dvf",
        plant_fingerprint=plant.fingerprint,
        actuators=tuple(lp.actuator for lp in loops),
        sensors=tuple(lp.sensor for lp in loops),
        target_modes=(1,),
        loops=loops,
        pairs=tuple(pairs),
    )


def test_plant_loop_delay_margin_inserted_reaches_minus_180():
    plant = sdof_plant(2.0, 8e4, 8.0)
    design = dvf_design(plant, ["fv"], 400.0)
    base = 5e-5
    (m,) = loop_margins(plant, design, delay_s=base, roll_off=False)
    assert np.isfinite(m.delay_margin_s) and m.delay_margin_s > 0
    f_c = np.array([m.crossover_hz])
    at = input_loops(plant, design, f_c, delay_s=base + m.delay_margin_s, roll_off=False)[0, 0]
    assert abs(abs(np.degrees(np.angle(at))) - 180.0) < 1e-6
    # and the single-loop return ratio equals K·G from the plant FRF
    f = default_grid(plant, design)
    L = input_loops(plant, design, f, delay_s=0.0, roll_off=False)[0]
    np.testing.assert_allclose(L, 400.0 * plant.frf(f, ["f"], ["v"])[0, 0], rtol=1e-12)


def test_loop_at_a_time_matches_python_control_feedback():
    # with two loops, the loop seen at input 1 with loop 2 closed is 1/[(I+KG)^-1]_11 − 1;
    # check it against the SISO return ratio of the plant with loop 2 closed by python-control
    plant = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    design = dvf_design(plant, ["p1", "p2"], 30.0)
    f = np.geomspace(10.0, 1000.0, 50)
    L = input_loops(plant, design, f, delay_s=0.0, roll_off=False)
    G = plant.statespace(["f1", "f2"], ["v1", "v2"])
    # loop 1 broken: u1 = −30 v1 with loop 2 closed; L1 = 30 · (v1/u1 with loop 2 closed)
    G2 = control.feedback(G, control.ss([], [], [], [[0.0, 0.0], [0.0, 30.0]]))
    ref = 30.0 * np.ravel(control.frequency_response(G2[0, 0], 2 * np.pi * f).complex)
    np.testing.assert_allclose(L[0], ref, rtol=1e-9)
