"""The ``dampctl`` command: one subcommand per stage of the job.

Thin by design: parse arguments, call the public API, print. Exit codes: 0 done (and every
requirement met), 1 done but a requirement of the plant file is not met, 2 bad input or usage
(one line on stderr naming file, field and problem; no traceback).
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Sequence
from typing import TextIO

from dampctl import __version__
from dampctl.commands import assess, check, demo, export, plant, report, schema, size, tune
from dampctl.errors import DampctlError

__all__ = ["build_parser", "entry_point", "main"]

#: subcommand modules, in the order of the job
COMMANDS = (plant, check, size, tune, assess, export, report, demo, schema)


class _Parser(argparse.ArgumentParser):
    """argparse parser whose errors become :class:`UsageExit` instead of ``sys.exit``."""

    def error(self, message: str):
        raise _UsageExit(f"{self.prog}: {message}")


class _UsageExit(Exception):
    pass


def build_parser() -> argparse.ArgumentParser:
    """The argument parser with every subcommand.

    Returns
    -------
    argparse.ArgumentParser
    """
    parser = _Parser(
        prog="dampctl",
        description="Design active vibration damping from modal parameters.",
        epilog="Exit codes: 0 done, 1 a plant-file requirement is not met, 2 bad input.",
    )
    parser.add_argument("--version", action="version", version=f"dampctl {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for module in COMMANDS:
        command = sub.add_parser(module.NAME, help=module.HELP, description=module.HELP)
        module.add_arguments(command)
        command.set_defaults(_run=module.run)
    return parser


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
        Exit code: 0 done, 1 requirement not met, 2 bad input or usage.
    """
    out = stdout if stdout is not None else sys.stdout
    err = stderr if stderr is not None else sys.stderr
    parser = build_parser()
    try:
        args = parser.parse_args(list(sys.argv[1:] if argv is None else argv))
    except _UsageExit as exc:
        err.write(f"{exc}\n")
        return 2
    except SystemExit as exc:  # --help / --version
        return int(exc.code or 0)
    if not getattr(args, "_run", None):
        parser.print_help(out)
        return 2
    try:
        return int(args._run(args, out, err))
    except DampctlError as exc:
        err.write(f"dampctl {args.command}: error: {exc}\n")
        return 2
    except BrokenPipeError:
        raise  # the reader went away: entry_point ends quietly
    except OSError as exc:  # a file the system refuses (permissions, full disk ...)
        where = f"{exc.filename}: " if exc.filename else ""
        err.write(f"dampctl {args.command}: error: {where}{exc.strerror or exc}\n")
        return 2


def entry_point() -> None:
    """Console-script entry: ``sys.exit(main())``.

    A reader that stops early (``dampctl check plant.toml | head``) ends the output quietly,
    as other command-line tools do, instead of with a traceback.
    """
    try:
        code = main()
        sys.stdout.flush()
    except BrokenPipeError:
        # the reader closed the pipe: drop what is left of stdout without a second error
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        code = 1
    sys.exit(code)
