"""CSV of field readings: one row per reading, a header row, times in UTC (ISO 8601) and epoch seconds.

Columns carry their units in their names; an empty cell is a value that was not computed
(NaN).  Written with the standard csv module (RFC 4180 quoting, `\\r\\n` line ends).
"""

from __future__ import annotations

import csv
import math
import time
from typing import TextIO

import numpy as np

from controller.store_migrations import MEASUREMENT_COLUMNS

COLUMNS = ("time_utc",) + MEASUREMENT_COLUMNS


def iso_utc(t_s: float) -> str:
    """`YYYY-MM-DDThh:mm:ss.sssZ` for epoch seconds."""
    whole = math.floor(t_s)
    millis = int(round((t_s - whole) * 1000))
    if millis == 1000:
        whole, millis = whole + 1, 0
    return time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(whole)) + f".{millis:03d}Z"


def _cell(value: object) -> str:
    if isinstance(value, (float, np.floating)):
        return "" if not math.isfinite(value) else repr(float(value))
    return str(value)


def write_results_csv(out: TextIO, series: dict[str, np.ndarray]) -> int:
    """Write the readings (arrays keyed by MEASUREMENT_COLUMNS); returns the number of rows."""
    writer = csv.writer(out)
    writer.writerow(COLUMNS)
    n = len(series["at_s"])
    columns = [series[name].tolist() for name in MEASUREMENT_COLUMNS]
    for i, at_s in enumerate(series["at_s"].tolist()):
        writer.writerow([iso_utc(at_s)] + [_cell(col[i]) for col in columns])
    return n
