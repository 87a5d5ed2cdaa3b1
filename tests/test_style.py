"""House rule: ruff (configured in pyproject.toml) is clean on the package, tests and scripts."""

import subprocess

import pytest
from repo import ROOT


def test_ruff_clean():
    ruff_main = pytest.importorskip("ruff.__main__", reason="ruff is not installed")
    binary = ruff_main.find_ruff_bin()
    result = subprocess.run(
        [binary, "check", "--no-cache", "dampctl", "tests", "scripts"],
        cwd=ROOT,
        capture_output=True,
        text=True,
        check=False,
    )
    assert result.returncode == 0, result.stdout + result.stderr
