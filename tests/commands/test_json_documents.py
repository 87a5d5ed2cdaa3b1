"""Every JSON document a command prints carries ``format`` and ``version`` (the oscillator)."""

from __future__ import annotations

import io
import json

import pytest
from repo import PLANTS

from dampctl.commands.cli import main

PLANT = str(PLANTS / "oscillator.toml")


def _run(argv):
    out, err = io.StringIO(), io.StringIO()
    code = main(argv, stdout=out, stderr=err)
    assert code in (0, 1), err.getvalue()
    return json.loads(out.getvalue())


@pytest.fixture(scope="module")
def design(tmp_path_factory):
    path = tmp_path_factory.mktemp("json") / "design.json"
    _run(["tune", PLANT, "--law", "dvf", "--pairs", "coil_vel", "-o", str(path), "--json"])
    return path


@pytest.mark.parametrize(
    ("argv", "kind"),
    [
        (["check", PLANT, "--json"], "check"),
        (["size", PLANT, "--max-pairs", "1", "--json"], "sizing"),
        (["assess", PLANT, "{design}", "--json"], "assessment"),
        (["export", PLANT, "{design}", "-o", "{tmp}/x", "--json"], "export"),
        (["report", PLANT, "{design}", "-o", "{tmp}/r.html", "--json"], "report"),
    ],
)
def test_format_and_version_come_first(argv, kind, design, tmp_path):
    argv = [a.format(design=design, tmp=tmp_path) for a in argv]
    document = _run(argv)
    assert list(document)[:2] == ["format", "version"]
    assert document["format"] == f"dampctl-{kind}" and document["version"] == 1


def test_tune_prints_its_kind(tmp_path):
    out = _run(["tune", PLANT, "--law", "dvf", "--pairs", "coil_vel", "-o",
                str(tmp_path / "d.json"), "--json"])
    assert (out["format"], out["version"]) == ("dampctl-tune", 1)
    written = json.loads((tmp_path / "d.json").read_text())
    assert (written["format"], written["version"]) == ("dampctl-design", 1)
