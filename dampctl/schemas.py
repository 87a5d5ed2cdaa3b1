"""JSON Schemas of dampctl's files and ``--json`` outputs, shipped with the package.

One schema per document (JSON Schema draft 2020-12), in ``dampctl/data/schemas/<name>.json``:
the plant file (``plant``: the TOML document as parsed), the design file (``design``), the
exported controller file (``controller``) and the ``--json`` output of every subcommand
(``check``, ``sizing``, ``tune``, ``assessment``, ``export``, ``report``, ``demo``, ...).
``dampctl schema NAME`` prints one.

The schemas state the keys a document must have and the type of every key they name. They
allow keys they do not name (``additionalProperties`` is left open) wherever dampctl's own
readers do: a newer dampctl may add keys to a document without breaking a validator written
for this one. The plant file is the exception: its reader refuses unknown keys, and so does
its schema.

Reading them needs nothing beyond the standard library; validating needs a JSON Schema
validator such as the ``jsonschema`` package (not a dependency of dampctl).
"""

from __future__ import annotations

import importlib.resources
import json
from typing import Any

from dampctl.errors import UsageError

__all__ = ["load_schema", "schema_names"]

_FOLDER = ("data", "schemas")


def _folder():
    return importlib.resources.files("dampctl").joinpath(*_FOLDER)


def schema_names() -> tuple[str, ...]:
    """Names of the shipped schemas, sorted.

    Returns
    -------
    tuple of str
        E.g. ``("assessment", "check", "controller", "demo", "design", ...)``.
    """
    return tuple(
        sorted(
            entry.name.removesuffix(".json")
            for entry in _folder().iterdir()
            if entry.name.endswith(".json")
        )
    )


def load_schema(name: str) -> dict[str, Any]:
    """One schema as a dictionary.

    Parameters
    ----------
    name : str
        A name from :func:`schema_names` (``plant``, ``design``, ``controller``, ``check``, ...).

    Returns
    -------
    dict
        The JSON Schema document.

    Raises
    ------
    UsageError
        When there is no schema of that name (the message lists the names).
    """
    names = schema_names()
    if name not in names:
        raise UsageError(f"no schema named {name!r} (choose one of: {', '.join(names)})")
    return json.loads(_folder().joinpath(f"{name}.json").read_text(encoding="utf-8"))
