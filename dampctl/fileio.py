"""Safe output: files are written whole or not at all, and never over an input.

A file is written to a temporary sibling and renamed into place (atomic on POSIX and
Windows for a single file). A set of files for one folder is written to a temporary folder and
moved in only when every file has been produced.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from collections.abc import Iterable, Mapping
from pathlib import Path

from dampctl.errors import OutputError

__all__ = ["check_not_input", "write_files", "write_text"]


def check_not_input(target: str | Path, inputs: Iterable[str | Path] = ()) -> None:
    """Raise :class:`OutputError` if ``target`` is one of the ``inputs``.

    Parameters
    ----------
    target : path-like
        The output about to be written.
    inputs : iterable of path-like
        Files read by the same command.
    """
    target = Path(target)
    for source in inputs:
        source = Path(source)
        same = target.resolve() == source.resolve()
        if not same and target.exists() and source.exists():
            same = os.path.samefile(target, source)
        if same:
            raise OutputError(f"refusing to write over the input file {source}", source=str(target))


def write_text(target: str | Path, text: str | bytes, *, inputs: Iterable[str | Path] = ()) -> Path:
    """Write one file atomically.

    Parameters
    ----------
    target : path-like
        Destination file; its folder must exist.
    text : str or bytes
        Content (str is written as UTF-8).
    inputs : iterable of path-like, optional
        Input files that must not be overwritten.

    Returns
    -------
    Path
        The written file.
    """
    target = Path(target)
    check_not_input(target, inputs)
    if target.is_dir():
        raise OutputError("is a folder; give a file name", source=str(target))
    if not target.parent.is_dir():
        raise OutputError(f"folder {target.parent} does not exist", source=str(target))
    data = text.encode("utf-8") if isinstance(text, str) else text
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
        os.chmod(tmp, _file_mode())  # mkstemp makes it private (0600); give the usual mode
        os.replace(tmp, target)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return target


def write_files(
    folder: str | Path,
    files: Mapping[str, str | bytes],
    *,
    inputs: Iterable[str | Path] = (),
    replace: bool = False,
) -> list[Path]:
    """Write a set of files into ``folder``, all or none.

    Parameters
    ----------
    folder : path-like
        Destination folder. Created when missing; when it exists, files of the same names are
        replaced only if ``replace`` is true, other files are left alone.
    files : mapping of str to str or bytes
        File name (no folders) to content.
    inputs : iterable of path-like, optional
        Input files that must not be overwritten.
    replace : bool, optional
        Allow replacing existing files of the same names.

    Returns
    -------
    list of Path
        The written files, in the order given.
    """
    folder = Path(folder)
    inputs = list(inputs)
    if folder.exists() and not folder.is_dir():
        raise OutputError("exists and is not a folder (choose a folder)", source=str(folder))
    targets = [folder / name for name in files]
    for target in targets:
        check_not_input(target, inputs)
        if target.exists() and not replace:
            raise OutputError("already exists (use --force to replace)", source=str(target))
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(
            f"cannot create the folder ({exc.strerror or exc})", source=str(folder)
        ) from None
    staging = Path(tempfile.mkdtemp(prefix=".dampctl-", dir=folder))
    try:
        for name, content in files.items():
            data = content.encode("utf-8") if isinstance(content, str) else content
            (staging / name).write_bytes(data)
            os.chmod(staging / name, _file_mode())
        for name in files:
            os.replace(staging / name, folder / name)
    finally:
        shutil.rmtree(staging, ignore_errors=True)
    return targets


def _file_mode() -> int:
    """Mode of a new file under the process umask (0644 under the common umask 022)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask
