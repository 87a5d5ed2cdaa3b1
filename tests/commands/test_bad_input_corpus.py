"""A corpus of bad inputs across every subcommand (issue 13, "Checks"): plant files, design
files, sizing and export files, controller and shaper files, options and output paths.

Each case runs ``dampctl`` in-process in a folder of good input files, with one thing made bad,
and asserts: exit code 2, one line on stderr that names the field, option or file, no
traceback, and that no file in the folder was created, changed or removed (checksums of the
whole folder before and after)."""

from __future__ import annotations

import hashlib
import io
import json
import os
import re
import shutil
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import pytest
from repo import PLANTS

from dampctl.commands.cli import main

#: a two-mode plant: two masses, a coil and a velocity pick-up on each (small and fast)
TWO_MODE = """title = "two modes"
[[modes]]
freq_hz = 20.0
damping = 0.01
modal_mass_kg = 1.0
[[modes]]
freq_hz = 55.0
damping = 0.01
modal_mass_kg = 1.0
[sites]
a = [1.0, 0.5]
b = [0.5, -1.0]
[[actuators]]
name = "fa"
kind = "force"
site = "a"
max_force_n = 10.0
[[actuators]]
name = "fb"
kind = "force"
site = "b"
max_force_n = 10.0
[[sensors]]
name = "va"
kind = "velocity"
site = "a"
noise_density = 1e-7
[[sensors]]
name = "vb"
kind = "velocity"
site = "b"
noise_density = 1e-7
[[pairs]]
name = "pa"
actuator = "fa"
sensor = "va"
[[pairs]]
name = "pb"
actuator = "fb"
sensor = "vb"
[[outputs]]
name = "xa"
kind = "displacement"
site = "a"
[requirements]
modes = [1, 2]
min_damping = 0.05
sample_rate_hz = 5000.0
loop_delay_s = 1e-4
"""

CONTROLLER = {"A": [[-100.0]], "B": [[100.0]], "C": [[1.0]], "D": [[0.0]]}


def _build_inputs(folder: Path) -> None:
    """The good files every case starts from (written once per module)."""
    shutil.copy(PLANTS / "oscillator.toml", folder / "p.toml")
    (folder / "two.toml").write_text(TWO_MODE)
    (folder / "ctrl.json").write_text(json.dumps(CONTROLLER))
    cwd = os.getcwd()
    os.chdir(folder)
    try:
        for argv in (
            ["tune", "p.toml", "--law", "dvf", "--pairs", "coil_vel", "-o", "d.json"],
            ["tune", "two.toml", "--law", "dvf", "--pairs", "pa,pb", "-o", "d2.json"],
            ["tune", "p.toml", "--law", "tmd", "--site", "mass", "-o", "tmd.json"],
            ["export", "p.toml", "d.json", "-o", "ex", "--format", "json"],
            ["shape", "p.toml", "--modes", "1", "-o", "sh.json"],
        ):
            _run(argv, expect=(0, 1))  # 1: a target not met is fine here
        out = io.StringIO()
        assert main(["size", "p.toml", "--json"], stdout=out, stderr=io.StringIO()) == 0
        (folder / "s.json").write_text(out.getvalue())
    finally:
        os.chdir(cwd)


def _run(argv, expect):
    out, err = io.StringIO(), io.StringIO()
    code = main(list(argv), stdout=out, stderr=err)
    assert code in expect, (argv, code, err.getvalue())
    return out.getvalue(), err.getvalue()


@dataclass(frozen=True)
class Case:
    """One bad input: the command line, the files made bad, a word the message must hold."""

    id: str
    argv: tuple[str, ...]
    names: str  # a regular expression the one-line message must match (field, option, file)
    files: dict[str, Callable[[str], str] | str] = field(default_factory=dict)


def _sub(old: str, new: str) -> Callable[[str], str]:
    def edit(text: str) -> str:
        assert old in text, old
        return text.replace(old, new, 1)

    return edit


def _json(edit: Callable[[dict], None]) -> Callable[[str], str]:
    def apply(text: str) -> str:
        data = json.loads(text)
        edit(data)
        return json.dumps(data)

    return apply


def _set(path: str, value) -> Callable[[str], str]:
    """Set a JSON value by a dotted path (integers index lists)."""

    def edit(data):
        keys = [int(k) if k.isdigit() else k for k in path.split(".")]
        for k in keys[:-1]:
            data = data[k]
        data[keys[-1]] = value

    return _json(edit)


