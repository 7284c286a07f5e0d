"""The progress bar of long sweeps (tqdm), silent when its stream is not a terminal.

tqdm draws the bar, rate and time left; this wrapper keeps the sweep's rules: shown only when
asked for *and* drawing to a terminal (a log file or a pipe gets no carriage-return litter),
resumed runs start at the points already done, and the count of undefined points so far is
shown beside the rate.
"""

from __future__ import annotations

import sys
from typing import TextIO

from tqdm import tqdm

__all__ = ["ProgressBar"]


class ProgressBar:
    """Points done out of a total, with rate, time left and undefined points so far.

    Parameters
    ----------
    total : int
        Number of points of the whole run.
    done : int
        Points already finished (a resumed run starts there).
    undefined : int
        Undefined points among those already finished.
    enabled : bool
        False silences the bar; True shows it only if ``stream`` is a terminal.
    stream : file, optional
        Where to draw (default ``sys.stderr``).

    Examples
    --------
    >>> bar = ProgressBar(100, enabled=True)   # doctest output is not a terminal: silent
    >>> bar.update(50, undefined=3); bar.close()
    >>> bar.shown, bar.done, bar.undefined
    (False, 50, 3)
    """

    def __init__(
        self,
        total: int,
        *,
        done: int = 0,
        undefined: int = 0,
        enabled: bool = True,
        stream: TextIO | None = None,
    ) -> None:
        self.stream = sys.stderr if stream is None else stream
        isatty = getattr(self.stream, "isatty", lambda: False)
        self.shown = bool(enabled) and bool(isatty())
        self._total = max(int(total), 1)
        self.done = int(done)
        self.undefined = int(undefined)
        #: where the work runs, e.g. "2 workers, 4 tasks" (set by runs on an executor)
        self.status = ""
        self._bar = (
            tqdm(
                total=self._total,
                initial=self.done,
                desc="sweep",
                unit=" points",
                file=self.stream,
                mininterval=0.1,
                dynamic_ncols=True,
                leave=True,
                postfix=self._postfix(),
            )
            if self.shown
            else None
        )

    @property
    def total(self) -> int:
        """Points of the whole run; a run that learns its size as it goes may raise it."""
        return self._total

    @total.setter
    def total(self, value: int) -> None:
        self._total = int(value)
        if self._bar is not None:
            self._bar.total = self._total or None  # (None: not known yet)
            self._bar.refresh()

    def _postfix(self) -> str:
        undefined = f"{self.undefined} undefined"
        return f"{self.status}, {undefined}" if self.status else undefined

    def set_status(self, text: str) -> None:
        """Show ``text`` beside the counts (drawn with the next update)."""
        if text != self.status:
            self.status = text
            if self._bar is not None:
                self._bar.set_postfix_str(self._postfix(), refresh=False)

    def update(self, n: int, *, undefined: int = 0) -> None:
        """Count ``n`` more finished points, ``undefined`` of them undefined."""
        self.done += int(n)
        self.undefined += int(undefined)
        if self._bar is not None:
            if undefined:
                self._bar.set_postfix_str(self._postfix(), refresh=False)
            self._bar.update(int(n))

    def close(self) -> None:
        """End the bar's line."""
        if self._bar is not None:
            self._bar.set_postfix_str(self._postfix(), refresh=False)
            self._bar.close()
            self._bar = None
            self.shown = False
