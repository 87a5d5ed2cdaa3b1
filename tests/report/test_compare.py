"""The comparison of options: every figure it shows against its source (closed forms, the
assessment, the simulations) and the rows it must hold."""

from dataclasses import replace

import numpy as np
import pytest
from repo import ROOT

from dampctl.analysis.assessment import assess
from dampctl.discrete.passive_move import simulate_passive_move
from dampctl.discrete.simulate import simulate_move
from dampctl.errors import UsageError
from dampctl.laws import dvf, tmd, viscous
from dampctl.laws.shapers import shaper_for_mode
from dampctl.model.components import PartPrice
from dampctl.model.plantfile import load_plant
from dampctl.report.compare import CompareRow, MoveSpec, compare_designs, render_comparison
from dampctl.report.figures_compare import comparison_pngs, plot_cost_result, plot_frf_overlay


@pytest.fixture(scope="module")
def setup():
    plant = load_plant(ROOT / "plants" / "oscillator.toml")
    plant = replace(plant, parts=(PartPrice("absorber", "absorber", 50.0, 300.0),))
    designs = [
        ("dvf", dvf.design(plant, ["coil_vel"])),
        ("tmd", tmd.design(plant, modes=[1], mass_ratio=0.05)),
        ("damper", viscous.design(plant, ("mass", "ground"), modes=[1],
                                  stiffness_n_per_m=4e4)),
    ]
    shaper = shaper_for_mode(plant.freqs_hz[0], plant.dampings[0], "zvd")
    move = MoveSpec(1e-6, "coil", "mass_x")
    return plant, designs, shaper, move


@pytest.fixture(scope="module")
def comparison(setup):
    plant, designs, shaper, move = setup
    return compare_designs(plant, designs, shaper=shaper, move=move)


def test_rows_and_kinds(comparison):
    kinds = [(r.name, r.kind) for r in comparison.rows]
    assert kinds == [
        ("as built", "none"), ("tmd", "passive"), ("damper", "passive"), ("zvd shaper", "shaping"),
        ("dvf", "active"), ("tmd + zvd shaper", "passive+shaping"),
        ("damper + zvd shaper", "passive+shaping"), ("dvf + zvd shaper", "active+shaping"),
    ]
    base = {r.name: r for r in comparison.rows}
    for name in ("tmd", "damper", "dvf"):
        combo = base[f"{name} + zvd shaper"]
        assert combo.min_damping == base[name].min_damping and combo.rms == base[name].rms
        assert combo.cost == base[name].cost
    assert base["zvd shaper"].rms == base["as built"].rms and base["zvd shaper"].cost == 0.0


def test_as_built_rms_is_the_closed_form(comparison, setup):
    # SDOF under a flat one-sided force PSD W₀: σ² = W₀/(4 c k) (S. H. Crandall & W. D. Mark,
    # Random Vibration in Mechanical Systems, 1963; from memory; c = 8 N·s/m, k = 8e4 N/m)
    plant = setup[0]
    assert comparison.rows[0].rms["mass_x"] == pytest.approx(np.sqrt(1e-4 / (4 * 8 * 8e4)),
                                                             rel=1e-9)
    assert comparison.rows[0].min_damping == pytest.approx(plant.dampings[0])


def test_design_rows_repeat_the_assessment(comparison, setup):
    plant, designs, _, _ = setup
    rows = {r.name: r for r in comparison.rows}
    for name, design in designs:
        a = assess(plant, design, samples=0)
        row = rows[name]
        assert row.min_damping == pytest.approx(a.modes[0].closed_damping, rel=1e-12)
        assert row.rms["mass_x"] == pytest.approx(a.response.outputs[0].closed_rms, rel=1e-12)
        peak = 20 * np.log10(np.max(comparison.open_frf[0]) / np.max(row.frf[0]))
        assert row.peak_reduction_db["mass_x"] == pytest.approx(peak)
    assert rows["dvf"].cost == 400.0 + 250.0  # the coil and the velocity pick-up
    assert rows["dvf"].effort == pytest.approx(
        assess(plant, designs[0][1], samples=0).response.effort[0].rms
    ) and rows["dvf"].effort_unit == "N"
    absorber = designs[1][1].parts[0]
    assert rows["tmd"].added_mass_kg == pytest.approx(absorber.mass_kg)
    assert rows["tmd"].cost == pytest.approx(50.0 + 300.0 * absorber.mass_kg)
    assert rows["damper"].cost is None and "no price for damper" in rows["damper"].notes[0]
    assert rows["tmd"].effort is None


