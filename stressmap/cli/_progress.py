"""One progress display for every long CLI command (build, demo, calibration, ensembles).

On a terminal: a tqdm bar on stderr, redrawn in place, with the current step after the bar.
Anywhere else (a file, a pipe, a CI log): one plain line per step, printed once, e.g.
``build:  30% assembling the sheet`` -- no carriage returns, no bar characters.
"""

from __future__ import annotations

import sys

__all__ = ["progress_bar", "PlainProgress"]


class PlainProgress:
    """Progress as plain lines: one line whenever the step's message changes."""

    def __init__(self, description: str, stream):
        self.description = description
        self.stream = stream
        self._last: str | None = None

    def update(self, fraction: float, message: str = "") -> None:
        if message == self._last:
            return
        self._last = message
        pct = round(100 * max(0.0, min(1.0, float(fraction))))
        line = f"{self.description}: {pct:3d}%" + (f" {message}" if message else "")
        print(line, file=self.stream, flush=True)

    def close(self) -> None:
        """Nothing to clear (lines stay in the log)."""


def _is_terminal(stream) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):  # closed or file-like without isatty
        return False


def progress_bar(description: str, stream=None):
    """A progress display and a ``progress(fraction, message)`` callback that drives it.

    Returns ``(bar, update)``; close the bar when the work ends. ``stream`` defaults to
    ``sys.stderr``; when it is not a terminal the display is :class:`PlainProgress`.
    """
    stream = sys.stderr if stream is None else stream
    if not _is_terminal(stream):
        plain = PlainProgress(description, stream)
        return plain, plain.update

    from tqdm import tqdm  # only a terminal shows a bar

    class _Bar(tqdm):
        message = ""

        @property
        def format_dict(self):
            return {**super().format_dict, "message": self.message}

    bar = _Bar(total=100, desc=description, unit="%", file=stream, leave=False,
               bar_format="{desc}: {percentage:3.0f}% |{bar}| {message}")

    def update(fraction: float, message: str = "") -> None:
        bar.n = round(100 * max(0.0, min(1.0, float(fraction))))
        bar.message = message
        bar.refresh()

    return bar, update
