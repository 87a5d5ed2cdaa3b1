"""Safe output: written whole or not at all, never over an input, never over a special file.

Every command that writes follows the same rules (DEVELOPERS.md, Conventions):

* an existing output is replaced only when the caller says so (``replace=True``: the
  commands' ``--force``); without it nothing existing is touched;
* a path that exists and is not a regular file where a file is to be written (a folder, a
  device, a FIFO, a socket) is refused and never replaced by a rename;
* an output that is one of the command's inputs (the same path, or the same file under another
  name) is refused;
* errors name the path the caller gave, never a staging path.

One file (:func:`write_text`) goes to a temporary sibling and is renamed into place, which is
atomic on POSIX. A set of files for one folder (:func:`write_files`) is first staged complete,
then put in place so that a reader, a failure or an interrupt sees either the old set or the
new one:

* a folder that does not exist yet is staged beside it and renamed into place (one rename);
* a folder that holds nothing but files of the set (earlier output of the same command) is
  swapped with the staged folder in one step (Linux ``renameat2`` with ``RENAME_EXCHANGE``,
  the same call ``mv --exchange`` makes), then the old set is removed: even a hard kill leaves
  one complete set;
* a folder that also holds other files (which must stay) gets the files one at a time, each
  old file kept aside as a hard link until all are in; a failure or an interrupt (Ctrl-C, a
  termination signal; both are held back while the files move) puts the old set back. Only a
  hard kill (SIGKILL, power loss) in the middle of those renames can leave a mix there.
"""

from __future__ import annotations

import contextlib
import ctypes
import errno
import fnmatch
import os
import shutil
import signal
import stat
import tempfile
import threading
from collections.abc import Iterable, Iterator, Mapping
from pathlib import Path, PurePosixPath

from dampctl.errors import OutputError

__all__ = [
    "check_not_input",
    "check_output",
    "check_output_folder",
    "write_files",
    "write_text",
]

#: prefix of every staging file and folder dampctl makes (hidden; removed after a normal error)
STAGING_PREFIX = ".dampctl-"


def check_not_input(target: str | Path, inputs: Iterable[str | Path] = ()) -> None:
    """Raise :class:`OutputError` if ``target`` is one of the ``inputs``.

    Parameters
    ----------
    target : path-like
        The output about to be written.
    inputs : iterable of path-like
        Files read by the same command (``None`` entries are skipped).
    """
    target = Path(target)
    for source in inputs:
        if source is None or str(source) == "-":
            continue
        source = Path(source)
        same = target.resolve() == source.resolve()
        if not same and target.exists() and source.exists():
            with contextlib.suppress(OSError):
                same = os.path.samefile(target, source)
        if same:
            also = "" if str(source) == str(target) else f" {source}"
            raise OutputError(f"refusing to write over the input file{also}", source=str(target))


def check_output(
    target: str | Path, *, inputs: Iterable[str | Path] = (), replace: bool = False
) -> None:
    """Raise :class:`OutputError` unless ``target`` may be written as a file.

    Commands call it before long work, so that a refusal comes at once; :func:`write_text`
    checks again when it writes.

    Parameters
    ----------
    target : path-like
        The file about to be written.
    inputs : iterable of path-like, optional
        Files read by the same command (never overwritten).
    replace : bool, optional
        Whether an existing regular file may be replaced (``--force``).
    """
    target = Path(target)
    check_not_input(target, inputs)
    kind = _kind(target)
    if kind == "folder":
        raise OutputError("is a folder; give a file name", source=str(target))
    if kind == "special":
        raise OutputError(
            "exists and is not a regular file (a device, FIFO or socket); refusing to replace it",
            source=str(target),
        )
    if kind == "file" and not replace:
        raise OutputError("already exists (use --force to replace)", source=str(target))
    parent = target.parent
    if not parent.is_dir():
        raise OutputError(f"folder {parent} does not exist", source=str(target))


