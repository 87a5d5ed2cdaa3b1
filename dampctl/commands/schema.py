"""``dampctl schema [NAME]``: print the JSON Schema of a dampctl file or ``--json`` output."""

from __future__ import annotations

import argparse
import json
from typing import TextIO

from dampctl.schemas import load_schema, schema_names

NAME = "schema"
HELP = "print the JSON Schema of a file (plant, design, controller) or of a --json output"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``dampctl schema``.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    parser.add_argument(
        "name",
        nargs="?",
        metavar="NAME",
        help="which schema: plant, design, controller, or a command's --json output (check, "
        "sizing, tune, assessment, export, report, demo, ...); without NAME, list them",
    )


def run(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Run ``dampctl schema``.

    Parameters
    ----------
    args : argparse.Namespace
        Parsed options.
    out, err : file-like
        Streams for results and for messages.

    Returns
    -------
    int
        Exit code 0 (an unknown name raises a UsageError, exit 2).
    """
    if args.name is None:
        width = max(len(name) for name in schema_names())
        for name in schema_names():
            out.write(f"{name.ljust(width)}  {load_schema(name)['title']}\n")
        return 0
    out.write(json.dumps(load_schema(args.name), indent=2, ensure_ascii=False) + "\n")
    return 0
