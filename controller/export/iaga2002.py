"""IAGA-2002 export of the total-field time series.

Layout (INTERMAGNET / IAGA "IAGA-2002 data exchange format" description): every header,
comment and column-header record is 70 characters with `|` in column 70; header records
hold a label in columns 2-24 and its value in columns 25-69; comment records start ` # `;
the column header names the four elements (station code + element letter); each data record
is `YYYY-MM-DD hh:mm:ss.sss DDD` then three spaces and four `%10.2f` values (70 characters).
99999.00 marks a missing value, 88888.00 an element the instrument does not record.

A proton-precession sensor measures the total field F only: X, Y, Z are 88888.00 and F is
the mean of the readings whose acquisition centre lies in [t, t + interval), 99999.00 where
there are none (or none good enough).  The gamma used for B = f / (gamma'p / 2 pi) goes in a
comment record.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, TextIO

import numpy as np

from controller.physics.constants import GAMMA_CHOICES_HZ_PER_T

RECORD_WIDTH = 70
MISSING = 99999.00
NOT_RECORDED = 88888.00
ELEMENTS = "XYZF"
DATA_TYPES = ("variation", "reported", "provisional", "adjusted", "quasi-definitive", "definitive")
_GAMMA_NAMES = {"shielded": "shielded proton in H2O, CODATA 2022", "free": "free proton, CODATA 2022",
                "iaga2006": "gamma'p of CODATA 2006, as adopted by IAGA"}


@dataclass(frozen=True)
class StationHeader:
    """The values of the twelve header records that come from the site and the run."""

    source: str
    station_name: str
    iaga_code: str
    latitude_deg: float
    longitude_deg: float
    elevation_m: float
    digital_sampling: str
    interval_type: str
    data_type: str = "provisional"

    @classmethod
    def from_site(cls, site: dict[str, Any], source: str, digital_sampling: str, interval_type: str,
                  data_type: str) -> "StationHeader":
        return cls(source=source, station_name=str(site["name"]), iaga_code=str(site["iaga_code"]).upper(),
                   latitude_deg=float(site["latitude_deg"]), longitude_deg=float(site["longitude_deg"]),
                   elevation_m=float(site["altitude_m"]), digital_sampling=digital_sampling,
                   interval_type=interval_type, data_type=data_type)


def header_record(label: str, value: str) -> str:
    """` Label` padded to column 24, value in columns 25-69, `|` in column 70."""
    if len(label) > 23 or len(value) > 45:
        raise ValueError(f"IAGA-2002 header {label!r}: value {value!r} longer than 45 characters")
    return f" {label:<23}{value:<45}|"


def comment_records(text: str) -> list[str]:
    """` # ` and the text, wrapped at 66 characters, `|` in column 70."""
    words, lines, line = text.split(), [], ""
    for word in words:
        if line and len(line) + 1 + len(word) > 66:
            lines.append(line)
            line = word[:66]
        else:
            line = f"{line} {word}" if line else word[:66]
    lines.append(line)
    return [f" # {part:<66}|" for part in lines]


def column_header(iaga_code: str) -> str:
    names = "".join(f"{iaga_code + e:>6}    " for e in ELEMENTS)
    return f"{'DATE':<11}{'TIME':<13}DOY   {names[:-4]}   |"


def data_records(times_s: np.ndarray, values: np.ndarray) -> list[str]:
    """Data records for epoch times (UTC) and values shaped (n, 4); non-finite values become 99999.00."""
    stamps_ms = np.rint(np.asarray(times_s, dtype=float) * 1e3).astype(np.int64).astype("datetime64[ms]")
    text = np.datetime_as_string(stamps_ms, unit="ms")  # YYYY-MM-DDThh:mm:ss.sss
    days = stamps_ms.astype("datetime64[D]")
    day_of_year = (days - days.astype("datetime64[Y]").astype("datetime64[D]")).astype(np.int64) + 1
    v = np.where(np.isfinite(values), values, MISSING)
    return [f"{t[:10]} {t[11:]} {d:03d}   {a:10.2f}{b:10.2f}{c:10.2f}{f:10.2f}"
            for t, d, (a, b, c, f) in zip(text.tolist(), day_of_year.tolist(), v.tolist())]


def grid_means(at_s: np.ndarray, field_nt: np.ndarray, interval_s: float, from_s: float,
               to_s: float) -> tuple[np.ndarray, np.ndarray]:
    """Regular times t_k = t_0 + k * interval (t_0 = from_s floored to the interval) up to to_s,
    and the mean of the finite readings with t_k <= t < t_k + interval (NaN where there are none)."""
    t0 = math.floor(from_s / interval_s) * interval_s
    n = int(math.floor((to_s - t0) / interval_s)) + 1
    grid = t0 + interval_s * np.arange(max(n, 0))
    slot = np.floor((np.asarray(at_s) - t0) / interval_s).astype(np.int64)
    good = np.isfinite(field_nt) & (slot >= 0) & (slot < grid.size)
    sums = np.bincount(slot[good], weights=np.asarray(field_nt)[good], minlength=grid.size)
    counts = np.bincount(slot[good], minlength=grid.size)
    with np.errstate(invalid="ignore", divide="ignore"):
        means = np.where(counts > 0, sums / np.maximum(counts, 1), np.nan)
    return grid, means


def interval_type(interval_s: float) -> str:
    if interval_s == 60:
        return "average 1-minute (00:00-00:59)"
    if interval_s == 1:
        return "average 1-second"
    return f"average {interval_s:g}-second"


def gamma_comment(gammas_hz_per_nt: list[float]) -> str:
    parts = []
    for g in gammas_hz_per_nt:
        name = next((_GAMMA_NAMES[k] for k, v in GAMMA_CHOICES_HZ_PER_T.items() if abs(v * 1e-9 - g) < 1e-15),
                    "value set in the configuration")
        parts.append(f"gamma'p/2pi = {g:.11f} Hz/nT, gamma'p = {2 * math.pi * g * 1e9:.9e} /T/s ({name})")
    return "F = f / (gamma'p/2pi) from the proton Larmor frequency f; " + "; ".join(parts) + "."


def write_iaga2002(out: TextIO, header: StationHeader, grid_s: np.ndarray, field_nt: np.ndarray,
                   comments: list[str]) -> int:
    """Write the file; returns the number of data records."""
    records = [header_record("Format", "IAGA-2002"), header_record("Source of Data", header.source[:45]),
               header_record("Station Name", header.station_name[:45]), header_record("IAGA CODE", header.iaga_code),
               header_record("Geodetic Latitude", f"{header.latitude_deg:.3f}"),
               header_record("Geodetic Longitude", f"{header.longitude_deg % 360.0:.3f}"),
               header_record("Elevation", f"{header.elevation_m:.0f}"), header_record("Reported", ELEMENTS),
               header_record("Sensor Orientation", "F"),
               header_record("Digital Sampling", header.digital_sampling),
               header_record("Data Interval Type", header.interval_type),
               header_record("Data Type", header.data_type)]
    for text in comments:
        records += comment_records(text)
    records.append(column_header(header.iaga_code))
    values = np.column_stack([np.full((len(grid_s), 3), NOT_RECORDED), np.asarray(field_nt, dtype=float)])
    records += data_records(grid_s, values)
    for record in records:
        if len(record) != RECORD_WIDTH:
            raise AssertionError(f"IAGA-2002 record is {len(record)} characters, not 70: {record!r}")
        out.write(record + "\n")
    return len(grid_s)
