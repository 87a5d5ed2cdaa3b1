"""Plant files: every bad input gives one line naming file, field and problem; round trip."""

import dataclasses
import io
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from repo import ROOT

from dampctl.commands.cli import main
from dampctl.errors import PlantError, PlantFileError
from dampctl.model.plantfile import dump_plant, load_plant, parse_plant
from dampctl.testing import assert_plant_allclose

BASE = """\
title = "three-mode test plant"

[[modes]]
label = "first"
freq_hz = 100.0
damping = 0.01

[[modes]]
freq_hz = 250.0
damping = 0.02
modal_mass_kg = 0.5

[[modes]]
freq_hz = 700.0
damping = 0.005

[sites]
a = [1.0, 0.5, -0.2]
b = [0.3, -0.8, 0.6]
c = [0.0, 0.1, 0.9]

[[actuators]]
name = "coil"
kind = "force"
site = "a"
max_force_n = 20.0

[[actuators]]
name = "pzt"
kind = "strut"
between = ["b", "c"]
stiffness_n_per_m = 2e6

[[sensors]]
name = "vel"
kind = "velocity"
site = "a"

[[sensors]]
name = "load"
kind = "force"
actuator = "pzt"

[[pairs]]
name = "p1"
actuator = "coil"
sensor = "vel"

[[pairs]]
name = "p2"
actuator = "pzt"
sensor = "load"
static_gain = -1.5e6

[[outputs]]
name = "tip"
kind = "displacement"
site = "c"

[[disturbances]]
name = "floor"
site = "b"
psd = [[1.0, 1e-3], [100.0, 1e-3], [1000.0, 1e-5]]

[requirements]
modes = [1, 2]
min_damping = 0.05
sample_rate_hz = 20000.0
loop_delay_s = 5e-5
min_gain_margin_db = 6.0
min_phase_margin_deg = 35.0
max_rms = { tip = 1e-8 }
"""


def replace(old: str, new: str, count: int = 1) -> str:
    assert BASE.count(old) >= count, old
    return BASE.replace(old, new, count)


def replace_nth(old: str, new: str, n: int) -> str:
    parts = BASE.split(old)
    assert len(parts) > n, old
    return old.join(parts[:n]) + new + old.join(parts[n:])


