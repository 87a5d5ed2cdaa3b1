"""The report's "Move and settle" section: one move four ways, in the HTML and from the CLI."""

import io

import numpy as np
import pytest
from repo import PLANTS

from dampctl.commands.cli import main
from dampctl.design import load_design
from dampctl.discrete.passive_move import simulate_passive_move
from dampctl.errors import UsageError
from dampctl.laws import dvf, tmd
from dampctl.model.components import Requirements
from dampctl.model.plant import ModalPlant
from dampctl.report.figures_time import plot_moves
from dampctl.report.html import ReportInputs, render_report
from dampctl.report.movesettle import LABELS, move_and_settle
from dampctl.testing import chain_plant


def _plant():
    base = chain_plant([1.0, 0.5], [5e5, 2e5], damping=0.01)
    return ModalPlant(modes=base.modes, sites=base.sites, actuators=base.actuators,
                      sensors=base.sensors, pairs=base.pairs,
                      requirements=Requirements(sample_rate_hz=5000.0, loop_delay_s=5e-5))


def test_four_runs_in_order_with_their_figures():
    plant = _plant()
    design = dvf.design(plant, ["p1", "p2"], gain=[60.0, 40.0], roll_off_hz=1000.0)
    moved = move_and_settle(plant, design, drive="f1", output="x2", distance_m=1e-6)
    rows = moved.summary["rows"]
    assert [r["label"] for r in rows] == list(LABELS)
    assert [r["loop"] for r in rows] == ["open", "open", "closed", "closed"]
    assert rows[0]["shaper"] is None and rows[1]["shaper"]["kind"] == "zvd"
    assert rows[1]["shaper"]["modes"] == [1, 2]  # the design's target modes
    # the shapers cancel the ringing the unshaped runs leave (Singer & Seering 1990)
    assert rows[1]["residual_rms"] < 1e-3 * rows[0]["residual_rms"]
    assert rows[3]["residual_rms"] < 1e-2 * rows[2]["residual_rms"]
    assert rows[2]["settling_time_s"] < rows[0]["settling_time_s"]
    assert moved.figure.startswith(b"\x89PNG")
    page = render_report(ReportInputs(check={"plant": "chain"}, design=design.to_dict(),
                                      assessment={}, move=moved.summary,
                                      move_figure=moved.figure))
    assert "<h2>Move and settle</h2>" in page and "damped and shaped" in page
    assert page.count("data:image/png;base64,") == 1


def test_plot_moves_draws_each_run():
    t = np.linspace(0, 0.1, 101)
    drawn = plot_moves(t, {"a": np.sin(t), "b": np.cos(t)}, output="x", target=0.0, band=0.1,
                       until_s=0.05)
    assert len(drawn.ax.get_lines()) == 2
    assert drawn.ax.get_lines()[0].get_xdata().size == 51


def test_passive_design_moves_with_its_parts_in_place():
    # the damped runs are the exact passive simulation (structure + absorber), the shaped run
    # the open loop shaped: the absorber speeds the settling, as its damping says it must
    plant = _plant()
    design = tmd.design(plant, modes=[1], mass_ratio=0.05)
    moved = move_and_settle(plant, design, drive="f1", output="x2", distance_m=1e-6)
    rows = moved.summary["rows"]
    assert [r["label"] for r in rows] == list(LABELS)
    alone = simulate_passive_move(plant, design, drive="f1", output="x2", distance_m=1e-6,
                                  duration_s=moved.summary["setup"]["duration_s"])
    settled = alone.result.output("x2").settling_time_s
    assert rows[2]["settling_time_s"] == pytest.approx(settled)
    assert rows[2]["settling_time_s"] < rows[0]["settling_time_s"]
    # the default shaper cancels the target mode only (mode 2 still rings a little)
    assert rows[1]["residual_rms"] < 0.5 * rows[0]["residual_rms"]
    with pytest.raises(UsageError, match="step only"):
        move_and_settle(plant, design, drive="f1", output="x2", distance_m=1e-6,
                        profile="trapezoid", max_velocity=1e-3, max_acceleration=1.0)


def test_report_command_with_move_options(tmp_path):
    plant = str(PLANTS / "oscillator.toml")
    design = tmp_path / "dvf.json"
    out, err = io.StringIO(), io.StringIO()
    assert main(["tune", plant, "--law", "dvf", "--pairs", "coil_vel", "-o", str(design)],
                stdout=out, stderr=err) in (0, 1)
    load_design(design)
    page = tmp_path / "r.html"
    code = main(["report", plant, str(design), "-o", str(page), "--move", "1e-6", "--drive",
                 "coil", "--move-output", "mass_x", "--settle-band", "2%"],
                stdout=out, stderr=err)
    assert code in (0, 1), err.getvalue()
    text = page.read_text()
    assert "Move and settle" in text and '<span class="num">±2e-08</span> m' in text
    err = io.StringIO()
    assert main(["report", plant, str(design), "-o", str(tmp_path / "x.html"), "--drive",
                 "coil"], stdout=io.StringIO(), stderr=err) == 2
    assert "give --move DIST" in err.getvalue()
    err = io.StringIO()
    assert main(["report", plant, str(design), "-o", str(tmp_path / "x.html"), "--move",
                 "1e-6"], stdout=io.StringIO(), stderr=err) == 2
    assert "--move needs --drive" in err.getvalue()