def _drop(path: str) -> Callable[[str], str]:
    def edit(data):
        keys = [int(k) if k.isdigit() else k for k in path.split(".")]
        for k in keys[:-1]:
            data = data[k]
        del data[keys[-1]]

    return _json(edit)


#: a file entry that makes a FIFO (a special file) instead of writing text
FIFO = "<fifo>"

TUNE = ("tune", "p.toml", "--law", "dvf", "--pairs", "coil_vel", "-o", "new.json")
ASSESS = ("assess", "p.toml", "d.json")
EXPORT = ("export", "p.toml", "d.json", "-o", "newex")
REPORT = ("report", "p.toml", "d.json", "-o", "r.html")
SIM = ("simulate", "p.toml", "d.json", "--drive", "coil", "--move", "1e-4", "--output", "mass_x")


def _plant_cases() -> list[Case]:
    """Bad plant files, each read by one of the commands that take a plant."""
    edits = [
        ("freq-bool", _sub("freq_hz = 31.830988618379067", "freq_hz = true"), "freq_hz"),
        ("freq-string", _sub("freq_hz = 31.830988618379067", 'freq_hz = "31.8"'), "freq_hz"),
        ("freq-negative", _sub("freq_hz = 31.830988618379067", "freq_hz = -3.0"), "freq_hz"),
        ("freq-huge", _sub("freq_hz = 31.830988618379067", "freq_hz = 1e12"), "freq_hz"),
        ("freq-nan", _sub("freq_hz = 31.830988618379067", "freq_hz = nan"), "freq_hz"),
        ("freq-missing", _sub("freq_hz = 31.830988618379067", ""), "freq_hz"),
        ("mass-bool", _sub("modal_mass_kg = 2.0", "modal_mass_kg = true"), "modal_mass_kg"),
        ("mass-tiny", _sub("modal_mass_kg = 2.0", "modal_mass_kg = 1e-30"), "modal_mass_kg"),
        ("mass-bigint", _sub("modal_mass_kg = 2.0", "modal_mass_kg = " + "9" * 400),
         "modal_mass_kg"),
        ("damping-negative", _sub("damping = 0.01", "damping = -0.1"), "damping"),
        ("rate-string", _sub("sample_rate_hz = 10000.0", 'sample_rate_hz = "10000"'),
         "sample_rate_hz"),
        ("rate-zero", _sub("sample_rate_hz = 10000.0", "sample_rate_hz = 0.0"),
         "sample_rate_hz"),
        ("rate-inf", _sub("sample_rate_hz = 10000.0", "sample_rate_hz = inf"),
         "sample_rate_hz"),
        ("delay-negative", _sub("loop_delay_s = 1e-4", "loop_delay_s = -1e-4"), "loop_delay_s"),
        ("psd-bool", _sub("psd = 1e-4 ", "psd = true "), "psd"),
        ("psd-ragged", _sub("psd = 1e-4 ", "psd = [[1.0, 1e-4], [2.0]] "), "psd"),
        ("psd-mixed", _sub("psd = 1e-4 ", 'psd = [[1.0, "a"], [2.0, 1e-4]] '), "psd"),
        ("site-ragged", _sub("mass = [1.0]", "mass = [1.0, 2.0]"), "mass|sites"),
        ("site-unknown", _sub('site = "mass"\nmax_force_n', 'site = "nowhere"\nmax_force_n'),
         "nowhere|site"),
        ("actuator-kind", _sub('kind = "force"', 'kind = "magic"'), "kind"),
        ("sensor-kind", _sub('kind = "velocity"', 'kind = "smell"'), "kind"),
        ("pair-unknown-actuator", _sub('actuator = "coil"\nsensor = "vel"',
                                       'actuator = "ghost"\nsensor = "vel"'), "ghost|actuator"),
        ("pair-duplicate", _sub('name = "coil_gap"', 'name = "coil_vel"'), "coil_vel|pairs"),
        ("max-force-bool", _sub("max_force_n = 20.0", "max_force_n = true"), "max_force_n"),
        ("bandwidth-zero", _sub("bandwidth_hz = 5000.0", "bandwidth_hz = 0.0"), "bandwidth_hz"),
        ("requirement-mode-out", _sub("modes = [1]", "modes = [7]"), "modes"),
        ("min-damping-string", _sub("min_damping = 0.1", 'min_damping = "0.1"'),
         "min_damping"),
        ("toml-syntax", _sub("[sites]", "[sites"), "p.toml"),
        ("deep-nesting", _sub("mass = [1.0]", "mass = " + "[" * 3000 + "]" * 3000), "mass|p.toml"),
        ("not-utf8", lambda text: "\udcff", "p.toml"),
        ("no-modes", lambda text: 'title = "x"\n', "modes"),
    ]
    commands = [("check", "p.toml"), ("tune", *TUNE[1:]), ("size", "p.toml"),
                ("assess", "p.toml", "d.json")]
    cases = []
    for k, (name, edit, word) in enumerate(edits):
        argv = commands[k % len(commands)]
        cases.append(Case(f"plant-{name}-{argv[0]}", argv, word, {"p.toml": edit}))
    return cases


