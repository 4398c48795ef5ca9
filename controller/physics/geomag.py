"""The main geomagnetic field at a site from IGRF-14, evaluated by the `ppigrf` package.

`ppigrf.igrf(lon, lat, h_km, date)` (longitude first; geodetic latitude and height above the
WGS84 ellipsoid) returns the east, north and up components in nT [ppigrf 2.1; IGRF-14, IAGA
2024, valid 1900-2030].  Here they become the geomagnetic elements X (north), Y (east),
Z (down), with H = sqrt(X^2 + Y^2), F = sqrt(H^2 + Z^2), inclination I = atan2(Z, H) and
declination D = atan2(Y, X).  The model holds the core field only: local crustal anomalies
and the daily variation (20-50 nT at mid-latitudes) come on top.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass

from controller.errors import InputError

IGRF_FIRST_DATE = dt.date(1900, 1, 1)
IGRF_LAST_DATE = dt.date(2030, 1, 1)
MIN_ALTITUDE_M = -1000.0
MAX_ALTITUDE_M = 1_000_000.0


@dataclass(frozen=True)
class GeomagneticField:
    """Field components in nT: north X, east Y, down Z."""

    north_nt: float
    east_nt: float
    down_nt: float

    @property
    def horizontal_nt(self) -> float:
        return math.hypot(self.north_nt, self.east_nt)

    @property
    def total_nt(self) -> float:
        return math.hypot(self.horizontal_nt, self.down_nt)

    @property
    def inclination_deg(self) -> float:
        return math.degrees(math.atan2(self.down_nt, self.horizontal_nt))

    @property
    def declination_deg(self) -> float:
        return math.degrees(math.atan2(self.east_nt, self.north_nt))


def check_site_coordinates(latitude_deg: float, longitude_deg: float, altitude_m: float) -> None:
    """Raise InputError naming the first coordinate outside the model's domain."""
    if not -90.0 <= latitude_deg <= 90.0:
        raise InputError(f"latitude {latitude_deg:g} is out of range; allowed: -90 to 90 degrees (north positive)")
    if not -180.0 <= longitude_deg <= 360.0:
        raise InputError(f"longitude {longitude_deg:g} is out of range; allowed: -180 to 360 degrees (east positive)")
    if not MIN_ALTITUDE_M <= altitude_m <= MAX_ALTITUDE_M:
        raise InputError(f"altitude {altitude_m:g} m is out of range; allowed: {MIN_ALTITUDE_M:g} to "
                         f"{MAX_ALTITUDE_M:g} m above the ellipsoid")


def check_model_date(on: dt.date) -> None:
    if not IGRF_FIRST_DATE <= on <= IGRF_LAST_DATE:
        raise InputError(f"date {on.isoformat()} is outside IGRF-14's validity; allowed: "
                         f"{IGRF_FIRST_DATE.isoformat()} to {IGRF_LAST_DATE.isoformat()}")


def parse_date(text: str) -> dt.date:
    """A YYYY-MM-DD date, or InputError."""
    try:
        return dt.date.fromisoformat(text)
    except ValueError:
        raise InputError(f"date {text!r} is not a date; allowed: YYYY-MM-DD") from None


def igrf_field(latitude_deg: float, longitude_deg: float, altitude_m: float, on: dt.date) -> GeomagneticField:
    """IGRF-14 main field at a geodetic position and date (ppigrf)."""
    check_site_coordinates(latitude_deg, longitude_deg, altitude_m)
    check_model_date(on)
    import ppigrf  # imported here: it brings pandas, which slows every other command's start

    east, north, up = ppigrf.igrf(longitude_deg, latitude_deg, altitude_m / 1000.0,
                                  dt.datetime(on.year, on.month, on.day))
    return GeomagneticField(north_nt=float(north.item()), east_nt=float(east.item()), down_nt=-float(up.item()))