def check_output_folder(
    folder: str | Path,
    names: Iterable[str] = (),
    *,
    inputs: Iterable[str | Path] = (),
    replace: bool = False,
) -> None:
    """Raise :class:`OutputError` unless the files ``names`` may be written into ``folder``.

    Parameters
    ----------
    folder : path-like
        Destination folder (it need not exist).
    names : iterable of str, optional
        File names (relative paths with ``/``) about to be written, when known.
    inputs : iterable of path-like, optional
        Files read by the same command.
    replace : bool, optional
        Whether existing files of the same names may be replaced (``--force``).
    """
    folder = Path(folder)
    inputs = list(inputs)
    kind = _kind(folder)
    if kind not in ("missing", "folder"):
        raise OutputError("exists and is not a folder (choose a folder)", source=str(folder))
    for name in names:
        relative = _relative(name)
        target = folder.joinpath(*relative.parts)
        check_not_input(target, inputs)
        here = folder
        for part in relative.parts[:-1]:
            here = here / part
            if _kind(here) not in ("missing", "folder"):
                raise OutputError("exists and is not a folder", source=str(here))
        kind = _kind(target)
        if kind == "folder":
            raise OutputError("is a folder; refusing to replace it with a file", source=str(target))
        if kind == "special":
            raise OutputError(
                "exists and is not a regular file (a device, FIFO or socket); refusing to "
                "replace it",
                source=str(target),
            )
        if kind == "file" and not replace:
            raise OutputError("already exists (use --force to replace)", source=str(target))


def write_text(
    target: str | Path,
    text: str | bytes,
    *,
    inputs: Iterable[str | Path] = (),
    replace: bool = False,
) -> Path:
    """Write one file atomically.

    Parameters
    ----------
    target : path-like
        Destination file; its folder must exist.
    text : str or bytes
        Content (str is written as UTF-8).
    inputs : iterable of path-like, optional
        Input files that must not be overwritten.
    replace : bool, optional
        Replace an existing regular file (``--force``); default refuse.

    Returns
    -------
    Path
        The written file.
    """
    target = Path(target)
    check_output(target, inputs=inputs, replace=replace)
    data = text.encode("utf-8") if isinstance(text, str) else text
    tmp = None
    try:
        fd, tmp = tempfile.mkstemp(
            prefix=f"{STAGING_PREFIX}{target.name}.", suffix=".tmp", dir=target.parent
        )
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
        os.chmod(tmp, _file_mode())  # mkstemp makes it private (0600); give the usual mode
        if not replace and _kind(target) != "missing":  # it appeared while we wrote
            raise OutputError("already exists (use --force to replace)", source=str(target))
        os.replace(tmp, target)
        tmp = None
    except OSError as exc:
        if isinstance(exc, OutputError):
            raise
        raise OutputError(f"cannot write it ({_reason(exc)})", source=str(target)) from None
    finally:
        if tmp is not None:
            with contextlib.suppress(OSError):
                os.unlink(tmp)
    return target


def write_files(
    folder: str | Path,
    files: Mapping[str, str | bytes],
    *,
    inputs: Iterable[str | Path] = (),
    replace: bool = False,
    owned: Iterable[str] = (),
) -> list[Path]:
    """Write a set of files into ``folder``, all or none (see the module notes).

    Parameters
    ----------
    folder : path-like
        Destination folder, created when missing. When it exists, files of the same names are
        replaced only if ``replace`` is true; other files are left alone.
    files : mapping of str to str or bytes
        Relative file name (subfolders with ``/``, no ``..``) to content.
    inputs : iterable of path-like, optional
        Input files that must not be overwritten.
    replace : bool, optional
        Allow replacing existing files of the same names (``--force``).
    owned : iterable of str, optional
        Glob patterns (relative, ``/``-separated) of files that belong to the command's set,
        such as the other formats of an export: with ``replace``, such files that the new set
        does not hold are removed with the old set, so the folder never holds a mix.

    Returns
    -------
    list of Path
        The written files, in the order given.
    """
    folder = Path(folder)
    inputs = list(inputs)
    relatives = {name: _relative(name) for name in files}
    check_output_folder(folder, files, inputs=inputs, replace=replace)
    payload = {
        relatives[name]: (content.encode("utf-8") if isinstance(content, str) else content)
        for name, content in files.items()
    }
    patterns = tuple(owned)
    targets = [folder.joinpath(*relatives[name].parts) for name in files]
    if not folder.exists():
        if _create(folder, payload):
            return targets
        check_output_folder(folder, files, inputs=inputs, replace=replace)  # it appeared
    stale = _stale(folder, set(payload), patterns) if replace else []
    if _only_ours(folder, set(payload), stale) and _exchange(folder, payload):
        return targets
    _one_by_one(folder, payload, stale)
    return targets


# ---------------------------------------------------------------------- set commits
def _create(folder: Path, payload: Mapping[PurePosixPath, bytes]) -> bool:
    """Stage the set beside a missing folder and rename it into place; False to fall back."""
    try:
        folder.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(
            f"cannot create the folder ({_reason(exc)})", source=str(folder)
        ) from None
    staging = _stage_beside(folder, payload, mode=_folder_mode())
    if staging is None:
        return False
    try:
        with _held_signals():
            os.rename(staging, folder)
            staging = None
    except OSError:
        return False  # the folder appeared meanwhile: write into it file by file
    finally:
        if staging is not None:
            shutil.rmtree(staging, ignore_errors=True)
    return True


