"""Errors raised by dampctl.

Every error dampctl raises on purpose derives from :class:`DampctlError`, and each concrete
error is also the builtin exception a caller would naturally catch::

    DampctlError (Exception)
    ├── PlantError (DampctlError, ValueError)        invalid modal plant or plant file
    │   └── PlantFileError (PlantError)               file unreadable / not TOML / bad key
    ├── DesignError (DampctlError, ValueError)       invalid design, or design/plant mismatch
    │   └── DesignRefused (DesignError)               a law refuses the requested loop
    ├── MeasurementError (DampctlError, ValueError)  invalid measured FRF, or no mode found in it
    ├── UsageError (DampctlError, ValueError)        bad argument combination or value
    ├── OutputError (DampctlError, OSError)          an output cannot be written safely
    └── MissingFeatureError (DampctlError, ImportError)  an optional library is missing

The command line catches :class:`DampctlError` only at the top and turns it into one line
on stderr with exit code 2.

Messages name *where* (file and field, when known), *what* arrived and *what* was expected.
"""

from __future__ import annotations

__all__ = [
    "DampctlError",
    "DesignError",
    "DesignRefused",
    "MeasurementError",
    "MissingFeatureError",
    "OutputError",
    "PlantError",
    "PlantFileError",
    "UsageError",
]


class DampctlError(Exception):
    """Base class of every error dampctl raises on purpose.

    Parameters
    ----------
    message : str
        What is wrong and, where useful, what to do about it.
    source : str, optional
        The file the problem was found in, if any.
    field : str, optional
        The field (dotted path such as ``modes[3].damping``) the problem concerns.
    """

    def __init__(self, message: str, *, source: str | None = None, field: str | None = None):
        self.message = message
        self.source = source
        self.field = field
        super().__init__(self._compose())

    def _compose(self) -> str:
        where = ": ".join(part for part in (self.source, self.field) if part)
        return f"{where}: {self.message}" if where else self.message


class PlantError(DampctlError, ValueError):
    """A modal plant (built in code or read from a file) is invalid."""


class PlantFileError(PlantError):
    """A plant file cannot be read, is not TOML, or has a missing or unknown key."""


class DesignError(DampctlError, ValueError):
    """A design is invalid or does not belong to the plant it is used with."""


class DesignRefused(DesignError):
    """A damping law refuses a loop it cannot make work (for example a non-collocated pair)."""


class MeasurementError(DampctlError, ValueError):
    """A measured FRF (file or array) is invalid, or no mode can be identified from it."""


class UsageError(DampctlError, ValueError):
    """An argument or combination of arguments is invalid."""


class OutputError(DampctlError, OSError):
    """An output cannot be written safely (it would overwrite an input, or the folder exists)."""


class MissingFeatureError(DampctlError, ImportError):
    """A feature needs an optional library (such as slycot) that is not installed."""
