"""A small progress bar on stderr for long searches.

It stays silent for the first ``delay_s`` seconds so that quick runs print nothing, and only
draws when stderr is a terminal or ``force`` is set.
"""

from __future__ import annotations

import sys
import time
from typing import TextIO

__all__ = ["Progress"]


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
        False suppresses all output.
    """

    def __init__(
        self,
        total: int,
        label: str = "",
        *,
        stream: TextIO | None = None,
        delay_s: float = 2.0,
        enabled: bool = True,
    ):
        self.total = max(int(total), 1)
        self.label = label
        self.stream = stream if stream is not None else sys.stderr
        self.delay_s = delay_s
        self.enabled = enabled
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