def _exchange(folder: Path, payload: Mapping[PurePosixPath, bytes]) -> bool:
    """Swap a folder holding only the old set with the staged new set; False to fall back."""
    if _is_cwd_or_above(folder):
        return False  # swapping it would leave this process in a deleted folder
    try:
        mode = stat.S_IMODE(folder.stat().st_mode)
    except OSError:
        return False
    staging = _stage_beside(folder, payload, mode=mode)
    if staging is None:
        return False
    swapped = False
    try:
        with _held_signals():
            swapped = _rename_exchange(staging, folder)
            if swapped:
                shutil.rmtree(staging, ignore_errors=True)  # now the old set
    finally:
        if not swapped:
            shutil.rmtree(staging, ignore_errors=True)
    return swapped


def _one_by_one(
    folder: Path, payload: Mapping[PurePosixPath, bytes], stale: list[PurePosixPath]
) -> None:
    """Stage inside the folder, then move file by file with the old files kept aside."""
    try:
        folder.mkdir(parents=True, exist_ok=True)
        staging = Path(tempfile.mkdtemp(prefix=STAGING_PREFIX, dir=folder))
    except OSError as exc:
        raise OutputError(f"cannot write into it ({_reason(exc)})", source=str(folder)) from None
    new_root, old_root = staging / "new", staging / "old"
    try:
        _write_tree(new_root, payload, folder)
        old_root.mkdir()
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    with _held_signals():  # a held signal arrives once the set is in and the staging gone
        try:
            _move_in(folder, new_root, old_root, list(payload), stale)
        finally:
            shutil.rmtree(staging, ignore_errors=True)


def _move_in(folder, new_root, old_root, names, stale) -> None:
    done: list[tuple[Path, Path | None]] = []  # (target, backup or None when it was new)
    made: list[Path] = []
    current = None
    try:
        for name in [*names, *stale]:
            current = folder.joinpath(*name.parts)
            for parent in reversed(current.relative_to(folder).parents):
                here = folder / parent
                if not here.exists():
                    here.mkdir()
                    made.append(here)
            backup = None
            if os.path.lexists(current):
                backup = old_root / f"{len(done)}"
                _keep_aside(current, backup)
            done.append((current, backup))
            if name in stale:
                os.unlink(current)
            else:
                os.replace(new_root.joinpath(*name.parts), current)
    except BaseException as exc:
        for target, backup in reversed(done):
            with contextlib.suppress(OSError):
                if backup is not None:
                    os.replace(backup, target)
                elif os.path.lexists(target):
                    os.unlink(target)
        for here in reversed(made):
            with contextlib.suppress(OSError):
                here.rmdir()
        if isinstance(exc, OSError) and not isinstance(exc, OutputError):
            where = str(current) if current is not None else str(folder)
            raise OutputError(
                f"cannot write it ({_reason(exc)}); the earlier files were kept", source=where
            ) from None
        raise


def _keep_aside(target: Path, backup: Path) -> None:
    """A hard link to ``target`` at ``backup`` (a copy where links are not allowed)."""
    try:
        os.link(target, backup, follow_symlinks=False)
    except OSError:
        shutil.copy2(target, backup, follow_symlinks=False)


def _stage_beside(folder: Path, payload, *, mode: int) -> Path | None:
    """The new set written into a hidden sibling of ``folder`` (None when the parent refuses)."""
    try:
        staging = Path(tempfile.mkdtemp(prefix=f".{folder.name}{STAGING_PREFIX}",
                                        dir=folder.parent))
    except OSError:
        return None
    try:
        _write_tree(staging, payload, folder)
        os.chmod(staging, mode)
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    return staging


def _write_tree(root: Path, payload: Mapping[PurePosixPath, bytes], folder: Path) -> None:
    for relative, data in payload.items():
        path = root.joinpath(*relative.parts)
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_bytes(data)
            os.chmod(path, _file_mode())
        except OSError as exc:
            raise OutputError(
                f"cannot write it ({_reason(exc)})", source=str(folder.joinpath(*relative.parts))
            ) from None