def _design_cases() -> list[Case]:
    """Bad design files, read by assess, export, report, simulate, shape and compare."""
    edits = [
        ("not-json", lambda text: "{", "d.json"),
        ("json-list", lambda text: "[1, 2]", "d.json"),
        ("format", _set("format", "something"), "format"),
        ("law-unknown", _set("law", "magic"), "law"),
        ("law-mismatch-passive", _set("law", "tmd"), "law|parts|loops"),
        ("gain-string", _set("loops.0.gain", "74"), "gain"),
        ("gain-bool", _set("loops.0.gain", True), "gain"),
        ("gain-inf", _set("loops.0.gain", 1e400), "gain"),
        ("branch-gain-null", _set("loops.0.branches.0.gain", None), "gain"),
        ("section-den-zero", _set("loops.0.branches.0.sections.0.den", [0.0, 0.0]), "den"),
        ("section-too-long", _set("loops.0.branches.0.sections.0.num", [1, 2, 3, 4]), "num"),
        ("section-string", _set("loops.0.branches.0.sections.0.num", "abc"), "num"),
        ("no-branches", _set("loops.0.branches", []), "branches"),
        ("loop-twice", _json(lambda d: (d["loops"].append(d["loops"][0]),
                                        d["actuators"].append("coil"),
                                        d["sensors"].append("vel"),
                                        d["pairs"].append("coil_vel"))), "loops|coil_vel"),
        ("target-mode-out", _set("target_modes", [5]), "target_modes"),
        ("target-mode-zero", _set("target_modes", [0]), "target_modes"),
        ("target-mode-string", _set("target_modes", ["1"]), "target_modes"),
        ("actuator-unknown", _json(lambda d: (d["loops"][0].update(actuator="ghost"),
                                              d.update(actuators=["ghost"]))), "ghost|actuator"),
        ("sensor-unknown", _json(lambda d: (d["loops"][0].update(sensor="ghost"),
                                            d.update(sensors=["ghost"]))), "ghost|sensor"),
        ("fingerprint", _set("plant_fingerprint", "0123456789abcdef"), "plant_fingerprint"),
        ("missing-law", _drop("law"), "law"),
        ("missing-loops", _drop("loops"), "loops|controller"),
        ("loops-not-list", _set("loops", {"a": 1}), "loops"),
        ("actuators-mismatch", _set("actuators", ["vel"]), "actuator"),
        ("controller-ragged", _json(lambda d: (d.pop("loops"), d.update(
            law="custom", controller={"A": [[1.0], [1.0, 2.0]], "B": [[1.0]], "C": [[1.0]],
                                      "D": [[0.0]]}))), "controller"),
        ("controller-nan", _json(lambda d: (d.pop("loops"), d.update(
            law="custom", controller={"A": [[-1.0]], "B": [["x"]], "C": [[1.0]],
                                      "D": [[0.0]]}))), "controller"),
        ("deep-json", lambda text: text.replace('"info": {', '"deep": ' + "[" * 5000
                                                + "]" * 5000 + ', "info": {'), "d.json"),
    ]
    commands = [ASSESS, EXPORT, REPORT, SIM,
                ("shape", "p.toml", "d.json", "--modes", "1", "-o", "newsh.json"),
                ("compare", "p.toml", "d.json")]
    cases = []
    for k, (name, edit, word) in enumerate(edits):
        argv = commands[k % len(commands)]
        cases.append(Case(f"design-{name}-{argv[0]}", argv, word, {"d.json": edit}))
    # a passive design with a bad part
    cases += [
        Case("tmd-part-mass", (*ASSESS[:2], "tmd.json"), "parts\\[1\\]",
             {"tmd.json": _set("parts.0.mass_kg", -1.0)}),
        Case("tmd-part-site", (*ASSESS[:2], "tmd.json"), "parts\\[1\\]",
             {"tmd.json": _set("parts.0.site", "ghost")}),
        Case("two-target-out", ("assess", "two.toml", "d2.json"), "target_modes",
             {"d2.json": _set("target_modes", [1, 3])}),
    ]
    return cases


