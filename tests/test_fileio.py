"""Safe output: a folder target that is a file, or cannot be made, is a clear OutputError."""

import pytest

from dampctl.errors import OutputError
from dampctl.fileio import write_files


def test_write_files_refuses_a_file_as_folder(tmp_path):
    path = tmp_path / "plant.toml"
    path.write_text("x")
    with pytest.raises(OutputError, match="is not a folder"):
        write_files(path, {"a.png": b"1"})
    assert path.read_text() == "x"


def test_write_files_reports_a_folder_it_cannot_create(tmp_path):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    with pytest.raises(OutputError, match="cannot create the folder"):
        write_files(blocker / "sub", {"a.png": b"1"})


def test_written_files_get_the_umask_mode_not_private(tmp_path):
    import os

    from dampctl.fileio import write_text

    mask = os.umask(0o022)
    try:
        one = write_text(tmp_path / "report.html", "x")
        (two,) = write_files(tmp_path / "out", {"a.csv": "1"})
    finally:
        os.umask(mask)
    assert one.stat().st_mode & 0o777 == 0o644
    assert two.stat().st_mode & 0o777 == 0o644


def test_write_text_refuses_a_folder_as_file(tmp_path):
    from dampctl.fileio import write_text

    with pytest.raises(OutputError, match="is a folder"):
        write_text(tmp_path, "x")
    assert not list(tmp_path.parent.glob(f".{tmp_path.name}.*.tmp"))


# ---------------------------------------------------------------------- one meaning of --force
def _tree(folder):
    """{relative path: bytes} of every regular file under ``folder`` (hidden ones included)."""
    out = {}
    for path in sorted(folder.rglob("*")):
        if path.is_file():
            out[str(path.relative_to(folder))] = path.read_bytes()
    return out


def test_write_text_never_replaces_without_replace(tmp_path):
    from dampctl.fileio import write_text

    target = tmp_path / "design.json"
    target.write_text("old")
    with pytest.raises(OutputError, match=r"design\.json: already exists \(use --force"):
        write_text(target, "new")
    assert target.read_text() == "old"
    write_text(target, "new", replace=True)
    assert target.read_text() == "new"
    assert [p.name for p in tmp_path.iterdir()] == ["design.json"]


@pytest.mark.parametrize("replace", [False, True])
def test_special_files_are_refused_even_with_replace(tmp_path, replace):
    import os
    import stat

    from dampctl.fileio import write_text

    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    link = tmp_path / "null"
    link.symlink_to("/dev/null")
    for target in (fifo, link):
        with pytest.raises(OutputError, match="not a regular file"):
            write_text(target, "x", replace=replace)
    assert stat.S_ISFIFO(os.lstat(fifo).st_mode) and link.is_symlink()
    with pytest.raises(OutputError, match="not a regular file"):
        write_files(tmp_path, {"pipe": "x"}, replace=replace)
    assert stat.S_ISFIFO(os.lstat(fifo).st_mode)


def test_an_input_under_another_name_is_refused(tmp_path):
    from dampctl.fileio import write_text

    plant = tmp_path / "plant.toml"
    plant.write_text("x")
    alias = tmp_path / "alias.toml"
    alias.hardlink_to(plant)
    with pytest.raises(OutputError, match="refusing to write over the input file"):
        write_text(alias, "y", inputs=[plant], replace=True)
    with pytest.raises(OutputError, match="refusing to write over the input file"):
        write_files(tmp_path, {"plant.toml": "y"}, inputs=[plant], replace=True)
    assert plant.read_text() == "x"


def test_a_write_error_names_the_users_path_and_leaves_nothing(tmp_path, monkeypatch):
    import errno
    import os

    from dampctl.fileio import write_text

    def full(*args, **kwargs):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(os, "replace", full)
    target = tmp_path / "report.html"
    with pytest.raises(OutputError) as info:
        write_text(target, "x")
    assert str(info.value).startswith(f"{target}: cannot write it (No space left on device)")
    assert ".dampctl-" not in str(info.value)
    assert list(tmp_path.iterdir()) == []


# ---------------------------------------------------------------------- all or nothing
def test_a_new_folder_appears_whole_with_subfolders(tmp_path):
    folder = tmp_path / "a" / "out"
    written = write_files(folder, {"x.json": "1", "plots/y.png": b"2"})
    assert written == [folder / "x.json", folder / "plots" / "y.png"]
    assert _tree(folder) == {"x.json": b"1", "plots/y.png": b"2"}
    assert sorted(p.name for p in (tmp_path / "a").iterdir()) == ["out"]


