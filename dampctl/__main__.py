"""``python -m dampctl``: the same as the ``dampctl`` command."""

from dampctl.cli import entry_point

entry_point()