def _stale(folder: Path, names: set[PurePosixPath], patterns) -> list[PurePosixPath]:
    """Files under ``folder`` matching ``patterns`` that the new set does not hold."""
    if not patterns:
        return []
    out = []
    for path in _walk(folder):
        relative = PurePosixPath(*path.relative_to(folder).parts)
        if relative in names or _kind(path) != "file":
            continue
        if any(fnmatch.fnmatchcase(str(relative), p) for p in patterns):
            out.append(relative)
    return sorted(out)


def _only_ours(folder: Path, names: set[PurePosixPath], stale: list[PurePosixPath]) -> bool:
    """True when every entry under ``folder`` is a file of the set, a stale file of it, a
    folder on the way to one, or a staging leftover."""
    keep = names | set(stale)
    folders = {parent for name in keep for parent in name.parents if str(parent) != "."}
    for path in _walk(folder):
        relative = PurePosixPath(*path.relative_to(folder).parts)
        if relative.parts[-1].startswith(STAGING_PREFIX):
            continue
        if path.is_dir() and not path.is_symlink():
            if relative not in folders:
                return False
        elif relative not in keep or _kind(path) != "file":
            return False
    return True


def _walk(folder: Path) -> Iterator[Path]:
    for root, dirs, names in os.walk(folder):
        dirs[:] = [d for d in dirs if not d.startswith(STAGING_PREFIX)]
        for name in (*dirs, *names):
            yield Path(root) / name


#: renameat2 flag: swap the two paths atomically (Linux 3.15+, glibc 2.28+)
_RENAME_EXCHANGE = 2
_AT_FDCWD = -100


def _rename_exchange(first: Path, second: Path) -> bool:
    """Swap two paths in one step; False where the system or file system cannot."""
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        call = libc.renameat2
    except (OSError, AttributeError):
        return False
    call.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    call.restype = ctypes.c_int
    result = call(_AT_FDCWD, os.fsencode(first), _AT_FDCWD, os.fsencode(second), _RENAME_EXCHANGE)
    if result == 0:
        return True
    code = ctypes.get_errno()
    if code in (errno.EINVAL, errno.ENOSYS, errno.EXDEV, errno.ENOTSUP, errno.EPERM):
        return False
    raise OutputError(f"cannot replace it ({os.strerror(code)})", source=str(second))


@contextlib.contextmanager
def _held_signals():
    """Hold Ctrl-C and termination signals back while files move; deliver them afterwards.

    Python-level handlers record the signal; the previous handlers come back on exit and the
    first recorded signal is raised again, so an interrupt ends the program only after the set
    is complete (or restored). Off the main thread (where handlers cannot be set) nothing is
    held.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    caught: list[int] = []
    previous = {}
    for name in ("SIGINT", "SIGTERM", "SIGHUP"):
        number = getattr(signal, name, None)
        if number is None:
            continue
        old = signal.getsignal(number)
        if old is None:  # installed outside Python: cannot be put back, leave it
            continue
        previous[number] = old
        signal.signal(number, lambda signum, frame: caught.append(signum))
    try:
        yield
    finally:
        for number, old in previous.items():
            signal.signal(number, old)
        if caught:
            signal.raise_signal(caught[0])


# ---------------------------------------------------------------------- helpers
def _kind(path: Path) -> str:
    """``missing``, ``file`` (regular, links followed), ``folder`` or ``special``."""
    try:
        mode = os.stat(path).st_mode
    except FileNotFoundError:
        return "special" if os.path.lexists(path) else "missing"  # a dangling link
    except NotADirectoryError:
        return "missing"
    except OSError:
        return "special"
    if stat.S_ISREG(mode):
        return "file"
    if stat.S_ISDIR(mode):
        return "folder"
    return "special"


def _relative(name: str) -> PurePosixPath:
    relative = PurePosixPath(name)
    if (
        not name
        or not relative.parts
        or relative.is_absolute()
        or any(part in ("", ".", "..") for part in relative.parts)
        or "\\" in name
    ):
        raise OutputError(f"invalid file name {name!r} (a relative name without '..')")
    return relative


def _is_cwd_or_above(folder: Path) -> bool:
    try:
        here, there = Path.cwd().resolve(), folder.resolve()
    except OSError:
        return True
    return here == there or there in here.parents


def _reason(exc: OSError) -> str:
    return exc.strerror or str(exc)


def _file_mode() -> int:
    """Mode of a new file under the process umask (0644 under the common umask 022)."""
    return 0o666 & ~_umask()


def _folder_mode() -> int:
    """Mode of a new folder under the process umask (0755 under the common umask 022)."""
    return 0o777 & ~_umask()


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask
