"""A small progress bar for the terminal (stderr), silent when output is not a terminal."""

from __future__ import annotations

import sys
import time


class Progress:
    """``with Progress(total, "rendering") as bar: bar.update(n)``."""

    def __init__(self, total: float, label: str = "", *, stream=None, enabled: bool | None = None):
        self.total = max(float(total), 1e-12)
        self.label = label
        self.stream = stream or sys.stderr
        self.enabled = self.stream.isatty() if enabled is None else enabled
        self.done = 0.0
        self._last = 0.0
        self._t0 = time.monotonic()

    def __enter__(self):
        self._draw(force=True)
        return self

    def __exit__(self, *exc):
        if self.enabled:
            self._draw(force=True)
            self.stream.write("\n")
            self.stream.flush()

    def update(self, amount: float = 1.0) -> None:
        self.done = min(self.total, self.done + amount)
        self._draw()

    def _draw(self, force: bool = False) -> None:
        if not self.enabled:
            return
        now = time.monotonic()
        if not force and now - self._last < 0.1:
            return
        self._last = now
        frac = self.done / self.total
        width = 30
        fill = int(round(frac * width))
        elapsed = now - self._t0
        eta = f" eta {elapsed / frac - elapsed:5.1f}s" if 0 < frac < 1 else ""
        self.stream.write(f"\r{self.label:<14} [{'#' * fill}{'.' * (width - fill)}] "
                          f"{100 * frac:5.1f}%{eta}  ")
        self.stream.flush()
