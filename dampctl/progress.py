"""A small progress bar on stderr for long searches.

It stays silent for the first ``delay_s`` seconds so that quick runs print nothing, and it
draws only on a terminal: a bar redraws itself with carriage returns, which in a log file or a
pipe would leave a line of ``\\r``-joined frames. So a stream that is not a terminal (a file,
a pipe, ``io.StringIO``) gets nothing unless ``force`` is set. Commands pass their error
stream and let this rule decide; nothing else in dampctl should test ``isatty``.
"""

from __future__ import annotations

import sys
import time
from typing import TextIO

__all__ = ["Progress", "is_terminal"]


def is_terminal(stream: TextIO | None) -> bool:
    """Whether ``stream`` is an open terminal (where a redrawn bar belongs).

    Parameters
    ----------
    stream : file-like or None
        The stream to test; None, a closed stream or one without ``isatty`` is not a terminal.

    Returns
    -------
    bool
        True only for an open terminal.
    """
    isatty = getattr(stream, "isatty", None)
    if isatty is None:
        return False
    try:
        return bool(isatty())
    except (ValueError, OSError):  # a closed or detached stream
        return False


class Progress:
    """Progress of ``total`` steps, drawn on ``stream`` after ``delay_s`` seconds.

    Parameters
    ----------
    total : int
        Number of steps.
    label : str, optional
        Text before the bar.
    stream : file-like, optional
        Where to draw (default stderr).
    delay_s : float, optional
        Seconds before the bar first appears.
    enabled : bool, optional
        False suppresses all output (``--quiet``).
    force : bool, optional
        Draw even when ``stream`` is not a terminal (tests).
    """

    def __init__(
        self,
        total: int,
        label: str = "",
        *,
        stream: TextIO | None = None,
        delay_s: float = 2.0,
        enabled: bool = True,
        force: bool = False,
    ):
        self.total = max(int(total), 1)
        self.label = label
        self.stream = stream if stream is not None else sys.stderr
        self.delay_s = delay_s
        self.enabled = enabled and (force or is_terminal(self.stream))
        self.done = 0
        self._start = time.monotonic()
        self._drawn = False

    def advance(self, steps: int = 1) -> None:
        """Record finished steps and redraw when due.

        Parameters
        ----------
        steps : int, optional
            Number of steps finished since the last call.
        """
        self.done = min(self.done + steps, self.total)
        if not self.enabled or time.monotonic() - self._start < self.delay_s:
            return
        self._draw()

    def _draw(self) -> None:
        width = 30
        filled = int(width * self.done / self.total)
        bar = "#" * filled + "-" * (width - filled)
        self.stream.write(f"\r{self.label} [{bar}] {self.done}/{self.total}")
        self.stream.flush()
        self._drawn = True

    def close(self) -> None:
        """End the bar's line if it was drawn."""
        if self._drawn:
            self.stream.write("\n")
            self.stream.flush()

    def __enter__(self) -> Progress:
        return self

    def __exit__(self, exc_type, *exc) -> None:
        if exc_type is None and self._drawn and self.done < self.total:
            # the work ended early (a search stopped once it had its answer): show it finished
            self.done = self.total
            self._draw()
        self.close()
