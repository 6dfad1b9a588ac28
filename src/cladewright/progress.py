"""Internal: the progress line behind progress=True.

A progress line with the estimated time left, on stderr when it is a terminal."""

from __future__ import annotations

import sys
import time
from typing import Literal, TextIO

__all__ = ["Progress"]


class Progress:
    """``with Progress("bootstrap", total) as bar: bar.advance(k)``.

    Draws only when ``stream`` is a terminal and ``enabled``; at most ten
    redraws a second, so it costs nothing on fast loops.
    """

    label: str
    total: int
    stream: TextIO
    enabled: bool
    done: int

    def __init__(self, label: str, total: int, *, enabled: bool = True, stream: TextIO | None = None,
                 done: int = 0) -> None:
        self.label = label
        self.total = max(0, int(total))
        self.stream = stream if stream is not None else sys.stderr
        self.enabled = enabled and hasattr(self.stream, "isatty") and self.stream.isatty()
        self.done = done
        self._start_done = done
        self._start = time.monotonic()
        self._last = 0.0

    def __enter__(self) -> Progress:
        self._draw(force=True)
        return self

    def __exit__(self, *exc: object) -> Literal[False]:
        if self.enabled:
            self._draw(force=True)
            self.stream.write("\n")
            self.stream.flush()
        return False

    def advance(self, k: int = 1) -> None:
        self.done += k
        self._draw()

    def eta_seconds(self) -> float | None:
        """Seconds left at the rate seen so far in this run, or None before any progress."""
        made = self.done - self._start_done
        if made <= 0:
            return None
        rate = (time.monotonic() - self._start) / made
        return rate * (self.total - self.done)

    def _draw(self, force: bool = False) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        if not force and now - self._last < 0.1:
            return
        self._last = now
        width = 28
        frac = self.done / self.total if self.total else 1.0
        filled = int(round(width * frac))
        eta = self.eta_seconds()
        left = "--:--" if eta is None else _clock(eta)
        self.stream.write(f"\r{self.label} {self.done}/{self.total} |{'#' * filled}{'.' * (width - filled)}| "
                          f"{100 * frac:3.0f}%  {left} left ")
        self.stream.flush()


def _clock(seconds: float) -> str:
    seconds = int(round(seconds))
    h, rem = divmod(seconds, 3600)
    m, s = divmod(rem, 60)
    return f"{h}:{m:02d}:{s:02d}" if h else f"{m:02d}:{s:02d}"
