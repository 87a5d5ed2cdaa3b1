"""``dampctl compare`` in-process: the table, the JSON keys of the issue, HTML and figures,
usage errors."""

import io
import json

import jsonschema
import pytest
from repo import ROOT

from dampctl.commands.cli import main
from dampctl.schemas import load_schema

OSCILLATOR = str(ROOT / "plants" / "oscillator.toml")


def _run(*argv):
    out, err = io.StringIO(), io.StringIO()
    code = main(["compare", *map(str, argv)], stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


@pytest.fixture(scope="module")
def designs(tmp_path_factory):
    folder = tmp_path_factory.mktemp("compare")
    made = {}
    for name, argv in {
        "dvf": ["--law", "dvf", "--pairs", "coil_vel"],
        "tmd": ["--law", "tmd", "--modes", "1", "--mass-ratio", "0.05"],
    }.items():
        path = folder / f"{name}.json"
        out, err = io.StringIO(), io.StringIO()
        assert main(["tune", OSCILLATOR, *argv, "-o", str(path)], stdout=out, stderr=err) in (0, 1)
        made[name] = path
    shaper = folder / "zv.json"
    assert main(["shape", OSCILLATOR, "--modes", "1", "--kind", "zv", "-o", str(shaper)],
                stdout=io.StringIO(), stderr=io.StringIO()) == 0
    made["shaper"] = shaper
    return folder, made


def test_compare_everything(designs):
    folder, made = designs
    code, out, err = _run(OSCILLATOR, made["tmd"], made["dvf"], "--shaper", made["shaper"],
                          "--move", "1e-6", "--drive", "coil", "--output", "mass_x",
                          "-o", folder / "compare.html", "--plots", folder / "figs", "--json")
    assert code == 0, err
    data = json.loads(out)
    assert data["format"] == "dampctl-compare"
    jsonschema.Draft202012Validator(load_schema("compare")).validate(data)
    kinds = [r["kind"] for r in data["rows"]]
    assert kinds == ["none", "passive", "shaping", "active", "passive+shaping", "active+shaping"]
    for row in data["rows"]:
        assert {"name", "kind", "min_damping", "rms", "settling_time_s", "cost"} <= set(row)
        assert set(row["rms"]) == {"mass_x"}
    assert (folder / "compare.html").read_text().startswith("<!DOCTYPE html>")
    assert sorted(p.name for p in (folder / "figs").iterdir()) == [
        "cost_vs_result.png", "frf_overlay_mass_x.png"]
    code, out, _ = _run(OSCILLATOR, made["tmd"], made["dvf"], "--names", "absorber,loop")
    assert code == 0
    assert "absorber" in out and "passive" in out and "settling" not in out


@pytest.mark.parametrize(
    ("extra", "message"),
    [
        (["--shaper", "zv.json"], "needs a move"),
        (["--move", "1e-6"], "needs all of --move"),
        (["--names", "a,b,c"], "3 names for 1 design"),
    ],
)
def test_usage_errors(designs, extra, message):
    _folder, made = designs
    extra = [str(made["shaper"]) if e == "zv.json" else e for e in extra]
    code, _, err = _run(OSCILLATOR, made["dvf"], *extra)
    assert code == 2 and message in err


def test_nothing_to_compare():
    code, _, err = _run(OSCILLATOR)
    assert code == 2 and "at least one design" in err