# (id, text, field, words in the problem)
BAD = [
    (
        "zero frequency",
        replace("freq_hz = 100.0", "freq_hz = 0.0"),
        "modes[1].freq_hz",
        "must be in [1e-06, 1e+07] Hz",
    ),
    (
        "negative frequency",
        replace("freq_hz = 250.0", "freq_hz = -250.0"),
        "modes[2].freq_hz",
        "must be in [1e-06, 1e+07] Hz",
    ),
    (
        "damping 1",
        replace("damping = 0.005", "damping = 1.0"),
        "modes[3].damping",
        "must be in [0, 1)",
    ),
    (
        "negative damping",
        replace("damping = 0.005", "damping = -0.01"),
        "modes[3].damping",
        "must be in [0, 1)",
    ),
    (
        "nan frequency",
        replace("freq_hz = 700.0", "freq_hz = nan"),
        "modes[3].freq_hz",
        "must be finite",
    ),
    (
        "inf damping",
        replace("damping = 0.02", "damping = inf"),
        "modes[2].damping",
        "must be finite",
    ),
    (
        "nan in shape",
        replace("b = [0.3, -0.8, 0.6]", "b = [0.3, nan, 0.6]"),
        "sites.b[2]",
        "must be finite, got nan",
    ),
    (
        "short shape row",
        replace("c = [0.0, 0.1, 0.9]", "c = [0.0, 0.1]"),
        "sites.c",
        "has 2 values but the plant has 3 modes",
    ),
    (
        "text in shape",
        replace("c = [0.0, 0.1, 0.9]", 'c = [0.0, "x", 0.9]'),
        "sites.c[2]",
        "expected a number, got 'x' (a string)",
    ),
    (
        "unknown site",
        replace('site = "a"\nmax_force_n', 'site = "zz"\nmax_force_n'),
        "actuators[1].site",
        "unknown site 'zz'",
    ),
    (
        "unknown strut site",
        replace('between = ["b", "c"]', 'between = ["b", "q"]'),
        "actuators[2].between[2]",
        "unknown site 'q'",
    ),
    (
        "unknown pair actuator",
        replace('actuator = "coil"', 'actuator = "coil9"'),
        "pairs[1].actuator",
        "unknown actuator 'coil9'",
    ),
    (
        "unknown pair sensor",
        replace('sensor = "vel"', 'sensor = "velo"'),
        "pairs[1].sensor",
        "unknown sensor 'velo'",
    ),
    (
        "unknown output site",
        replace('site = "c"', 'site = "d"'),
        "outputs[1].site",
        "unknown site 'd'",
    ),
    (
        "duplicate actuator",
        replace('name = "pzt"', 'name = "coil"'),
        "actuators[2].name",
        "duplicate name 'coil'",
    ),
    (
        "duplicate pair",
        replace('name = "p2"', 'name = "p1"'),
        "pairs[2].name",
        "duplicate name 'p1'",
    ),
    (
        "force sensor on a force actuator",
        replace('actuator = "pzt"\n\n[[pairs]]', 'actuator = "coil"\n\n[[pairs]]'),
        "sensors[2].actuator",
        "force sensor needs a strut",
    ),
    (
        "force sensor without actuator",
        replace('actuator = "pzt"\n\n[[pairs]]', "\n[[pairs]]"),
        "sensors[2].actuator",
        "a force sensor needs actuator",
    ),
    (
        "missing damping",
        replace("damping = 0.02\n", ""),
        "modes[2].damping",
        "missing required key",
    ),
    (
        "missing modes",
        BASE.split("[sites]")[0].split("[[modes]]")[0]
        + "[sites]"
        + BASE.split("[sites]")[1].replace("[1.0, 0.5, -0.2]", "[1.0]"),
        "modes",
        "missing required key",
    ),
    (
        "missing strut stiffness",
        replace("stiffness_n_per_m = 2e6\n", ""),
        "actuators[2].stiffness_n_per_m",
        "a strut needs stiffness_n_per_m",
    ),
    (
        "unknown mode key",
        replace("freq_hz = 100.0", "freq_hz = 100.0\nfrequency = 100.0"),
        "modes[1].frequency",
        "unknown key",
    ),
    ("unknown top key", "colour = 3\n" + BASE, "colour", "unknown key"),
    (
        "unknown requirement key",
        replace("min_damping = 0.05", "min_zeta = 0.05"),
        "requirements.min_zeta",
        "unknown key",
    ),
    (
        "requirement on a missing mode",
        replace("modes = [1, 2]", "modes = [1, 4]"),
        "requirements.modes[2]",
        "mode 4 does not exist",
    ),
    (
        "max_rms of unknown output",
        replace("max_rms = { tip = 1e-8 }", "max_rms = { top = 1e-8 }"),
        "requirements.max_rms.top",
        "unknown output 'top'",
    ),
    (
        "bad psd table",
        replace("[1000.0, 1e-5]", "[50.0, 1e-5]"),
        "disturbances[1].psd",
        "increasing",
    ),
    (
        "static gain on a velocity pair",
        replace('sensor = "vel"', 'sensor = "vel"\nstatic_gain = 1.0'),
        "pairs[1].static_gain",
        "static_gain applies to displacement-like or force",
    ),
    (
        "unknown actuator kind",
        replace('kind = "strut"', 'kind = "piezo"'),
        "actuators[2].kind",
        "kind must be one of force, strut",
    ),
    ("wrong type", replace('name = "vel"', "name = 3"), "sensors[1].name", "expected a string"),
    (
        "coupling out of range",
        replace("stiffness_n_per_m = 2e6", "stiffness_n_per_m = 2e6\ncoupling_k = 1.2"),
        "actuators[2].coupling_k",
        "must be in (0, 1)",
    ),
    (
        "capacitance on a force actuator",
        replace('kind = "force"', 'kind = "force"\ncapacitance_f = 1e-6'),
        "actuators[1].capacitance_f",
        "only a piezoelectric strut",
    ),
    (
        "unknown part kind",
        BASE + '\n[[parts]]\nname = "tmd"\nkind = "spring"\n',
        "parts[1].kind",
        "kind must be one of absorber, damper, r_shunt, rl_shunt",
    ),
    (
        "two prices of one kind",
        BASE + '\n[[parts]]\nname = "a"\nkind = "damper"\n\n[[parts]]\nname = "b"\n'
        'kind = "damper"\n',
        "parts[2].kind",
        "one price per kind",
    ),
    (
        "price per kg of a damper",
        BASE + '\n[[parts]]\nname = "a"\nkind = "damper"\ncost_per_kg = 3.0\n',
        "parts[1].cost_per_kg",
        "only an absorber",
    ),
]


