"""``dampctl plant fit``: the plant written, the exact --json keys, figures, and refusals."""

import io
import json

import jsonschema
import numpy as np
import pytest
from measuredplants import SITES, noisy_four_mode_frf

from dampctl.commands.cli import main
from dampctl.model.plantfile import load_plant
from dampctl.schemas import load_schema


def run(*args: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    code = main(["plant", "fit", *args], stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


@pytest.fixture(scope="module")
def frf_file(tmp_path_factory):
    freq, h = noisy_four_mode_frf(21, np.linspace(60.0, 800.0, 741))
    path = tmp_path_factory.mktemp("frf") / "test.npz"
    np.savez(path, freq_hz=freq, frf=h, inputs=np.array(["hammer"]), outputs=np.array(SITES),
             output_kind=np.array(["acceleration"] * 5))
    return path


def test_json_keys_and_the_plant_written(frf_file, tmp_path):
    target = tmp_path / "plant.toml"
    code, out, err = run(str(frf_file), "-o", str(target), "--driving-point", "p0/hammer",
                         "--actuator", "coil=hammer", "--sensor", "acc=p0", "--json")
    assert code == 0, err
    data = json.loads(out)
    jsonschema.validate(data, load_schema("plant-fit"))
    assert data["format"] == "dampctl-plant-fit"
    assert {"modes", "fit_error", "orders", "plant"} <= set(data)
    assert [set(m) for m in data["modes"]] == [{"mode", "freq_hz", "damping",
                                                "modal_mass_kg"}] * 4
    np.testing.assert_allclose([m["freq_hz"] for m in data["modes"]],
                               [120.0, 250.0, 255.0, 610.0], rtol=0.002)
    assert set(data["fit_error"]) == {f"{s}/hammer" for s in SITES}
    assert data["orders"][0]["order"] == 1 and data["plant"] == str(target)
    plant = load_plant(target)
    assert [a.name for a in plant.actuators] == ["coil"]
    assert [(s.name, s.kind, s.site) for s in plant.sensors] == [("acc", "acceleration", "p0")]
    assert [p.name for p in plant.pairs] == ["coil_acc"]
    assert sorted(plant.sites) == SITES
    text = target.read_text()
    assert text.startswith("# Modes fitted to test.npz") and "mass-normalized" in text


def test_text_output_plots_and_force(frf_file, tmp_path):
    target, plots = tmp_path / "plant.toml", tmp_path / "figs"
    code, out, err = run(str(frf_file), "-o", str(target), "--driving-point", "p0/hammer",
                         "--plots", str(plots), "--order", "10")
    assert code == 0, err
    assert "4 modes, stable over orders, chosen automatically" in out
    assert "p0/hammer" in out and f"wrote {target}" in out
    names = sorted(p.name for p in plots.iterdir())
    assert names == sorted(["stability_chart.png"] + [f"fit_{s}_hammer.png" for s in SITES])
    assert (plots / "stability_chart.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    before = target.read_text()
    code, out, err = run(str(frf_file), "-o", str(target))
    assert code == 2 and "already exists (use --force to replace)" in err
    assert target.read_text() == before
    code, out, err = run(str(frf_file), "-o", str(target), "--force")
    assert code == 0, err
    assert "UNSCALED" in target.read_text()


def test_csv_with_output_kinds(tmp_path):
    freq, h = noisy_four_mode_frf(22, np.linspace(60.0, 800.0, 741))
    header = ["freq_hz"] + [f"{s}/hammer {p}" for s in SITES for p in ("re", "im")]
    rows = np.column_stack([freq] + [part(h[o, 0]) for o in range(5)
                                     for part in (np.real, np.imag)])
    path = tmp_path / "test.csv"
    np.savetxt(path, rows, delimiter=",", header=",".join(header), comments="")
    code, out, err = run(str(path), "-o", str(tmp_path / "p.toml"), "--driving-point",
                         "p0/hammer", "--output-kind", "acceleration", "--modes-hz",
                         "120,610", "--json")
    assert code == 0, err
    np.testing.assert_allclose([m["freq_hz"] for m in json.loads(out)["modes"]],
                               [120.0, 610.0], rtol=0.002)
    code, out, err = run(str(path), "-o", str(tmp_path / "q.toml"))
    assert code == 2 and "does not say what its outputs measure" in err


@pytest.mark.parametrize("args, message", [
    (["--band", "800-100"], "--band: expected LO-HI"),
    (["--order", "many"], "--order: expected auto or an integer"),
    (["--modes-hz", "1,x"], "--modes-hz: expected frequencies"),
    (["--driving-point", "p9/hammer"], "unknown channel 'p9/hammer'"),
    (["--actuator", "coil"], "--actuator: expected NAME=VALUE"),
    (["--sensor", "s=nowhere"], "'nowhere' is not a measured output"),
    (["--output-kind", "acceleration"], "states its output kinds"),
])
def test_bad_options_are_one_line_and_write_nothing(frf_file, tmp_path, args, message):
    target = tmp_path / "plant.toml"
    code, out, err = run(str(frf_file), "-o", str(target), *args)
    assert code == 2, out
    assert message in err and err.count("\n") == 1 and err.startswith("dampctl plant fit: error")
    assert not target.exists()


def test_parse_band_accepts_exponents():
    from dampctl.commands.plant_fit import parse_band

    assert parse_band("50-800") == (50.0, 800.0)
    assert parse_band("1e-3-2e3") == (0.001, 2000.0)
    assert parse_band(None) is None
