"""A tiny text progress bar for long loops (training passes, feature extraction).

It draws on standard error only when that is a terminal and the user did not ask for
quiet output, so logs and pipes stay clean.
"""

from __future__ import annotations

import sys
import time

__all__ = ["ProgressBar"]


class ProgressBar:
    """``label [#####.....] 12/40 3.1s`` redrawn in place.

    Parameters
    ----------
    total : int >= 0
        Steps to the end.
    label : str
        Text in front of the bar.
    quiet : bool
        Draw nothing.
    stream : file, optional
        Where to draw (default: standard error). Nothing is drawn unless it is a terminal.
    width : int
        Characters of the bar itself.
    """

    def __init__(self, total: int, label: str, *, quiet: bool = False, stream=None, width: int = 30):
        self.total = max(int(total), 0)
        self.label = label
        self.width = width
        self.done = 0
        self.stream = sys.stderr if stream is None else stream
        isatty = getattr(self.stream, "isatty", None)
        self.enabled = (not quiet) and bool(isatty and isatty())
        self._start = time.monotonic()
        self._draw()

    def update(self, steps: int = 1) -> None:
        """Advance by ``steps`` and redraw."""
        self.done = min(self.done + steps, self.total)
        self._draw()

    def close(self) -> None:
        """Clear the bar's line."""
        if self.enabled:
            self.stream.write("\r\033[K")
            self.stream.flush()
            self.enabled = False

    def __enter__(self) -> "ProgressBar":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def _draw(self) -> None:
        if not self.enabled:
            return
        filled = self.width * self.done // self.total if self.total else self.width
        bar = "#" * filled + "." * (self.width - filled)
        elapsed = time.monotonic() - self._start
        self.stream.write(f"\r{self.label} [{bar}] {self.done}/{self.total} {elapsed:.1f}s")
        self.stream.flush()
