"""``python -m dampctl``: the same as the ``dampctl`` command."""

from dampctl.commands.cli import entry_point

entry_point()
