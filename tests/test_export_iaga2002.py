"""IAGA-2002 export checked field by field against the format description.

source: INTERMAGNET / IAGA, "IAGA-2002 data exchange format" description: 70-character
records; header records ` Label` (columns 2-24), value (columns 25-69), `|` in column 70, in
the order Format, Source of Data, Station Name, IAGA CODE, Geodetic Latitude, Geodetic
Longitude, Elevation, Reported, Sensor Orientation, Digital Sampling, Data Interval Type,
Data Type; comment records ` # `; a column header `DATE       TIME         DOY` then the
element codes; data records `YYYY-MM-DD hh:mm:ss.sss DDD` then four values in 10-character
fields with two decimals; 99999.00 = missing; 88888.00 = element not recorded (from memory).
"""

from __future__ import annotations

import datetime as dt
import math
import sqlite3

import numpy as np
import pytest
from scipy import constants

from controller.cli.main import main
from controller.store import Store
from controller.store_queries import Selection, measurements

from tests.conftest import CONFIGS, EPOCH_NOON_UTC
from tests.store_data import copy_store

LABELS = ("Format", "Source of Data", "Station Name", "IAGA CODE", "Geodetic Latitude", "Geodetic Longitude",
          "Elevation", "Reported", "Sensor Orientation", "Digital Sampling", "Data Interval Type", "Data Type")
# column widths of a data record: date, space, time, space, day of year, 3 spaces, four values
DATA_WIDTHS = (10, 1, 12, 1, 3, 3, 10, 10, 10, 10)


@pytest.fixture(scope="module")
def per_shot_store(two_run_template, tmp_path_factory):
    """The two-run store with a reading per shot (`precess db measure`); tests must not change it."""
    path, run_a, run_b = two_run_template
    path = copy_store(path, tmp_path_factory.mktemp("iaga") / "s.sqlite")
    assert main(["db", "measure", "--db", str(path)]) == 0
    return path, run_a, run_b


def _export(path, out, *extra):
    assert main(["export", "--db", str(path), "--format", "iaga2002", "--out", str(out), *extra]) == 0
    return out.read_text(encoding="ascii").split("\n")[:-1]


def test_records_header_and_missing_code_follow_the_format(per_shot_store, tmp_path):
    path, run_a, run_b = per_shot_store
    from_s, to_s = EPOCH_NOON_UTC, EPOCH_NOON_UTC + 900.0
    lines = _export(path, tmp_path / "kfx.min", "--from", "2026-06-21T12:00:00Z", "--to", "2026-06-21T12:15")
    assert all(len(line) == 70 for line in lines)
    header = lines[:12]
    assert [h[1:24].rstrip() for h in header] == list(LABELS)
    assert all(h[0] == " " and h[69] == "|" for h in header)
    values = {h[1:24].rstrip(): h[24:69].rstrip() for h in header}
    assert values["Format"] == "IAGA-2002" and values["IAGA CODE"] == "KFX" and values["Reported"] == "XYZF"
    # site: configs/sites/kestrel-flats.toml (invented), carried in the run's configuration snapshot
    assert float(values["Geodetic Latitude"]) == 47.25 and float(values["Geodetic Longitude"]) == 11.5
    assert float(values["Elevation"]) == 620.0
    assert values["Data Interval Type"].startswith("average 1-minute")
    comments = [line for line in lines[12:] if line.startswith(" # ")]
    assert comments and all(c.endswith("|") for c in comments)
    column_header = lines[12 + len(comments)]
    assert column_header.split() == ["DATE", "TIME", "DOY", "KFXX", "KFXY", "KFXZ", "KFXF", "|"]
    assert column_header[69] == "|" and column_header.index("KFXF") + 4 == 66

    data = lines[13 + len(comments):]
    assert len(data) == 16  # 12:00 ... 12:15 inclusive, one per minute
    rows = np.genfromtxt(data, delimiter=DATA_WIDTHS, dtype=None, encoding="ascii")
    for k, row in enumerate(rows):
        stamp = dt.datetime(2026, 6, 21, 12, 0, tzinfo=dt.timezone.utc) + dt.timedelta(minutes=k)
        assert row[0] == stamp.strftime("%Y-%m-%d") and row[2] == stamp.strftime("%H:%M:%S.000")
        assert int(row[4]) == stamp.timetuple().tm_yday == 172
        assert (row[6], row[7], row[8]) == (88888.0, 88888.0, 88888.0)
    field = np.array([row[9] for row in rows])
    with Store(path) as store:
        series = measurements(store, Selection(from_s=from_s, to_s=to_s))
    minute = np.floor((series["at_s"] - from_s) / 60).astype(int)
    for k in range(16):
        inside = series["field_nt"][minute == k]
        if inside.size:
            assert field[k] == pytest.approx(round(float(np.mean(inside)), 2), abs=0.005)
        else:
            assert field[k] == 99999.00
    assert np.count_nonzero(field == 99999.00) >= 8  # the 10-minute pause between the runs
    assert all(line[30:40] == "  88888.00" for line in data)


