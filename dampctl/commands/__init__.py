"""Subcommands of the ``dampctl`` program, one module each (``NAME``, ``HELP``,
``add_arguments(parser)``, ``run(args, out, err) -> int``)."""