def test_a_folder_of_the_old_set_is_swapped_whole_and_stale_formats_go(tmp_path):
    folder = tmp_path / "out"
    write_files(folder, {"c.json": "old", "c.csv": "old", "c.h": "old"})
    inode = folder.stat().st_ino
    write_files(folder, {"c.json": "new"}, replace=True, owned=["c.*"])
    assert _tree(folder) == {"c.json": b"new"}
    assert folder.stat().st_ino != inode  # swapped in one step (renameat2 exchange)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def test_other_files_in_the_folder_stay(tmp_path):
    folder = tmp_path / "out"
    folder.mkdir()
    (folder / "notes.txt").write_text("mine")
    write_files(folder, {"c.json": "old", "c.h": "old"})
    write_files(folder, {"c.json": "new"}, replace=True, owned=["c.*"])
    assert _tree(folder) == {"c.json": b"new", "notes.txt": b"mine"}
    with pytest.raises(OutputError, match="already exists"):
        write_files(folder, {"c.json": "newer"})
    assert _tree(folder) == {"c.json": b"new", "notes.txt": b"mine"}


@pytest.mark.parametrize("fail_at", [1, 2, 3])
def test_a_failure_while_moving_puts_the_old_set_back(tmp_path, monkeypatch, fail_at):
    import errno
    import os

    folder = tmp_path / "out"
    folder.mkdir()
    (folder / "notes.txt").write_text("mine")  # a foreign file: files move one by one
    old = {"a.csv": "old a", "b.csv": "old b", "c.csv": "old c"}
    write_files(folder, old)
    real = os.replace
    calls = []

    def flaky(src, dst, *args, **kwargs):
        calls.append(dst)
        if len(calls) == fail_at:
            raise OSError(errno.EIO, os.strerror(errno.EIO))
        return real(src, dst, *args, **kwargs)

    monkeypatch.setattr(os, "replace", flaky)
    with pytest.raises(OutputError, match=r"cannot write it \(Input/output error\); the earlier"):
        write_files(folder, {"a.csv": "new a", "b.csv": "new b", "c.csv": "new c"}, replace=True)
    monkeypatch.setattr(os, "replace", real)
    assert _tree(folder) == {**{k: v.encode() for k, v in old.items()}, "notes.txt": b"mine"}


def test_ctrl_c_while_moving_is_held_until_the_new_set_is_in(tmp_path, monkeypatch):
    import os
    import signal

    folder = tmp_path / "out"
    folder.mkdir()
    (folder / "notes.txt").write_text("mine")
    write_files(folder, {"a.csv": "old a", "b.csv": "old b"})
    real = os.replace

    def interrupted(src, dst, *args, **kwargs):
        signal.raise_signal(signal.SIGINT)  # Ctrl-C between two moves
        return real(src, dst, *args, **kwargs)

    monkeypatch.setattr(os, "replace", interrupted)
    with pytest.raises(KeyboardInterrupt):
        write_files(folder, {"a.csv": "new a", "b.csv": "new b"}, replace=True)
    monkeypatch.setattr(os, "replace", real)
    assert _tree(folder) == {"a.csv": b"new a", "b.csv": b"new b", "notes.txt": b"mine"}
    assert signal.getsignal(signal.SIGINT) is signal.default_int_handler


def test_ctrl_c_while_staging_leaves_the_old_set_and_no_leftovers(tmp_path, monkeypatch):
    import pathlib

    folder = tmp_path / "out"
    write_files(folder, {"a.csv": "old a", "b.csv": "old b"})
    real = pathlib.Path.write_bytes
    calls = []

    def interrupted(self, data):
        calls.append(self)
        if len(calls) == 2:
            raise KeyboardInterrupt
        return real(self, data)

    monkeypatch.setattr(pathlib.Path, "write_bytes", interrupted)
    with pytest.raises(KeyboardInterrupt):
        write_files(folder, {"a.csv": "new a", "b.csv": "new b"}, replace=True)
    monkeypatch.setattr(pathlib.Path, "write_bytes", real)
    assert _tree(folder) == {"a.csv": b"old a", "b.csv": b"old b"}
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


@pytest.mark.parametrize("name", ["", ".", "../x", "/etc/x", "a/../b"])
def test_file_names_stay_inside_the_folder(tmp_path, name):
    with pytest.raises(OutputError, match="invalid file name"):
        write_files(tmp_path / "out", {name: "x"})
    assert list(tmp_path.iterdir()) == []
