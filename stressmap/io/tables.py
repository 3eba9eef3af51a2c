"""CSV tables from files: the one reader the edges share (fault tables, density profiles).

Layer: io (paths and files). Rows are data rows numbered from 1 (the header is row 0); ``#``
starts a comment; spaces after commas are ignored.
"""

from __future__ import annotations

from pathlib import Path

from stressmap.errors import InputError, problem

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
    import pandas as pd  # the CLI imports this module for every command; pandas only when reading

    path = Path(path)
    try:
        frame = pd.read_csv(path, comment="#", skipinitialspace=True)
    except (OSError, ValueError) as exc:  # ValueError: parser, encoding and empty-file errors
        raise InputError(f"cannot read {what} {path}: {exc}",
                         [problem(str(exc), field=field)]) from exc
    missing = [c for c in required if c not in frame.columns]
    if missing:
        raise InputError(f"{what} {path} lacks column(s) {', '.join(missing)}",
                         [problem("required column missing", field=c) for c in missing])
    return frame
