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
    clock : callable, optional
        Seconds from an arbitrary origin (default ``time.monotonic``; tests pass their own).

    Notes
    -----
    While the work runs the bar ends with an estimate of the time left, the time so far
    scaled by the steps left over the steps done (steps of equal cost assumed).
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
        clock=time.monotonic,
    ):
        self.total = max(int(total), 1)
        self.label = label
        self.stream = stream if stream is not None else sys.stderr
        self.delay_s = delay_s
        self.enabled = enabled and (force or is_terminal(self.stream))
        self.done = 0
        self._clock = clock
        self._start = clock()
        self._drawn = False
        self._width = 0

    def advance(self, steps: int = 1) -> None:
        """Record finished steps and redraw when due.

        Parameters
        ----------
        steps : int, optional
            Number of steps finished since the last call.
        """
        self.done = min(self.done + steps, self.total)
        if not self.enabled or self._clock() - self._start < self.delay_s:
            return
        self._draw()

    def _draw(self) -> None:
        width = 30
        filled = int(width * self.done / self.total)
        bar = "#" * filled + "-" * (width - filled)
        text = f"{self.label} [{bar}] {self.done}/{self.total}"
        if 0 < self.done < self.total:
            elapsed = self._clock() - self._start
            text += f", about {_duration(elapsed * (self.total - self.done) / self.done)} left"
        # pad over the end of a longer frame drawn before (the estimate comes and goes)
        self.stream.write(f"\r{text.ljust(self._width)}")
        self._width = max(self._width, len(text))
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


def _duration(seconds: float) -> str:
    """A time left as people read it: ``45 s``, ``3 min 10 s``, ``2 h 05 min``."""
    seconds = max(0, round(seconds))
    if seconds < 60:
        return f"{seconds} s"
    if seconds < 3600:
        return f"{seconds // 60} min {seconds % 60:02d} s"
    return f"{seconds // 3600} h {seconds % 3600 // 60:02d} min"
