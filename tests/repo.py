"""Paths of the repository for the tests (the tests live one or two folders below it)."""

from pathlib import Path

#: the repository root
ROOT = Path(__file__).resolve().parents[1]
#: the example plant files
PLANTS = ROOT / "plants"
