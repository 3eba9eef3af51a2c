"""CSV tables from text: the one CSV parser the edges share (fault tables, density profiles).

Layer: formats (no paths; :func:`stressmap.io.tables.read_csv_table` reads the file). Rows are
data rows numbered from 1 (the header is row 0); ``#`` starts a comment; spaces after commas are
ignored.
"""

from __future__ import annotations

import io

from stressmap.errors import InputError, problem

__all__ = ["csv_table_from_text"]


def csv_table_from_text(text: str, required=(), *, what: str = "table", name: str = "CSV",
                        field: str = "file"):
    """A pandas DataFrame from CSV text, refused when unreadable or short of columns.

    Parameters
    ----------
    text : str
    required : sequence of str
        Columns that must be present (each missing one is a problem naming it).
    what, name : str
        What the table is and where it came from, for messages ("fault table", "faults.csv").
    field : str
        The field (CLI option or request field) an unreadable table is reported under.

    Examples
    --------
    >>> csv_table_from_text("a, b\\n1, 2\\n", ("a",)).to_dict("records")
    [{'a': 1, 'b': 2}]
    >>> csv_table_from_text("a\\n1\\n", ("a", "c"), what="fault table", name="f.csv")
    Traceback (most recent call last):
    ...
    stressmap.errors.InputError: fault table f.csv lacks column(s) c
      - field c: required column missing
    """
    import pandas as pd  # the CLI imports this module for every command; pandas only when parsing

    try:
        frame = pd.read_csv(io.StringIO(text), comment="#", skipinitialspace=True)
    except (ValueError, pd.errors.ParserError) as exc:  # parser and empty-table errors
        raise InputError(f"cannot read {what} {name}: {exc}",
                         [problem(str(exc), field=field)]) from exc
    missing = [c for c in required if c not in frame.columns]
    if missing:
        raise InputError(f"{what} {name} lacks column(s) {', '.join(missing)}",
                         [problem("required column missing", field=c) for c in missing])
    return frame
