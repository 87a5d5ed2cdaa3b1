"""``dampctl size`` in-process: exit codes, JSON, human table, figures."""

import io
import json

import pytest

from dampctl.commands.cli import main
from dampctl.model.components import Actuator, Mode, Pair, Requirements, Sensor
from dampctl.model.plant import ModalPlant
from dampctl.model.plantfile import dump_plant


def _plant_file(tmp_path, *, min_damping=0.04):
    shapes = {"a": [1.0, 0.9, 0.8], "b": [0.5, 0.0, 0.2], "c": [0.0, 0.6, -0.3]}
    plant = ModalPlant(
        modes=[Mode(12.0, 0.005), Mode(27.0, 0.005), Mode(51.0, 0.005)],
        sites=shapes,
        actuators=[Actuator(f"f{s}", "force", site=s, cost=200.0) for s in shapes],
        sensors=[Sensor(f"v{s}", "velocity", site=s, cost=80.0) for s in shapes],
        pairs=[Pair(f"p{s}", f"f{s}", f"v{s}") for s in shapes],
        requirements=Requirements(modes=(1, 2, 3), min_damping=min_damping),
        title="three-mode test structure",
    )
    path = tmp_path / "plant.toml"
    path.write_text(dump_plant(plant))
    return path


def _run(args):
    out, err = io.StringIO(), io.StringIO()
    code = main(args, stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


def test_json_recommends_and_exits_zero(tmp_path):
    code, out, _ = _run(["size", str(_plant_file(tmp_path)), "--max-pairs", "2", "--json"])
    assert code == 0
    data = json.loads(out)
    assert data["law"] == "dvf" and data["target_damping"] == 0.04
    assert data["recommended"] == 1 and data["recommended_pairs"] == ["pa"]
    assert [r["pairs_used"] for r in data["rows"]] == [1, 2]
    for row in data["rows"]:
        assert {"pairs_used", "chosen", "min_damping", "cost", "method"} <= set(row)
    assert data["rows"][0]["cost"] == pytest.approx(280.0)


def test_unreachable_target_exits_one_and_says_so(tmp_path):
    code, out, _ = _run(
        ["size", str(_plant_file(tmp_path)), "--max-pairs", "1", "--target-damping", "0.9"]
    )
    assert code == 1
    assert "no set of up to 1 pair(s) meets the requirements" in out
    assert "limited by mode" in out
    assert "rank rule:" in out and "Safety:" in out


def test_bad_input_exits_two(tmp_path):
    path = str(_plant_file(tmp_path))
    code, _, err = _run(["size", path, "--max-pairs", "0"])
    assert code == 2 and "argument --max-pairs: must be in [1, 64], got 0" in err
    code, _, err = _run(["size", path, "--law", "lqg"])
    assert code == 2 and "invalid choice" in err
    code, _, err = _run(["size", path, "--candidates", "pa,nope"])
    assert code == 2 and "unknown pair 'nope'" in err
    code, _, err = _run(["size", str(tmp_path / "missing.toml")])
    assert code == 2


def test_plots_are_written(tmp_path):
    folder = tmp_path / "figs"
    code, out, _ = _run(
        ["size", str(_plant_file(tmp_path)), "--max-pairs", "2", "--plots", str(folder)]
    )
    assert code == 0 and "sizing_damping_cost.png" in out
    names = sorted(p.name for p in folder.iterdir())
    assert names == ["sizing_damping_cost.png", "sizing_mode_damping.png"]
    assert (folder / names[0]).read_bytes()[:4] == b"\x89PNG"
    code, _, err = _run(
        ["size", str(_plant_file(tmp_path)), "--max-pairs", "1", "--plots", str(folder)]
    )
    assert code == 2 and "already exists" in err


def test_human_table_states_the_command_unit(tmp_path):
    # force actuators only: the RMS command is a force in N
    code, out, _ = _run(["size", str(_plant_file(tmp_path)), "--max-pairs", "1"])
    assert code == 0
    assert "max RMS command (N)" in out and "Δmaximized/cost" in out
