"""One exception hierarchy for the whole package.

Every error a user can cause is an :class:`InputError` carrying a list of *problems*, each a dict
with a human-readable ``message`` and, where known, the ``field`` (JSON pointer-like path or column
name) and the ``row`` (1-based data row of a file) it concerns. The HTTP layer turns these into
RFC 9457 problem details; the CLI prints one line per problem.
"""

from __future__ import annotations

__all__ = [
    "StressmapError",
    "InputError",
    "ModelValidationError",
    "IndicatorFileError",
    "OutsidePlateError",
    "NotFoundError",
    "StorageError",
    "problem",
]


def problem(message: str, field: str | None = None, row: int | None = None, **extra) -> dict:
    """Build one problem entry.

    Examples
    --------
    >>> problem("must be a number", field="sheet.thickness_km")
    {'message': 'must be a number', 'field': 'sheet.thickness_km'}
    >>> problem("not a number", field="azimuth_deg", row=3)
    {'message': 'not a number', 'field': 'azimuth_deg', 'row': 3}
    """
    out: dict = {"message": message}
    if field is not None:
        out["field"] = field
    if row is not None:
        out["row"] = int(row)
    out.update(extra)
    return out


class StressmapError(Exception):
    """Base class of every error raised on purpose by stressmap."""


class InputError(StressmapError, ValueError):
    """Input that cannot be used, with one entry per problem found.

    Parameters
    ----------
    message : str
        One-line summary.
    problems : list of dict, optional
        Entries made by :func:`problem`. When omitted, the summary is the only problem.
    """

    def __init__(self, message: str, problems: list[dict] | None = None):
        super().__init__(message)
        self.message = message
        self.problems = list(problems) if problems else [problem(message)]

    def __str__(self) -> str:
        if len(self.problems) == 1 and self.problems[0]["message"] == self.message:
            return self.message
        lines = [self.message]
        for p in self.problems:
            where = ", ".join(
                f"{k} {p[k]}" for k in ("row", "field") if p.get(k) is not None
            )
            lines.append(f"  - {where + ': ' if where else ''}{p['message']}")
        return "\n".join(lines)


class ModelValidationError(InputError):
    """A plate model document that fails validation."""


class IndicatorFileError(InputError):
    """A stress-indicator file with unusable rows or columns."""


class OutsidePlateError(InputError):
    """Query points that lie outside the plate when inside points were required."""


class NotFoundError(StressmapError, LookupError):
    """A stored model, job or file that does not exist."""


class StorageError(StressmapError, OSError):
    """The data directory cannot be written or read (full disk, read-only, corrupt entry)."""