@pytest.mark.parametrize(
    ("text", "field", "problem"), [b[1:] for b in BAD], ids=[b[0] for b in BAD]
)
def test_bad_plant_file(tmp_path: Path, text: str, field: str, problem: str):
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    before = sorted(p.name for p in tmp_path.iterdir())
    # the library names file, field and problem: "<file>: <field>: <problem>"
    with pytest.raises(PlantError) as caught:
        load_plant(path)
    message = str(caught.value)
    assert message.startswith(f"{path}: {field}: "), message
    assert problem in message
    assert caught.value.field == field
    # the command line prints exactly that one line and exits 2, no traceback
    out, err = io.StringIO(), io.StringIO()
    assert main(["check", str(path)], stdout=out, stderr=err) == 2
    lines = err.getvalue().splitlines()
    assert lines == [f"dampctl check: error: {message}"]
    assert "Traceback" not in err.getvalue()
    assert out.getvalue() == ""
    assert sorted(p.name for p in tmp_path.iterdir()) == before


def test_not_toml(tmp_path: Path):
    path = tmp_path / "notes.toml"
    path.write_text("this is [not toml\n", encoding="utf-8")
    with pytest.raises(PlantFileError, match=r"notes\.toml: not valid TOML"):
        load_plant(path)
    err = io.StringIO()
    assert main(["check", str(path)], stdout=io.StringIO(), stderr=err) == 2
    assert len(err.getvalue().splitlines()) == 1
    assert "not valid TOML" in err.getvalue()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["notes.toml"]


def test_missing_file(tmp_path: Path):
    path = tmp_path / "absent.toml"
    with pytest.raises(PlantFileError, match="cannot read the plant file"):
        load_plant(path)
    err = io.StringIO()
    assert main(["check", str(path)], stdout=io.StringIO(), stderr=err) == 2
    assert len(err.getvalue().splitlines()) == 1
    assert list(tmp_path.iterdir()) == []


def test_binary_file(tmp_path: Path):
    path = tmp_path / "blob.toml"
    path.write_bytes(b"\xff\xfe\x00garbage")
    with pytest.raises(PlantFileError, match="not a text"):
        load_plant(path)


def test_base_file_is_valid_and_read_as_written(tmp_path: Path):
    plant = parse_plant(BASE, source="base.toml")
    assert plant.title == "three-mode test plant"
    assert [m.freq_hz for m in plant.modes] == [100.0, 250.0, 700.0]
    assert plant.modes[1].modal_mass_kg == 0.5
    assert plant.modes[0].label == "first"
    assert plant.actuator("pzt").between == ("b", "c")
    assert plant.pair("p2").static_gain == -1.5e6
    assert plant.requirements.modes == (1, 2)
    assert dict(plant.requirements.max_rms) == {"tip": 1e-8}
    np.testing.assert_array_equal(plant.sites["b"], [0.3, -0.8, 0.6])
    psd = plant.disturbance("floor").psd_at(np.array([10.0, 100.0, 2000.0]))
    np.testing.assert_allclose(psd, [1e-3, 1e-3, 0.0])


def test_round_trip(tmp_path: Path):
    plant = parse_plant(BASE)
    text = dump_plant(plant)
    path = tmp_path / "again.toml"
    path.write_text(text, encoding="utf-8")
    again = load_plant(path)
    assert again.fingerprint == plant.fingerprint
    assert again.requirements == plant.requirements
    assert again.outputs == plant.outputs
    np.testing.assert_array_equal(again.disturbances[0].psd, plant.disturbances[0].psd)
    assert_plant_allclose(again, plant, rtol=1e-15)
    assert dump_plant(again) == text


