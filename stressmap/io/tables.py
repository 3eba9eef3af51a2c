"""CSV tables from files: the one reader the edges share (fault tables, density profiles).

Layer: io (paths and files). Parsing is :func:`stressmap.formats.tables.csv_table_from_text`.
Rows are data rows numbered from 1 (the header is row 0); ``#`` starts a comment; spaces after
commas are ignored.
"""

from __future__ import annotations

from pathlib import Path

from stressmap.errors import InputError, problem
from stressmap.formats.tables import csv_table_from_text

__all__ = ["read_csv_table"]


def read_csv_table(path, required=(), *, what: str = "table", field: str = "file"):
    """Read a CSV file into a pandas DataFrame, refusing it when unreadable or short of columns.

    Parameters
    ----------
    path : str or Path
    required : sequence of str
        Columns that must be present (each missing one is a problem naming it).
    what : str
        What the file is, for messages ("fault table", "density profile").
    field : str
        The field (CLI option or request field) an unreadable file is reported under.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read {what} {path}: {exc}",
                         [problem(str(exc), field=field)]) from exc
    return csv_table_from_text(text, required, what=what, name=str(path), field=field)
