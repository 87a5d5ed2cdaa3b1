"""Loop margins against python-control and published delay-margin values (Åström & Murray, Feedback
Systems, 2008)."""

import warnings
from dataclasses import replace

import control as ct
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from dampctl.analysis.loopmodel import loop_controller, loop_poles
from dampctl.analysis.margins import (
    common_delay_margin,
    default_grid,
    disk_margin_from_alpha,
    disk_margins,
    input_loops,
    loop_margins,
    siso_margins,
)
from dampctl.design import Branch, Design, Loop, Section
from dampctl.model.components import Requirements
from dampctl.testing import chain_plant, sdof_plant

GRID = np.geomspace(1.0, 1e4, 4000)


def _loop(fn):
    return lambda f: fn(2j * np.pi * np.asarray(f, dtype=float))


def _dvf(plant, pairs, gain):
    loops = [
        Loop(p, plant.pair(p).actuator, plant.pair(p).sensor, gain, (Branch(gain=gain),))
        for p in pairs
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


def test_integrator_delay_margin_reference_value():
    # L = ω_c/s, ω_c = 2π·100: PM = 90°, DM = (π/2)/ω_c = 2.5 ms (Åström & Murray, Feedback Systems,
    # 2008, frequency-domain robustness; value computed from the closed form).
    wc = 2 * np.pi * 100
    m = siso_margins(_loop(lambda s: wc / s), GRID)
    assert m.phase_margin_deg == pytest.approx(90.0, abs=1e-9)
    assert m.delay_margin_s == pytest.approx(2.5e-3, rel=1e-9)
    assert m.crossover_hz == pytest.approx(100.0, rel=1e-9)
    assert m.gain_margin_db == np.inf


def test_undamped_pole_is_not_a_phase_crossover():
    # L = −(g/m) e^{−sT}/(s² + ω0²) from an undamped mode (positive displacement feedback
    # through a delay): Im L = (g/m) sin(ωT)/(ω0² − ω²) changes sign through infinity at ω0 (the
    # pole, where L is not finite) and through zero where ωT = π. Only the latter is a crossover
    # of the real axis; there Re L = (g/m)/(ω0² − ω²) < 0 for ω > ω0, so the gain margin is
    # m(ω² − ω0²)/g (closed form). The search must pass the pole without evaluating it.
    f0, T, g, m = 94.0, 1.0 / (2 * 400.0), 2.0e5, 1.0  # ωT = π at 400 Hz
    plant = sdof_plant(m, m * (2 * np.pi * f0) ** 2, 0.0)
    delay = 2j * np.pi * T

    def loop(f):
        return -g * plant.frf(f, ["f"], ["x"])[0, 0] * np.exp(-delay * np.asarray(f))

    grid = np.sort(np.concatenate([GRID, [f0 * (1 - 1e-3), f0 * (1 + 1e-3)]]))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        margins = siso_margins(loop, grid)
    w, w0 = 2 * np.pi * 400.0, 2 * np.pi * f0
    assert margins.gain_margin_db == pytest.approx(20 * np.log10(m * (w**2 - w0**2) / g), rel=1e-9)


def test_second_order_loop_reference_values():
    # L = 2ω²/(s(s+2ω)), ω = 2π·100: ω_c = 571.8828 rad/s, PM = 65.5302°, DM = 1.99992 ms
    # (Åström & Murray 2008; values computed from the closed form).
    w = 2 * np.pi * 100
    m = siso_margins(_loop(lambda s: 2 * w**2 / (s * (s + 2 * w))), GRID)
    assert 2 * np.pi * m.crossover_hz == pytest.approx(571.8828, rel=1e-6)
    assert m.phase_margin_deg == pytest.approx(65.5302, abs=1e-4)
    assert m.delay_margin_s == pytest.approx(1.99992e-3, rel=1e-5)


@pytest.mark.parametrize("delay_s", [0.0, 1e-4, 3e-4])
def test_plant_loop_margins_agree_with_python_control(delay_s):
    # A stiffening lead loop on a displacement sensor, K = 4e6 (s + ω)/(s + 10ω) (stable by
    # Routh–Hurwitz, phase at crossover in (−360°, 0°)): dampctl's loop margins vs
    # control.stability_margins on the same frequency data (FRD), as advised for modal models.
    plant = sdof_plant(2.0, 8e4, 8.0)
    w = plant.omegas[0]
    section = Section((1.0, w), (1.0, 10 * w))
    design = Design(
        law="dvf",
        plant_fingerprint=plant.fingerprint,
        actuators=("f",),
        sensors=("x",),
        target_modes=(1,),
        loops=(Loop("fx", "f", "x", 1.0, (Branch(gain=4e6, sections=(section,)),)),),
        pairs=("fx",),
    )
    grid = default_grid(plant, design)
    ours = loop_margins(plant, design, delay_s=delay_s)[0]
    L = input_loops(plant, design, grid, delay_s=delay_s)[0]
    gm, pm, _sm, _wpc, wgc, _wms = ct.stability_margins(ct.frd(L, 2 * np.pi * grid))
    phase = np.degrees(np.angle(L[np.argmin(np.abs(grid - ours.crossover_hz))]))
    assert -360.0 < phase < 0.0
    assert ours.phase_margin_deg == pytest.approx(pm, abs=1e-3)
    assert 2 * np.pi * ours.crossover_hz == pytest.approx(wgc, rel=1e-4)
    assert ours.gain_margin_db == pytest.approx(20 * np.log10(gm), abs=1e-3)


def test_velocity_feedback_reports_lag_to_minus_180_not_wrapped_value():
    # A loop whose only gain crossover has positive phase (velocity feedback below resonance,
    # L ≈ g s/(s + a)): python-control wraps the phase margin negative; dampctl reports the
    # lag that brings L to −180° (documented), i.e. the wrapped value + 360°, and the delay
    # margin is that lag over ω_c.
    a = 2 * np.pi * 10.0
    f = np.geomspace(0.01, 1e3, 4000)
    m = siso_margins(_loop(lambda s: 28.6 * s / (s + a)), f)
    L = 28.6 * (2j * np.pi * f) / (2j * np.pi * f + a)
    _gm, pm, *_ = ct.stability_margins(ct.frd(L, 2 * np.pi * f))
    assert pm < 0.0
    assert 180.0 < m.phase_margin_deg < 360.0
    assert m.phase_margin_deg == pytest.approx(pm + 360.0, abs=1e-3)
    assert m.delay_margin_s == pytest.approx(
        np.radians(m.phase_margin_deg) / (2 * np.pi * m.crossover_hz), rel=1e-12
    )


def test_dvf_plant_loop_lags_at_each_crossover_match_wrapped_values():
    # DVF on an SDOF: two crossovers, +85° below and −85° above resonance. python-control
    # (returnall) gives the lower one wrapped negative; dampctl's lag there is that + 360°, and
    # the reported phase margin is the smaller lag (the upper crossover).
    plant = replace(sdof_plant(2.0, 8e4, 8.0), requirements=Requirements(loop_delay_s=5e-5))
    design = _dvf(plant, ["fv"], 72.0)
    ours = loop_margins(plant, design)[0]
    grid = default_grid(plant, design)
    L = input_loops(plant, design, grid)[0]
    _gm, pms, _sm, _wpc, wgcs, _wms = ct.stability_margins(
        ct.frd(L, 2 * np.pi * grid), returnall=True
    )
    lags = []
    for f in ours.crossovers_hz:
        value = input_loops(plant, design, np.array([f]))[0, 0]
        lags.append(np.degrees(np.mod(np.angle(value) + np.pi, 2 * np.pi)))
    assert sorted(np.mod(pms, 360.0)) == pytest.approx(sorted(lags), abs=1e-3)
    assert min(pms) < 0.0
    assert ours.phase_margin_deg == pytest.approx(min(lags), abs=1e-9)
    assert len(wgcs) == len(ours.crossovers_hz) == 2


def test_inserting_delay_margin_puts_loop_at_boundary():
    # L(jω_c) e^{−jω_c DM} = −1 exactly, and the poles with a fine Padé cascade sit on the
    # imaginary axis (stable 1 % below the margin, unstable 1 % above).
    plant = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    design = _dvf(plant, ["p1"], 150.0)
    m = loop_margins(plant, design, delay_s=1e-4)[0]
    fc = m.crossover_hz
    at = input_loops(plant, design, np.array([fc]), delay_s=1e-4 + m.delay_margin_s)[0, 0]
    assert abs(at + 1.0) < 1e-9
    wref = 2 * np.pi * fc * 1.5

    def max_real_part(extra):
        ctrl = loop_controller(plant, design, delay_s=1e-4 + extra, omega_ref=4 * wref)
        return np.max(loop_poles(plant, design, ctrl).real)

    assert max_real_part(0.99 * m.delay_margin_s) < 0 < max_real_part(1.01 * m.delay_margin_s)


def test_common_delay_margin_siso_equals_loop_delay_margin_and_mimo_boundary():
    plant = chain_plant([1.0, 0.5, 0.8], [5e5, 2e5, 3e5], damping=0.005)
    single = _dvf(plant, ["p1"], 100.0)
    dm = loop_margins(plant, single, delay_s=0.0)[0].delay_margin_s
    assert common_delay_margin(plant, single, delay_s=0.0).delay_s == pytest.approx(dm, rel=1e-8)
    both = _dvf(plant, ["p1", "p3"], 100.0)
    tau = common_delay_margin(plant, both, delay_s=0.0).delay_s
    # at τ one closed-loop pole pair is on the imaginary axis (poles with a fine Padé cascade)
    ctrl = loop_controller(plant, both, delay_s=tau, omega_ref=2 * np.pi * 2e3)
    assert abs(np.max(loop_poles(plant, both, ctrl).real)) < 1e-3 * plant.omegas[0]


def test_a_loop_at_zero_gain_changes_no_margin_of_the_others():
    # a tuned-off loop (gain 0, as the maximizing search may return) has L ≡ 0: no crossover
    # of its own, and the other loop's margins and the common delay margin are those without it
    plant = chain_plant([1.0, 0.5, 0.8], [5e5, 2e5, 3e5], damping=0.005)
    one = _dvf(plant, ["p1"], 100.0)
    with_off = _dvf(plant, ["p1", "p3"], 100.0)
    off = replace(with_off.loops[1], gain=0.0, branches=(Branch(gain=0.0),))
    with_off = replace(with_off, loops=(with_off.loops[0], off))
    alone = loop_margins(plant, one, delay_s=0.0)[0]
    both = loop_margins(plant, with_off, delay_s=0.0)
    assert both[0].delay_margin_s == pytest.approx(alone.delay_margin_s, rel=1e-9)
    assert both[1].crossover_hz is None
    common = common_delay_margin(plant, with_off, delay_s=0.0).delay_s
    assert common == pytest.approx(alone.delay_margin_s, rel=1e-6)


def test_disk_margins_siso_and_mimo_against_python_control():
    # SISO: α = min 2|1+L|/|1−L| equals control.disk_margins(skew=0) (Seiler, Packard &
    # Gahinet, "An introduction to disk margins", IEEE CSM 2020). MIMO: our σ̄ bound is never
    # larger than python-control's μ-based value (σ̄ ≥ μ).
    plant = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    omega = 2 * np.pi * np.geomspace(20, 2000, 300)
    for pairs in (["p1"], ["p1", "p2"]):
        design = _dvf(plant, pairs, 120.0)
        G = plant.statespace(design.actuators, design.sensors)
        L = ct.ss([], [], [], 120.0 * np.eye(len(pairs))) * G
        ours = disk_margins(plant, design, delay_s=0.0, roll_off=False, freq_hz=omega / 2 / np.pi)
        alpha, dgm, dpm = ct.disk_margins(L, omega, skew=0.0)
        # ours is refined off the 300-point grid: never above the grid's value, and equal to
        # python-control's on the same band sampled 330 times more densely
        assert ours.alpha <= alpha * (1 + 1e-9)
        dense = 2 * np.pi * np.geomspace(20, 2000, 100_001)
        if len(pairs) == 1:
            alpha, dgm, dpm = ct.disk_margins(L, dense, skew=0.0)
            assert ours.alpha == pytest.approx(alpha, rel=1e-8)
            assert ours.loop_alpha[0] == pytest.approx(alpha, rel=1e-8)
            gm, pm = disk_margin_from_alpha(ours.alpha)
            assert pm == pytest.approx(dpm, rel=1e-8)
            assert 10 ** (gm / 20) == pytest.approx(dgm, rel=1e-8)
        else:
            # MIMO: our σ̄ bound is never larger than python-control's μ-based value
            assert ours.alpha <= alpha * (1 + 1e-6)
            assert ours.alpha > 0.5 * alpha
            # and the σ̄ peak matches numpy's SVD of S − I/2 on the dense grid
            resp = L(dense * 1j)  # (n, n, f)
            S = np.linalg.inv(np.eye(2)[None] + np.moveaxis(resp, -1, 0))
            peak = np.max(np.linalg.svd(S - 0.5 * np.eye(2)[None], compute_uv=False)[:, 0])
            assert ours.alpha == pytest.approx(1 / peak, rel=1e-8)


@settings(max_examples=15)
@given(
    masses=st.lists(st.floats(0.2, 5.0), min_size=2, max_size=4),
    gain=st.floats(1.0, 2000.0),
    site=st.integers(0, 3),
)
def test_collocated_velocity_feedback_phase_margin_at_least_90_degrees(masses, gain, site):
    # A collocated force/velocity pair on a passive structure is positive real, so the loop
    # phase stays within ±90° (Balas 1979; Preumont, Vibration Control of Active Structures):
    # every crossover lag is ≥ 90° and there is no −180° phase crossover (GM infinite).
    n = len(masses)
    plant = chain_plant(masses, [1e5] * n, damping=0.01)
    pair = f"p{site % n + 1}"
    m = loop_margins(plant, _dvf(plant, [pair], gain), delay_s=0.0, roll_off=False)[0]
    assert m.phase_margin_deg >= 90.0 - 1e-6
    assert m.gain_margin_db == np.inf


def test_disk_margin_with_delay_is_refined_off_the_grid():
    # Issue 19: the all-loop disk margin read on the grid alone was optimistic. With a loop delay
    # the peak of |1 − L|/(2|1 + L|) (Seiler, Packard & Gahinet, IEEE CSM 2020) sits between
    # grid points; on a coarse grid the refined value equals the minimum of 2|1 + L|/|1 − L|
    # over a dense grid, L from python-control's frequency response of the plant times the
    # gain and e^{−jωT} (numpy), and is never above the coarse grid's own value.
    plant = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    delay = 3e-4
    design = _dvf(plant, ["p1"], 300.0)
    coarse = np.geomspace(20, 3000, 120)
    ours = disk_margins(plant, design, delay_s=delay, roll_off=False, freq_hz=coarse)
    G = plant.statespace(design.actuators, design.sensors)

    def alpha_on(f):
        w = 2 * np.pi * f
        resp = np.asarray(G.frequency_response(w).complex).reshape(-1)
        L = 300.0 * resp * np.exp(-1j * w * delay)
        return 2 * np.abs(1 + L) / np.abs(1 - L)

    grid_alpha = float(np.min(alpha_on(coarse)))
    near = ours.frequency_hz
    dense = np.min(alpha_on(np.linspace(0.995 * near, 1.005 * near, 200_001)))
    assert ours.alpha <= grid_alpha
    assert ours.alpha == pytest.approx(dense, rel=1e-7)
    assert ours.loop_alpha[0] == pytest.approx(dense, rel=1e-7)
    assert grid_alpha > dense * (1 + 1e-4)  # the grid alone would read it optimistic
