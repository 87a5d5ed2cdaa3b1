"""The ``dampctl`` command: one subcommand per stage of the job.

Thin by design: parse arguments, call the public API, print. Exit codes (:data:`EXIT_CODES`):

* 0 done, and every stated requirement met;
* 1 done, but a requirement stated in the plant file (or by an option) is not met;
* 2 bad input or usage: one line on stderr naming the file, field or option and the problem;
* 3 internal error: one line asking to report it (a dampctl bug, never "requirement not met");
* 130 interrupted (Ctrl-C): one line; outputs are left whole (old or new, see fileio).

The traceback of an error is printed only with ``--debug`` or ``DAMPCTL_DEBUG=1``.
"""

from __future__ import annotations

import argparse
import os
import sys
import traceback
from collections.abc import Sequence
from typing import TextIO

from dampctl import __version__
from dampctl.commands import (
    assess,
    check,
    compare,
    demo,
    export,
    plant,
    report,
    schema,
    shape,
    simulate,
    size,
    tune,
)
from dampctl.commands._common import add_quiet
from dampctl.errors import DampctlError

__all__ = ["EXIT_CODES", "build_parser", "entry_point", "main"]

#: subcommand modules, in the order of the job
COMMANDS = (
    plant, check, size, tune, shape, simulate, assess, compare, export, report, demo, schema
)

#: what each exit code means
EXIT_CODES = {
    0: "done (every stated requirement met)",
    1: "done, but a stated requirement is not met",
    2: "bad input or usage (also: the problem is too large for this machine's memory)",
    3: "internal error (please report it)",
    130: "interrupted",
    141: "the reader of the output went away (a closed pipe)",
}
#: exit code after the reader of stdout went away (128 + SIGPIPE, as a shell shows it)
BROKEN_PIPE_EXIT = 141
#: environment variable that turns on tracebacks like --debug
DEBUG_ENV = "DAMPCTL_DEBUG"


class _Parser(argparse.ArgumentParser):
    """argparse parser whose errors become :class:`UsageExit` instead of ``sys.exit``."""

    def error(self, message: str):
        raise _UsageExit(f"{self.prog}: error: {' '.join(message.split())}")


class _UsageExit(Exception):
    pass


