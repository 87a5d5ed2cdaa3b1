"""``dampctl plant new`` and the ``dampctl plant`` dispatcher, in-process."""

import io
import json
import re

import pytest

from dampctl.commands import plant, plant_new
from dampctl.commands.cli import main
from dampctl.model.plantfile import load_plant, parse_plant


def _run(*argv):
    out, err = io.StringIO(), io.StringIO()
    code = main(["plant", *map(str, argv)], stdout=out, stderr=err)
    return code, out.getvalue(), err.getvalue()


def test_starter_loads_and_shows_every_section_once(tmp_path):
    target = tmp_path / "starter.toml"
    code, out, err = _run("new", "-o", target)
    assert code == 0, err
    assert str(target) in out
    text = target.read_text()
    assert text == plant_new.STARTER
    for header in ("[[modes]]", "[sites]", "[[actuators]]", "[[sensors]]", "[[pairs]]",
                   "[[outputs]]", "[[disturbances]]", "[requirements]"):
        assert text.count(f"\n{header}\n") == 1, header
    built = load_plant(target)
    assert built.n_modes == 1 and len(built.pairs) == 1
    # a 1 kg, 50 Hz oscillator: the modal mass and frequency the comments promise
    assert built.modes[0].freq_hz == 50.0 and built.modes[0].modal_mass_kg == 1.0


def test_optional_keys_commented_out_are_valid_when_uncommented():
    # every "# key = value" line is a real key of its table: uncommenting all of them still
    # gives a valid plant, so the starter never teaches a wrong key
    lines = plant_new.STARTER.splitlines()
    uncommented = [re.sub(r"^# (\w+ = )", r"\1", line) for line in lines]
    assert uncommented != lines
    built = parse_plant("\n".join(uncommented) + "\n", source="uncommented")
    assert built.sensors[0].bandwidth_hz == 5000.0
    assert built.actuators[0].bandwidth_hz == 2000.0


def test_units_on_every_key():
    # each key line of the starter carries a comment (its unit or meaning), except names
    # and kinds and site rows, which are plain words
    for line in plant_new.STARTER.splitlines():
        match = re.match(r"^(\w+) = ", line)
        if match and match.group(1) not in {"name", "kind", "site", "actuator", "sensor",
                                             "mass", "frame"}:
            assert "#" in line, line


def test_refuses_to_overwrite_without_force(tmp_path):
    target = tmp_path / "p.toml"
    target.write_text("keep me")
    code, _, err = _run("new", "-o", target)
    assert code == 2
    assert err.startswith("dampctl plant new: error: ") and "--force" in err
    assert target.read_text() == "keep me"
    code, out, err = _run("new", "-o", target, "--force", "--json")
    assert code == 0, err
    data = json.loads(out)
    assert data["format"] == "dampctl-plant-new" and data["plant"] == str(target)
    assert target.read_text() == plant_new.STARTER


def test_dispatcher_needs_a_subcommand():
    code, _, err = _run()
    assert code == 2
    assert "SUBCOMMAND" in err


@pytest.mark.parametrize("module", plant.SUBCOMMANDS)
def test_each_subcommand_follows_the_protocol(module, capsys):
    for name in ("NAME", "HELP", "add_arguments", "run"):
        assert hasattr(module, name)
    code, _, _ = _run(module.NAME, "--help")
    assert code == 0
    assert f"dampctl plant {module.NAME}" in capsys.readouterr().out
