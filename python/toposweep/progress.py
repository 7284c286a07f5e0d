"""A one-line progress bar on stderr for long sweeps, silent when stderr is not a terminal."""

from __future__ import annotations

import sys
import time
from typing import TextIO

__all__ = ["ProgressBar"]


def _duration(seconds: float) -> str:
    """Compact duration, e.g. ``'42s'``, ``'3m05s'``, ``'1h02m'``.

    Examples
    --------
    >>> _duration(42.4), _duration(185), _duration(3720)
    ('42s', '3m05s', '1h02m')
    """
    s = int(round(seconds))
    if s < 60:
        return f"{s}s"
    if s < 3600:
        return f"{s // 60}m{s % 60:02d}s"
    return f"{s // 3600}h{s % 3600 // 60:02d}m"


class ProgressBar:
    """Points done out of a total, with rate and time left; redrawn at most 10 times a second.

    Parameters
    ----------
    total : int
        Number of points of the whole run.
    done : int
        Points already finished (a resumed run starts there).
    enabled : bool
        False silences the bar; True shows it only if ``stream`` is a terminal.
    stream : file, optional
        Where to draw (default ``sys.stderr``).

    Examples
    --------
    >>> bar = ProgressBar(100, enabled=True)   # doctest output is not a terminal: silent
    >>> bar.update(50); bar.close()
    >>> bar.shown
    False
    """

    def __init__(
        self, total: int, *, done: int = 0, enabled: bool = True, stream: TextIO | None = None
    ) -> None:
        self.stream = sys.stderr if stream is None else stream
        isatty = getattr(self.stream, "isatty", lambda: False)
        self.shown = bool(enabled) and bool(isatty())
        self.total = max(int(total), 1)
        self.done = int(done)
        self._start_done = self.done
        self._t0 = time.monotonic()
        self._last = 0.0
        self._drawn = -1

    def update(self, n: int) -> None:
        """Count ``n`` more finished points."""
        self.done += int(n)
        now = time.monotonic()
        if self.shown and (now - self._last > 0.1 or self.done >= self.total):
            self._last = now
            self._draw(now)

    def _draw(self, now: float) -> None:
        self._drawn = self.done
        frac = min(self.done / self.total, 1.0)
        width = 28
        filled = int(round(frac * width))
        elapsed = now - self._t0
        new = self.done - self._start_done
        rate = new / elapsed if elapsed > 0 else 0.0
        left = (self.total - self.done) / rate if rate > 0 else float("nan")
        eta = _duration(left) if left == left else "?"
        line = (
            f"\rsweep {frac:4.0%} [{'#' * filled}{'.' * (width - filled)}] "
            f"{self.done}/{self.total} points  {rate:,.0f}/s  {eta} left "
        )
        self.stream.write(line)
        self.stream.flush()

    def close(self) -> None:
        """End the bar's line."""
        if self.shown:
            if self._drawn != self.done:
                self._draw(time.monotonic())
            self.stream.write("\n")
            self.stream.flush()
            self.shown = False