def test_gamma_used_is_in_a_comment(per_shot_store, tmp_path):
    path, _, _ = per_shot_store
    lines = _export(path, tmp_path / "g.min")
    text = " ".join(line[3:69].strip() for line in lines if line.startswith(" # "))
    # source: CODATA 2022 shielded proton gyromagnetic ratio via scipy.constants
    gamma = constants.physical_constants["shielded proton gyromag. ratio in MHz/T"][0] * 1e-3
    assert f"gamma'p/2pi = {gamma:.11f} Hz/nT" in text
    assert f"{2 * math.pi * gamma * 1e9:.9e} /T/s" in text


def test_field_values_are_physical(per_shot_store, tmp_path):
    path, _, _ = per_shot_store
    lines = _export(path, tmp_path / "f.sec", "--interval-s", "1")
    data = [line for line in lines if line[:2] == "20"]
    field = np.array([float(line[60:70]) for line in data])
    present = field[field != 99999.00]
    # invented site field 48250 nT with a 25 nT diurnal swing (configs/sites/kestrel-flats.toml)
    assert present.size == 7 and np.all(np.abs(present - 48250.0) < 60.0)
    assert all(line[23:30] == " 172   " for line in data)


def test_quality_limit_marks_readings_missing(per_shot_store, tmp_path):
    path, _, _ = per_shot_store
    lines = _export(path, tmp_path / "q.min", "--max-sd-nt", "0.000001")
    data = [line for line in lines if line[:2] == "20"]
    assert data and all(line.endswith("  99999.00") for line in data)


def test_run_without_site_needs_one_given(per_shot_store, tmp_path, capsys):
    path = copy_store(per_shot_store[0], tmp_path / "no-site.sqlite")
    with sqlite3.connect(path) as db:
        db.execute("UPDATE runs SET config_json = json_remove(config_json, '$.site')")
    out = tmp_path / "n.min"
    code = main(["export", "--db", str(path), "--format", "iaga2002", "--out", str(out)])
    assert code == 2 and "has no site" in capsys.readouterr().err and not out.exists()
    site = str(CONFIGS / "sites" / "kestrel-flats.toml")
    assert main(["export", "--db", str(path), "--format", "iaga2002", "--out", str(out), "--site", site]) == 0
    assert " IAGA CODE              KFX" in out.read_text()


def test_record_builders_keep_seventy_characters():
    from controller.export.iaga2002 import comment_records, data_records, header_record

    long_text = "word " * 40 + "x" * 100
    assert all(len(r) == 70 and r.startswith(" # ") and r.endswith("|") for r in comment_records(long_text))
    with pytest.raises(ValueError, match="longer than 45"):
        header_record("Station Name", "x" * 46)
    # 2024 is a leap year: 31 December is day 366 (Gregorian calendar)
    t = dt.datetime(2024, 12, 31, 23, 59, 59, 500000, tzinfo=dt.timezone.utc).timestamp()
    (record,) = data_records(np.array([t]), np.array([[88888.0, 88888.0, 88888.0, np.nan]]))
    assert record == "2024-12-31 23:59:59.500 366     88888.00  88888.00  88888.00  99999.00"
