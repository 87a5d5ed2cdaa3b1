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
