"""``dampctl plant SUBCOMMAND``: make a plant file from what the engineer has.

A dispatcher over one module per way of building a plant (``commands/plant_<name>.py``), each
with the subcommand protocol of :mod:`dampctl.commands.cli` (``NAME``, ``HELP``,
``add_arguments(parser)``, ``run(args, out, err)``). Add a new one to ``SUBCOMMANDS``.
"""

from __future__ import annotations

import argparse
from typing import TextIO

from dampctl.commands import plant_fe, plant_fit, plant_new
from dampctl.commands._common import add_quiet

NAME = "plant"
HELP = "write a plant file: a commented starter, or from FE matrices, mode tables, measurements"

#: the ``dampctl plant`` subcommands, in the order they are listed
SUBCOMMANDS = (plant_new, plant_fe, plant_fit)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``dampctl plant``: one sub-subcommand per way of building a plant.

    Parameters
    ----------
    parser : argparse.ArgumentParser
        The subcommand's parser.
    """
    sub = parser.add_subparsers(dest="plant_command", metavar="SUBCOMMAND", required=True)
    for module in SUBCOMMANDS:
        command = sub.add_parser(module.NAME, help=module.HELP, description=module.HELP)
        module.add_arguments(command)
        add_quiet(command)
        # ``command`` names the whole subcommand in error lines ("dampctl plant new: error: ...")
        command.set_defaults(_plant_run=module.run, command=f"{NAME} {module.NAME}")


def run(args: argparse.Namespace, out: TextIO, err: TextIO) -> int:
    """Run the chosen ``dampctl plant`` subcommand.

    Parameters
    ----------
    args : argparse.Namespace
        Parsed options (``_plant_run`` is the chosen subcommand's ``run``).
    out, err : file-like
        Streams for results and for messages.

    Returns
    -------
    int
        The subcommand's exit code.
    """
    return int(args._plant_run(args, out, err))