def _other_file_cases() -> list[Case]:
    """Sizing and export files (report), controller files (tune), shaper files."""
    rep_s = (*REPORT, "--sizing", "s.json")
    rep_e = (*REPORT, "--export", "ex/controller.json")
    custom = ("tune", "p.toml", "--law", "custom", "--pairs", "coil_vel", "--controller",
              "ctrl.json", "-o", "new.json")
    return [
        Case("sizing-not-json", rep_s, "s.json", {"s.json": "nope"}),
        Case("sizing-format", rep_s, "format|s.json", {"s.json": _set("format", "x")}),
        Case("sizing-rows", rep_s, "rows|s.json", {"s.json": _set("rows", "x")}),
        Case("sizing-fingerprint", rep_s, "plant_fingerprint",
             {"s.json": _set("plant_fingerprint", "0123456789abcdef")}),
        Case("design-other-plant", REPORT,
             "d.json: plant_fingerprint: .*mode 1 damping 0.01 → 0.02",
             {"p.toml": _sub("damping = 0.01", "damping = 0.02")}),
        Case("sizing-no-summary", rep_s, "cannot be named",
             {"s.json": _json(lambda d: (d.update(plant_fingerprint="0123456789abcdef"),
                                         d.pop("plant_summary")))}),
        Case("sizing-missing", (*REPORT, "--sizing", "absent.json"), "absent.json"),
        Case("sizing-modes-out", rep_s, "modes", {"s.json": _set("modes", [9])}),
        Case("export-not-json", rep_e, "controller.json", {"ex/controller.json": "["}),
        Case("export-format", rep_e, "format|controller.json",
             {"ex/controller.json": _set("format", "x")}),
        Case("export-fingerprint", rep_e, "plant_fingerprint",
             {"ex/controller.json": _set("plant_fingerprint", "0123456789abcdef")}),
        Case("export-other-plant", rep_e, "--export: .*controller.json: plant_fingerprint: .*"
             "mode 1 freq_hz 40 → 31.831",
             {"ex/controller.json": _json(lambda d: (
                 d.update(plant_fingerprint="0123456789abcdef"),
                 d["plant_summary"]["modes"][0].update(freq_hz=40.0)))}),
        Case("export-rate", rep_e, "rate_hz", {"ex/controller.json": _set("rate_hz", "fast")}),
        Case("controller-missing", (*custom[:-4], "absent.json", "-o", "new.json"),
             "absent.json"),
        Case("controller-shape", custom, "ctrl.json|B",
             {"ctrl.json": json.dumps({**CONTROLLER, "B": [[1.0, 2.0]]})}),
        Case("controller-bool", custom, "ctrl.json|A",
             {"ctrl.json": json.dumps({**CONTROLLER, "A": [[True]]})}),
        Case("controller-inf", custom, "ctrl.json|A",
             {"ctrl.json": json.dumps({**CONTROLLER, "A": [[1e400]]})}),
        Case("controller-dt", custom, "dt",
             {"ctrl.json": json.dumps({**CONTROLLER, "dt": -1.0})}),
        Case("controller-not-json", custom, "ctrl.json", {"ctrl.json": "{{"}),
        Case("shaper-not-json", (*SIM, "--shaper", "sh.json"), "sh.json", {"sh.json": "x"}),
        Case("shaper-format", (*SIM, "--shaper", "sh.json"), "format|sh.json",
             {"sh.json": _set("format", "x")}),
        Case("shaper-amplitude", (*SIM, "--shaper", "sh.json"), "amplitude|impulses",
             {"sh.json": _set("impulses.0.amplitude", "big")}),
    ]


