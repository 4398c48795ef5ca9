"""CSV of field readings: one row per reading, a header row, times in UTC (ISO 8601) and epoch seconds.

Columns carry their units in their names; an empty cell is a value that was not computed
(NaN).  Written with the standard csv module (RFC 4180 quoting, `\\r\\n` line ends).
"""

from __future__ import annotations

import csv
from typing import TextIO

import numpy as np

from controller.store_migrations import MEASUREMENT_COLUMNS

COLUMNS = ("time_utc",) + MEASUREMENT_COLUMNS


def iso_utc(times_s: np.ndarray) -> list[str]:
    """`YYYY-MM-DDThh:mm:ss.sssZ` for epoch seconds (rounded to the millisecond)."""
    stamps_ms = np.rint(np.asarray(times_s, dtype=float) * 1e3).astype(np.int64).astype("datetime64[ms]")
    return [t + "Z" for t in np.datetime_as_string(stamps_ms, unit="ms").tolist()]


def _cells(column: np.ndarray) -> list:
    """A column as Python values, NaN (and infinities) as empty cells."""
    if column.dtype.kind != "f":
        return column.tolist()
    cells = column.astype(object)
    cells[~np.isfinite(column)] = ""
    return cells.tolist()


def write_results_csv(out: TextIO, series: dict[str, np.ndarray]) -> int:
    """Write the readings (arrays keyed by MEASUREMENT_COLUMNS); returns the number of rows."""
    writer = csv.writer(out)
    writer.writerow(COLUMNS)
    n = len(series["at_s"])
    writer.writerows(zip(iso_utc(series["at_s"]), *(_cells(series[name]) for name in MEASUREMENT_COLUMNS)))
    return n