def test_settling_times_are_the_simulations(comparison, setup):
    plant, designs, shaper, _move = setup
    rows = {r.name: r for r in comparison.rows}
    duration = 6.0 / (plant.dampings[0] * plant.omegas[0])
    kw = {"drive": "coil", "output": "mass_x", "distance_m": 1e-6}
    open_ = simulate_move(plant, None, duration_s=duration, **kw)
    assert rows["as built"].settling_time_s == open_.result.output("mass_x").settling_time_s
    active = simulate_move(plant, designs[0][1], duration_s=duration, **kw)
    assert rows["dvf"].settling_time_s == active.result.output("mass_x").settling_time_s
    shaped = simulate_passive_move(plant, designs[1][1], shaper=shaper,
                                   duration_s=duration + shaper.times_s[-1], **kw)
    assert rows["tmd + zvd shaper"].settling_time_s == shaped.result.output(
        "mass_x").settling_time_s
    assert rows["zvd shaper"].settling_time_s < rows["as built"].settling_time_s


def test_json_form(comparison, setup):
    data = comparison.to_dict()
    assert {"name", "kind", "min_damping", "rms", "settling_time_s", "cost"} <= set(
        data["rows"][0])
    no_move = compare_designs(setup[0], setup[1][:1]).to_dict()
    assert "settling_time_s" not in no_move["rows"][0] and no_move["move"] is None


def test_bad_requests(setup):
    plant, designs, shaper, _move = setup
    with pytest.raises(UsageError, match="needs a move"):
        compare_designs(plant, designs, shaper=shaper)
    with pytest.raises(UsageError, match="at least one design"):
        compare_designs(plant, [])
    with pytest.raises(UsageError, match="same name"):
        compare_designs(plant, [designs[0], designs[0]])
    with pytest.raises(UsageError, match="non-zero"):
        MoveSpec(0.0, "coil", "mass_x")
    with pytest.raises(UsageError, match="unknown drive"):
        compare_designs(plant, designs[:1], move=MoveSpec(1e-6, "nothing", "mass_x"))


def test_figures_and_page(comparison):
    pngs = comparison_pngs(comparison)
    assert set(pngs) == {"frf_overlay_mass_x.png", "cost_vs_result.png"}
    assert all(png.startswith(b"\x89PNG") for png in pngs.values())
    drawn = plot_frf_overlay(comparison.freq_hz, {"a": comparison.open_frf[0] / 2},
                             open_curve=comparison.open_frf[0], output="mass_x", unit="m")
    assert len(drawn.artists) == 2
    drawn = plot_cost_result(comparison)
    assert len(drawn.figure.axes) == 3  # damping, RMS, settling
    page = render_comparison(comparison, {"cost": pngs["cost_vs_result.png"]})
    assert page.startswith("<!DOCTYPE html>") and "Settling time (s)" in page
    assert "no price for damper" in page and "data:image/png;base64," in page


def test_row_json_keys():
    row = CompareRow("x", "active", "dvf", True, 0.1, {"o": 3.0}, {"o": 1e-9}, None, 0.5, "N",
                     0.0, 10.0, np.zeros((1, 2)))
    assert list(row.to_dict(False)) == ["name", "kind", "law", "stable", "min_damping",
                                        "peak_reduction_db", "rms", "effort", "effort_unit",
                                        "added_mass_kg", "cost", "notes"]
