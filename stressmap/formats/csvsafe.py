"""Text cells that a spreadsheet will not run: the one CSV-injection guard of the package.

OWASP "CSV Injection": a cell starting with ``=``, ``+``, ``-``, ``@``, tab or carriage return is
run as a formula by common spreadsheet programs; a carriage return inside an unquoted cell starts
a new row there, so a formula can hide behind it. Every CSV writer of the package passes echoed
text (cells, column names from client keys, comment lines) through :func:`csv_cell`: line breaks
become spaces and a formula-like text gets a leading apostrophe (numbers are left alone).
"""

from __future__ import annotations

__all__ = ["FORMULA_PREFIXES", "csv_cell", "csv_safe_frame"]

FORMULA_PREFIXES = ("=", "+", "-", "@", "\t", "\r")


def csv_cell(value):
    """``value`` safe as a CSV cell (strings only; anything else unchanged).

    Examples
    --------
    >>> csv_cell("=HYPERLINK(1)"), csv_cell("-12.5"), csv_cell("ok\\r=1+1")
    ("'=HYPERLINK(1)", '-12.5', 'ok =1+1')
    >>> csv_cell(3.0)
    3.0
    """
    if not isinstance(value, str):
        return value
    text = value.replace("\r\n", " ").replace("\r", " ").replace("\n", " ")
    if text.startswith(FORMULA_PREFIXES):
        try:
            float(text)
        except ValueError:
            return "'" + text
    return text


def csv_safe_frame(frame):
    """A copy of a pandas DataFrame with text cells and column names passed through
    :func:`csv_cell`."""
    from pandas.api.types import (
        is_string_dtype,  # pandas is imported by the callers anyway
    )

    out = frame.copy()
    for c in out.columns:
        if out[c].dtype == object or is_string_dtype(out[c].dtype):
            out[c] = out[c].map(csv_cell)
    out.columns = [csv_cell(str(c)) for c in out.columns]
    return out
