"""``dampctl export --force`` interrupted or killed while it moves its files: the output folder
holds one complete set, the old or the new one, never a mix."""

from __future__ import annotations

import io
import os
import pathlib
import shutil
import signal
import subprocess
import sys
import textwrap

import numpy as np
import pytest

from dampctl import fileio
from dampctl.commands.cli import main
from dampctl.design import Branch, Design, Loop, Section
from dampctl.model.plantfile import dump_plant
from dampctl.testing import chain_plant


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    folder = tmp_path_factory.mktemp("inputs")
    plant = chain_plant([1.0, 1.0, 1.0], [4e5, 4e5, 4e5], damping=0.005)
    g = 200.0
    rolloff = Section((1.0,), (1 / (2 * np.pi * 2000.0), 1.0))
    design = Design(
        law="dvf",
        plant_fingerprint=plant.fingerprint,
        actuators=("f3",),
        sensors=("v3",),
        target_modes=(1, 2, 3),
        loops=(Loop("p3", "f3", "v3", g, branches=(Branch(gain=g, sections=(rolloff,)),)),),
    )
    (folder / "plant.toml").write_text(dump_plant(plant))
    (folder / "design.json").write_text(design.to_json())
    return str(folder / "plant.toml"), str(folder / "design.json")


def _export(files, out, *extra):
    code = main(["export", *files, "-o", str(out), *extra], stdout=io.StringIO(),
                stderr=io.StringIO())
    assert code == 0
    return _tree(out)


def _tree(folder):
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*"))
            if p.is_file()}


@pytest.fixture(scope="module")
def sets(files, tmp_path_factory):
    """The old set (10 kHz, three formats) and the new ones (12 kHz; all formats or json)."""
    base = tmp_path_factory.mktemp("sets")
    return {
        "old": _export(files, base / "old", "--rate", "10000"),
        "new": _export(files, base / "new", "--rate", "12000"),
        "json": _export(files, base / "json", "--rate", "12000", "--format", "json"),
    }


#: file-system calls that change something; a kill can land before or after any of them
MUTATIONS = [(os, "replace"), (os, "rename"), (os, "link"), (os, "unlink"), (os, "chmod"),
             (os, "mkdir"), (shutil, "rmtree"), (pathlib.Path, "write_bytes"),
             (fileio, "_rename_exchange")]


@pytest.mark.parametrize("new", ["new", "json"])
def test_every_point_a_kill_could_land_leaves_one_whole_set(files, sets, tmp_path, monkeypatch,
                                                            new):
    # The folder holds an earlier export only (the usual case): the folder's state is recorded
    # before and after every file-system call, which is what a kill at that point leaves.
    # (A folder that also holds other files gets the files one by one: there failures and
    # signals restore or complete the set, see tests/test_fileio.py, but a hard kill between
    # two renames can leave a mix.)
    out = tmp_path / "export"
    _export(files, out, "--rate", "10000")
    seen = []

    def snapshot():
        tree = {k: v for k, v in _tree(out).items() if ".dampctl-" not in k}
        seen.append(tree)

    for owner, name in MUTATIONS:
        real = getattr(owner, name)

        def hooked(*args, _real=real, **kwargs):
            snapshot()
            try:
                return _real(*args, **kwargs)
            finally:
                snapshot()

        monkeypatch.setattr(owner, name, hooked)
    extra = ["--format", "json"] if new == "json" else []
    code = main(["export", *files, "-o", str(out), "--rate", "12000", "--force", *extra],
                stdout=io.StringIO(), stderr=io.StringIO())
    monkeypatch.undo()
    assert code == 0
    assert len(seen) > 6
    old_set, new_set = sets["old"], sets[new]
    kinds = ["old" if s == old_set else "new" if s == new_set else "MIX" for s in seen]
    assert "MIX" not in kinds, kinds
    assert kinds[0] == "old" and kinds[-1] == "new"
    assert _tree(out) == new_set  # and no staging leftovers once it is done
    assert sorted(p.name for p in tmp_path.iterdir()) == ["export"]


KILLER = textwrap.dedent("""
    import os, pathlib, signal, sys
    from dampctl.commands.cli import main
    real, calls = pathlib.Path.write_bytes, []
    def write_bytes(self, data):
        calls.append(self)
        if len(calls) == 3 and sys.argv[1] == "kill":  # two of three files staged
            os.kill(os.getpid(), signal.SIGKILL)
        return real(self, data)
    pathlib.Path.write_bytes = write_bytes
    real_replace = os.replace
    def replace(src, dst, *args, **kwargs):
        result = real_replace(src, dst, *args, **kwargs)
        if sys.argv[1] == "term":  # a termination signal between two file moves
            os.kill(os.getpid(), signal.SIGTERM)
        return result
    os.replace = replace
    sys.exit(main(sys.argv[2:]))
""")


def test_a_real_kill_between_file_writes_leaves_the_old_set(files, sets, tmp_path):
    out = tmp_path / "export"
    _export(files, out, "--rate", "10000")
    argv = ["kill", "export", *files, "-o", str(out), "--rate", "12000", "--force"]
    done = subprocess.run([sys.executable, "-c", KILLER, *argv], capture_output=True)
    assert done.returncode == -signal.SIGKILL
    assert _tree(out) == sets["old"]


def test_a_termination_signal_between_moves_waits_for_the_whole_set(files, sets, tmp_path):
    out = tmp_path / "export"
    out.mkdir()
    (out / "notes.txt").write_text("mine")
    _export(files, out, "--rate", "10000")
    argv = ["term", "export", *files, "-o", str(out), "--rate", "12000", "--force"]
    done = subprocess.run([sys.executable, "-c", KILLER, *argv], capture_output=True)
    assert done.returncode == -signal.SIGTERM
    assert _tree(out) == {**sets["new"], "notes.txt": b"mine"}