def _option_cases() -> list[Case]:
    return [
        Case("tune-no-law", ("tune", "p.toml", "-o", "new.json"), "--law"),
        Case("tune-bad-law", ("tune", "p.toml", "--law", "x", "-o", "new.json"), "--law"),
        Case("tune-pair-unknown", ("tune", "p.toml", "--law", "dvf", "--pairs", "ghost", "-o",
                                   "new.json"), "ghost"),
        Case("tune-modes-range", (*TUNE, "--modes", "1-1000000000000"), "--modes"),
        Case("tune-modes-out", (*TUNE, "--modes", "3"), "--modes|mode"),
        Case("tune-modes-text", (*TUNE, "--modes", "a,b"), "--modes"),
        Case("tune-target-neg", (*TUNE, "--target-damping", "-0.1"), "--target-damping"),
        Case("tune-target-nan", (*TUNE, "--target-damping", "nan"), "--target-damping"),
        Case("tune-leak", ("tune", "p.toml", "--law", "iff", "--pairs", "coil_vel",
                           "--leak-hz", "-1", "-o", "new.json"), "--leak-hz"),
        Case("tune-delay", (*TUNE, "--delay-s", "-1"), "--delay-s"),
        Case("tune-gain-text", (*TUNE, "--gain", "lots"), "--gain"),
        Case("tune-over-input", ("tune", "p.toml", "--law", "dvf", "--pairs", "coil_vel",
                                 "-o", "p.toml", "--force"), "p.toml"),
        Case("tune-exists", ("tune", "p.toml", "--law", "dvf", "--pairs", "coil_vel", "-o",
                             "d.json"), "d.json"),
        Case("tune-output-fifo", (*TUNE[:-1], "pipe", "--force"), "pipe", {"pipe": FIFO}),
        Case("report-output-fifo", (*REPORT[:-1], "pipe", "--force"), "pipe", {"pipe": FIFO}),
        Case("export-output-fifo", (*EXPORT[:-1], "pipe", "--force"), "pipe", {"pipe": FIFO}),
        Case("check-plant-dir-slash", ("check", "ex/"), "ex"),
        Case("tune-output-dir", ("tune", "p.toml", "--law", "dvf", "--pairs", "coil_vel",
                                 "-o", "ex", "--force"), "ex"),
        Case("tune-output-parent-missing", ("tune", "p.toml", "--law", "dvf", "--pairs",
                                            "coil_vel", "-o", "no/such/d.json"), "no/such"),
        Case("size-max-pairs", ("size", "p.toml", "--max-pairs", "0"), "--max-pairs"),
        Case("size-law", ("size", "p.toml", "--law", "lqg"), "--law"),
        Case("size-candidates", ("size", "p.toml", "--candidates", "ghost"), "ghost"),
        Case("size-plots-file", ("size", "p.toml", "--plots", "d.json"), "d.json"),
        Case("check-cluster-tol", ("check", "p.toml", "--cluster-tol", "-1"), "--cluster-tol"),
        Case("check-missing-plant", ("check", "absent.toml"), "absent.toml"),
        Case("check-plant-dir", ("check", "ex"), "ex"),
        Case("assess-samples", (*ASSESS, "--samples", "-3"), "--samples"),
        Case("assess-seed", (*ASSESS, "--seed", "x"), "--seed"),
        Case("assess-drift", (*ASSESS, "--drift", "7"), "--drift"),
        Case("export-rate-zero", (*EXPORT, "--rate", "0"), "--rate"),
        Case("export-rate-text", (*EXPORT, "--rate", "fast"), "--rate"),
        Case("export-format", (*EXPORT, "--format", "xml"), "--format|xml"),
        Case("export-prewarp", (*EXPORT, "--prewarp", "sideways"), "--prewarp"),
        Case("export-exists", ("export", "p.toml", "d.json", "-o", "ex"), "ex"),
        Case("export-over-file", ("export", "p.toml", "d.json", "-o", "p.toml", "--force"),
             "p.toml"),
        Case("export-input-range", (*EXPORT, "--input-range", "ghost=1"), "ghost|--input-range"),
        Case("export-input-range-text", (*EXPORT, "--input-range", "lots"), "--input-range"),
        Case("report-exists", ("report", "p.toml", "d.json", "-o", "d.json"), "d.json"),
        Case("report-delay", (*REPORT, "--delay-s", "-2"), "--delay-s"),
        Case("report-move-no-drive", (*REPORT, "--move", "1e-4"), "--drive|--move"),
        Case("simulate-no-what", ("simulate", "p.toml", "d.json"), "--drive|--disturbance"),
        Case("simulate-drive-unknown", ("simulate", "p.toml", "d.json", "--drive", "ghost",
                                        "--move", "1e-4", "--output", "mass_x"), "ghost"),
        Case("simulate-duration", (*SIM, "--duration", "-1"), "--duration"),
        Case("simulate-rate", (*SIM, "--sample-rate", "0"), "--sample-rate"),
        Case("simulate-profile", (*SIM, "--profile", "zigzag"), "--profile|zigzag"),
        Case("simulate-disturbance-unknown", ("simulate", "p.toml", "--disturbance", "ghost"),
             "ghost"),
        Case("shape-modes-out", ("shape", "p.toml", "--modes", "4", "-o", "newsh.json"),
             "--modes|mode"),
        Case("shape-tolerance", ("shape", "p.toml", "--modes", "1", "--tolerance", "-1", "-o",
                                 "newsh.json"), "tolerance"),
        Case("shape-insensitivity", ("shape", "p.toml", "--modes", "1", "--insensitivity",
                                     "lots", "-o", "newsh.json"), "--insensitivity"),
        Case("shape-exists", ("shape", "p.toml", "--modes", "1", "-o", "sh.json"), "sh.json"),
        Case("compare-names", ("compare", "p.toml", "d.json", "--names", "a,b,c"), "--names"),
        Case("compare-missing-design", ("compare", "p.toml", "absent.json"), "absent.json"),
        Case("compare-plant-fp", ("compare", "two.toml", "d.json"), "plant_fingerprint|d.json"),
        Case("demo-exists-file", ("demo", "-o", "p.toml"), "p.toml"),
        Case("demo-exists-dir", ("demo", "-o", "ex"), "ex"),
        Case("schema-unknown", ("schema", "nothing"), "nothing"),
        Case("plant-new-exists", ("plant", "new", "-o", "p.toml"), "p.toml"),
        Case("unknown-command", ("frobnicate",), "frobnicate"),
        Case("plant-fe-missing", ("plant", "fe", "--mass", "m.mtx", "--stiffness", "k.mtx",
                                  "--site", "a=1", "--modes", "2", "-o", "fe.toml"), "m.mtx"),
        Case("plant-fit-missing", ("plant", "fit", "frf.npz", "-o", "fit.toml"), "frf.npz"),
    ]


