"""Command-line habits: ``-`` reads the plant from standard input, ``tune -o -`` writes the
design on standard output, ``--quiet`` silences progress and step messages."""

from __future__ import annotations

import io
import json
import subprocess
import sys

import pytest
from repo import PLANTS

from dampctl.commands import cli
from dampctl.design import design_from_dict

OSCILLATOR = PLANTS / "oscillator.toml"


def _dampctl(*argv, stdin: bytes = b""):
    return subprocess.run(
        [sys.executable, "-m", "dampctl", *argv], input=stdin, capture_output=True, check=False
    )


def test_plant_from_standard_input_and_design_to_standard_output(tmp_path):
    text = OSCILLATOR.read_bytes()
    checked = _dampctl("check", "-", "--json", stdin=text)
    assert checked.returncode == 0, checked.stderr
    assert json.loads(checked.stdout)["plant"] == "single-mode oscillator (tutorial)"
    tuned = _dampctl("tune", "-", "--law", "dvf", "--pairs", "coil_vel", "-o", "-", stdin=text)
    assert tuned.returncode == 0, tuned.stderr
    design = json.loads(tuned.stdout)  # standard output holds the design file and nothing else
    assert design["format"] == "dampctl-design"
    design_from_dict(design)  # a design file the other commands read
    assert b"design written to <stdout>" in tuned.stderr  # the summary went beside it
    assert b"\r" not in tuned.stderr
    (tmp_path / "design.json").write_bytes(tuned.stdout)
    assessed = _dampctl("assess", "-", str(tmp_path / "design.json"), "--json", stdin=text)
    assert assessed.returncode in (0, 1), assessed.stderr
    assert json.loads(assessed.stdout)["law"] == "dvf"


def test_quiet_design_to_standard_output_prints_nothing_else():
    tuned = _dampctl("tune", "-", "--law", "dvf", "--pairs", "coil_vel", "-o", "-", "--quiet",
                     stdin=OSCILLATOR.read_bytes())
    assert tuned.returncode == 0
    assert tuned.stderr == b""
    assert json.loads(tuned.stdout)["format"] == "dampctl-design"


def test_bad_plant_on_standard_input_names_stdin():
    bad = _dampctl("check", "-", stdin=b"[[modes]]\nfreq_hz = -1.0\ndamping = 0.01\n[sites]\n")
    assert bad.returncode == 2
    assert bad.stderr.decode().startswith("dampctl check: error: <stdin>: modes[1].freq_hz:")


def test_design_to_standard_output_refuses_json_too():
    err = io.StringIO()
    code = cli.main(["tune", str(OSCILLATOR), "--law", "dvf", "--pairs", "coil_vel", "-o", "-",
                     "--json"], stdout=io.StringIO(), stderr=err)
    assert code == 2
    assert "-o - writes the design on standard output" in err.getvalue()


class Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


@pytest.mark.parametrize("quiet", [False, True])
def test_quiet_stream_is_never_a_terminal(monkeypatch, quiet):
    from dampctl.commands import check

    seen = {}

    def spy(args, out, err):
        seen["tty"] = err.isatty()
        err.write("a warning\n")
        return 0

    monkeypatch.setattr(check, "run", spy)
    err = Terminal()
    argv = ["check", "plant.toml"] + (["--quiet"] if quiet else [])
    assert cli.main(argv, stdout=io.StringIO(), stderr=err) == 0
    assert seen["tty"] is (not quiet)  # so a progress bar never draws under --quiet
    assert err.getvalue() == "a warning\n"  # warnings still reach the user


def test_every_command_takes_quiet():
    parser = cli.build_parser()
    dispatch = parser._subparsers._group_actions[0]
    for name, command in dispatch.choices.items():
        nested = [a for a in command._actions if isinstance(a, type(dispatch))]
        for sub_name, leaf in (nested[0].choices.items() if nested else [(name, command)]):
            options = {o for action in leaf._actions for o in action.option_strings}
            assert {"-q", "--quiet"} <= options, sub_name
