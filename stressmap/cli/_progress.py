"""One progress bar for every long CLI command (build, demo, ensembles)."""

from __future__ import annotations

import sys

__all__ = ["progress_bar"]


def progress_bar(description: str):
    """A tqdm bar on stderr and a ``progress(fraction, message)`` callback that drives it.

    Returns ``(bar, update)``; close the bar when the work ends.
    """
    from tqdm import tqdm

    bar = tqdm(total=100, desc=description, unit="%", file=sys.stderr, leave=False,
               bar_format="{desc}: {percentage:3.0f}% |{bar}| {postfix}")

    def update(fraction: float, message: str = "") -> None:
        bar.n = round(100 * max(0.0, min(1.0, float(fraction))))
        bar.set_postfix_str(message)
        bar.refresh()

    return bar, update