CASES = _plant_cases() + _design_cases() + _other_file_cases() + _option_cases()


def test_corpus_is_large_and_covers_every_command():
    assert len(CASES) >= 90
    from dampctl.commands.cli import COMMANDS

    seen = {c.argv[0] for c in CASES}
    names = {m.NAME for m in COMMANDS}
    assert names <= seen, names - seen


@pytest.fixture(scope="module")
def inputs(tmp_path_factory):
    folder = tmp_path_factory.mktemp("corpus-inputs")
    _build_inputs(folder)
    return folder


def _checksums(folder: Path) -> dict[str, str]:
    out = {}
    for root, dirs, files in os.walk(folder):
        for name in dirs + files:
            path = Path(root, name)
            rel = str(path.relative_to(folder))
            if path.is_dir():
                out[rel] = "dir"
            elif not path.is_file():  # a FIFO: never read it (that would block)
                out[rel] = f"special {path.stat().st_mode:o}"
            else:
                out[rel] = hashlib.sha256(path.read_bytes()).hexdigest()
    return out


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_bad_input(case, inputs, tmp_path, monkeypatch):
    work = tmp_path / "w"
    shutil.copytree(inputs, work)
    for name, edit in case.files.items():
        path = work / name
        if edit == FIFO:
            os.mkfifo(path)
            continue
        text = edit(path.read_text()) if callable(edit) else edit
        path.write_bytes(text.encode("utf-8", "surrogateescape"))
    monkeypatch.chdir(work)
    monkeypatch.delenv("DAMPCTL_DEBUG", raising=False)
    before = _checksums(work)
    out, err = io.StringIO(), io.StringIO()
    code = main(list(case.argv), stdout=out, stderr=err)
    message = err.getvalue().strip()
    assert code == 2, (code, message)
    assert "Traceback" not in message
    assert message and "\n" not in message, message
    assert re.search(case.names, message), (case.names, message)
    assert _checksums(work) == before