@pytest.mark.parametrize("name", ["scanning_stage", "light_truss", "oscillator"])
def test_example_plants_round_trip(name: str):
    root = ROOT
    plant = load_plant(root / "plants" / f"{name}.toml")
    again = parse_plant(dump_plant(plant))
    assert again.fingerprint == plant.fingerprint
    assert_plant_allclose(again, plant, rtol=1e-15)


def readme_section() -> str:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    start = text.index("## The plant file")
    return text[start : text.index("\n## ", start + 1)]


def test_piezo_keys_and_part_prices(tmp_path: Path):
    text = replace("stiffness_n_per_m = 2e6", "stiffness_n_per_m = 2e6\ncapacitance_f = 1e-6\n"
                   "coupling_k = 0.4")
    text += ('\n[[parts]]\nname = "tuned mass"\nkind = "absorber"\ncost = 50.0\n'
             'cost_per_kg = 200.0\n')
    plant = parse_plant(text)
    strut = plant.actuator("pzt")
    assert strut.piezo and strut.capacitance_f == 1e-6 and strut.coupling_k == 0.4
    assert plant.part_price("absorber", 0.5) == pytest.approx(150.0)
    assert plant.part_price("damper") is None
    again = parse_plant(dump_plant(plant))
    assert again.parts == plant.parts and again.actuator("pzt") == strut
    # prices do not enter the fingerprint; the piezo keys do, and only when set
    bare = parse_plant(BASE)
    assert parse_plant(BASE + '\n[[parts]]\nname = "d"\nkind = "damper"\n').fingerprint == (
        bare.fingerprint
    )
    assert plant.fingerprint != bare.fingerprint


def test_readme_documents_every_key():
    from dampctl.model import plantfile

    section = readme_section()
    keys = set(plantfile._TOP_KEYS) | set(plantfile._REQUIREMENT_KEYS)
    for required, optional in plantfile._KEYS.values():
        keys |= required | optional
    missing = sorted(k for k in keys if f"`{k}`" not in section and f"[{k}]" not in section)
    assert not missing, f"README 'The plant file' does not document: {missing}"


def test_readme_example_is_a_valid_plant():
    section = readme_section()
    example = section.split("```toml\n", 1)[1].split("```", 1)[0]
    plant = parse_plant(example, source="README example")
    assert plant.n_modes == 1
    assert plant.omegas[0] == pytest.approx(200.0, rel=1e-12)


# Any text a user may put in a title, a label or a name reads back unchanged: the writer is
# tomli-w (TOML 1.0 basic strings escape quotes, backslashes and every control character).
AWKWARD = [
    'two\nlines',
    'tab\there, "quoted", back\\slash',
    "bell\x07 escape\x1b delete\x7f nul\x00",
    "carriage\rreturn",
    "'''triple''' \"\"\"quotes\"\"\"",
    "Ünïcødé ζ ω₀ 振動 \u2028 \ufeff",
    "# not a comment",
    "",
]


@pytest.mark.parametrize("text", AWKWARD)
def test_any_title_label_and_name_round_trips(text: str):
    plant = parse_plant(BASE)
    mode = dataclasses.replace(plant.modes[0], label=text)
    odd_site = text or "empty"  # a site name is a key; an empty key is allowed by TOML too
    sites = {**plant.sites, odd_site: plant.sites["a"]}
    plant = dataclasses.replace(plant, title=text, modes=(mode, *plant.modes[1:]), sites=sites)
    again = parse_plant(dump_plant(plant))
    assert again.title == text
    assert again.modes[0].label == text
    np.testing.assert_array_equal(again.sites[odd_site], plant.sites["a"])
    assert again.fingerprint == plant.fingerprint


@settings(max_examples=60, deadline=None)
@given(st.text())
def test_any_text_title_round_trips(text: str):
    plant = dataclasses.replace(parse_plant(BASE), title=text)
    assert parse_plant(dump_plant(plant)).title == text
