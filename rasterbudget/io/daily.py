"""Daily series read from a CSV table with a ``date`` column (YYYY-MM-DD)."""

from __future__ import annotations

import csv
import datetime as dt
from pathlib import Path

import numpy as np

from ..errors import InputValueError


def read_daily_series(
    path: str | Path, columns: tuple[str, ...], last_day: dt.date, days: int
) -> dict[str, np.ndarray]:
    """The ``days`` consecutive days ending on ``last_day`` of each column, as float arrays in
    date order; every day must be in the table, every value a number."""
    path = Path(path)
    if not path.is_file():
        raise InputValueError(f"daily table {path} does not exist; fix the path in the recipe.")
    with path.open(newline="", encoding="utf-8") as f:
        reader = csv.DictReader(f)
        missing = [c for c in ("date", *columns) if c not in (reader.fieldnames or [])]
        if missing:
            raise InputValueError(
                f"daily table {path} has no column {', '.join(missing)}; it needs date "
                f"(YYYY-MM-DD) and {', '.join(columns)}."
            )
        rows = {row["date"].strip(): row for row in reader}
    out = {c: np.empty(days) for c in columns}
    for i in range(days):
        day = last_day - dt.timedelta(days=days - 1 - i)
        row = rows.get(day.isoformat())
        if row is None:
            raise InputValueError(
                f"daily table {path} has no row for {day} (needed: {days} days to {last_day}); "
                "add it, or lower the number of days."
            )
        for c in columns:
            try:
                out[c][i] = float(row[c])
            except (TypeError, ValueError):
                raise InputValueError(
                    f"daily table {path}, {day}, column {c} = {row[c]!r} is not a number."
                ) from None
    return out