class _Quiet:
    """The error stream under ``--quiet``: writes pass through, but it never claims to be a
    terminal, so no progress bar draws (:mod:`dampctl.progress`); step messages check
    ``args.quiet`` themselves."""

    def __init__(self, stream: TextIO):
        self._stream = stream

    def write(self, text: str) -> int:
        return self._stream.write(text)

    def flush(self) -> None:
        self._stream.flush()

    def isatty(self) -> bool:
        return False


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand.

    Returns
    -------
    argparse.ArgumentParser
    """
    parser = _Parser(
        prog="dampctl",
        description="Design active vibration damping from modal parameters.",
        epilog="Exit codes: 0 done, 1 a stated requirement is not met, 2 bad input or usage, "
        "3 internal error (please report it), 130 interrupted.",
    )
    parser.add_argument("--version", action="version", version=f"dampctl {__version__}")
    _debug_option(parser, False)
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for module in COMMANDS:
        command = sub.add_parser(module.NAME, help=module.HELP, description=module.HELP)
        module.add_arguments(command)
        _debug_option(command, argparse.SUPPRESS)
        if not hasattr(module, "SUBCOMMANDS"):  # a dispatcher gives each of its own --quiet
            add_quiet(command)
        command.set_defaults(_run=module.run)
    return parser


def _debug_option(parser: argparse.ArgumentParser, default) -> None:
    """``--debug``, before or after the subcommand name."""
    parser.add_argument(
        "--debug",
        action="store_true",
        default=default,
        help=f"print the traceback of an error (also with {DEBUG_ENV}=1)",
    )


def main(
    argv: Sequence[str] | None = None, *, stdout: TextIO | None = None, stderr: TextIO | None = None
) -> int:
    """Run the command line.

    Parameters
    ----------
    argv : sequence of str, optional
        Arguments without the program name (default ``sys.argv[1:]``).
    stdout, stderr : file-like, optional
        Streams for output and errors (default the process streams).

    Returns
    -------
    int
        Exit code (:data:`EXIT_CODES`): 0 done, 1 requirement not met, 2 bad input or usage,
        3 internal error, 130 interrupted.
    """
    out = stdout if stdout is not None else sys.stdout
    err = stderr if stderr is not None else sys.stderr
    argv = list(sys.argv[1:] if argv is None else argv)
    debug = os.environ.get(DEBUG_ENV, "").strip() not in ("", "0")
    name = "dampctl"
    try:
        parser = build_parser()
        try:
            args = parser.parse_args(argv)
        except _UsageExit as exc:
            err.write(f"{exc}\n")
            return 2
        except SystemExit as exc:  # --help / --version
            return int(exc.code or 0)
        args.argv = tuple(argv)  # the command line, for the files that record it (report)
        debug = debug or bool(getattr(args, "debug", False))
        if not getattr(args, "_run", None):
            parser.print_help(out)
            return 2
        name = f"dampctl {args.command}"
        if getattr(args, "quiet", False):
            err = _Quiet(err)
        return _run(args, out, err, name, debug)
    except KeyboardInterrupt:
        _flush(out)
        err.write(f"{name}: interrupted\n")
        return 130


def _run(args: argparse.Namespace, out: TextIO, err: TextIO, name: str, debug: bool) -> int:
    """Run a parsed subcommand and map what it raises to an exit code."""
    try:
        code = args._run(args, out, err)
    except DampctlError as exc:
        _traceback(err, debug)
        err.write(f"{name}: error: {_one_line(str(exc))}\n")
        return 2
    except (BrokenPipeError, KeyboardInterrupt):
        raise  # the reader went away (entry_point ends quietly) / Ctrl-C (main says so)
    except MemoryError as exc:  # the problem outgrew the memory: the user's size, not a bug
        _traceback(err, debug)
        err.write(f"{name}: error: {_out_of_memory(args, exc)}\n")
        return 2
    except OSError as exc:  # a file the system refuses (permissions, full disk ...)
        _traceback(err, debug)
        where = f"{exc.filename}: " if exc.filename else ""
        err.write(f"{name}: error: {where}{_one_line(exc.strerror or str(exc))}\n")
        return 2
    except Exception as exc:  # a bug: never reported as "requirement not met"
        _traceback(err, debug)
        hint = "" if debug else f" (run with --debug or {DEBUG_ENV}=1 for the traceback)"
        err.write(
            f"{name}: internal error: {type(exc).__name__}: {_one_line(str(exc))[:300]}; "
            f"this is a bug in dampctl, please report it with the command line{hint}\n"
        )
        return 3
    if not isinstance(code, int) or isinstance(code, bool) or code not in (0, 1, 2):
        err.write(f"{name}: internal error: the command returned {code!r}; please report it\n")
        return 3
    return code


def _out_of_memory(args: argparse.Namespace, exc: MemoryError) -> str:
    """One line for a command that ran out of memory: the plant's size and the failed request.

    The plant file is read again for its number of modes (the memory of the failed run is
    free by now); a plant that cannot be read again is left unnamed rather than failing twice.
    """
    size = ""
    path = getattr(args, "plant", None)
    if isinstance(path, str):
        try:
            from dampctl.model.plantfile import load_plant

            size = f" on a plant of {load_plant(path).n_modes} modes ({path})"
        except (Exception, MemoryError):
            size = f" on the plant {path}"
    detail = _one_line(str(exc))[:200]
    detail = f" ({detail})" if detail else ""
    return (
        f"out of memory{size}{detail}; use fewer modes, pairs or cases, or a machine with "
        "more memory"
    )


def _traceback(err: TextIO, debug: bool) -> None:
    if debug:
        err.write(traceback.format_exc())


def _one_line(text: str) -> str:
    return " ".join(text.split())


def _flush(stream: TextIO) -> None:
    try:
        stream.flush()
    except (OSError, ValueError):
        pass


def entry_point() -> None:
    """Console-script entry: ``sys.exit(main())``.

    A reader that stops early (``dampctl check plant.toml | head``) ends the output quietly,
    as other command-line tools do, instead of with a traceback.
    """
    try:
        code = main()
        sys.stdout.flush()
    except BrokenPipeError:
        # the reader closed the pipe: drop what is left of stdout without a second error, and
        # exit as a program ended by SIGPIPE shows in a shell (never 1: that is "not met")
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        code = BROKEN_PIPE_EXIT
    sys.exit(code)
