"""``dampctl check --measured`` and ``dampctl report --measured``: the plant held against
measurement, with warnings naming mode and channel."""

import dataclasses
import io
import json

import jsonschema
import numpy as np
import pytest
from measuredplants import FREQS, SITES, four_mode_plant, noisy_four_mode_frf

from dampctl.commands.cli import main
from dampctl.model.plantfile import dump_plant
from dampctl.schemas import load_schema


def run(*args: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    code = main([*args], stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("measured")
    freq, h = noisy_four_mode_frf(31, np.linspace(60.0, 800.0, 741))
    np.savez(folder / "test.npz", freq_hz=freq, frf=h, inputs=np.array(["hammer"]),
             outputs=np.array(SITES), output_kind=np.array(["acceleration"] * 5))
    plant = four_mode_plant()
    (folder / "right.toml").write_text(dump_plant(plant))
    modes = list(plant.modes)
    modes[1] = dataclasses.replace(modes[1], freq_hz=FREQS[1] * 0.95)
    (folder / "wrong.toml").write_text(dump_plant(dataclasses.replace(plant,
                                                                      modes=tuple(modes))))
    return folder


def test_check_json_has_the_comparison(files):
    code, out, err = run("check", str(files / "right.toml"), "--measured",
                         str(files / "test.npz"), "--json")
    assert code == 0, err
    data = json.loads(out)
    jsonschema.validate(data, load_schema("check"))
    measured = data["measured"]
    assert [c["channel"] for c in measured["channels"]] == [f"{s}/hammer" for s in SITES]
    assert all(c["error"] < 0.013 for c in measured["channels"])
    assert [m["mode"] for m in measured["modes"]] == [1, 2, 3, 4]
    assert all(m["mac"] > 0.999 for m in measured["modes"])
    assert measured["warnings"] == []


def test_check_warns_naming_mode_and_channel_and_draws(files, tmp_path):
    code, out, err = run("check", str(files / "wrong.toml"), "--measured",
                         str(files / "test.npz"), "--plots", str(tmp_path / "figs"))
    assert code == 0, err
    assert "against measurement" in out
    assert "mode 2 (237.5 Hz): measured at 250 Hz (+5.3%, tolerance 2%), strongest on channel" \
        in out
    assert sorted(p.name for p in (tmp_path / "figs").iterdir()) == sorted(
        f"measured_{s}_hammer.png" for s in SITES)


def test_check_refusals(files, tmp_path):
    code, _, err = run("check", str(files / "right.toml"), "--plots", str(tmp_path))
    assert code == 2 and "--plots: the figures compare the plant with measurement" in err
    code, _, err = run("check", str(files / "right.toml"), "--measured",
                       str(files / "missing.npz"))
    assert code == 2 and "missing.npz: cannot read the file" in err


def test_report_shows_the_comparison(files, tmp_path):
    from dampctl.model.components import Pair, Sensor

    plant = four_mode_plant()
    # a velocity sensor at the driving point, so that a DVF loop can be tuned on the plant
    plant = dataclasses.replace(plant, sensors=(*plant.sensors, Sensor("vel", "velocity",
                                                                        site="p0")),
                                pairs=(Pair("hammer_vel", "hammer", "vel"),))
    plant_path, design_path = tmp_path / "dvf.toml", tmp_path / "design.json"
    plant_path.write_text(dump_plant(plant))
    code, _, err = run("tune", str(plant_path), "--law", "dvf", "--pairs", "hammer_vel",
                         "-o", str(design_path))
    assert code in (0, 1), err
    report = tmp_path / "r.html"
    code, _, err = run("report", str(plant_path), str(design_path), "-o", str(report),
                         "--measured", str(files / "test.npz"))
    assert code in (0, 1), err
    html = report.read_text()
    assert "<h2>Plant against measurement</h2>" in html
    assert "Plant against measurement — p0/hammer" in html
    assert "<td class=\"text\">p4/hammer</td>" in html
