"""Site plan: the IGRF field, the proton Larmor frequency and where it sits among mains harmonics."""

from __future__ import annotations

import datetime as dt

from controller.config.schema import SiteConfig
from controller.physics.constants import gamma_hz_per_nt
from controller.physics.geomag import GeomagneticField, igrf_field
from controller.physics.mains import GRID_FREQUENCIES_HZ, nearest_harmonic
from controller.planning.report import Row, Section

#: Half-width of the acquisition band in field terms.  IGRF holds the core field only;
#: crustal anomalies of a few hundred nT are common away from ore bodies [practice, no source].
DEFAULT_BAND_MARGIN_NT = 1000.0
#: Grid wander used to show how far a harmonic can move (large grids hold +/-0.1 Hz
#: almost always; EN 50160 allows +/-1 %) [practice; EN 50160].
GRID_WANDER_HZ = 0.1


def site_plan(latitude_deg: float, longitude_deg: float, altitude_m: float, on: dt.date,
              band_margin_nt: float = DEFAULT_BAND_MARGIN_NT, site: SiteConfig | None = None,
              site_file: str | None = None) -> list[Section]:
    """Sections of the site plan (see controller.planning.report)."""
    field = igrf_field(latitude_deg, longitude_deg, altitude_m, on)
    g_shielded = gamma_hz_per_nt("shielded")
    g_free = gamma_hz_per_nt("free")
    f_shielded = field.total_nt * g_shielded
    sections = [
        Section("position", "Position" + (f" ({site.name}, {site_file})" if site else ""), (
            Row("latitude_deg", "latitude (geodetic)", latitude_deg, "deg", digits=".5f"),
            Row("longitude_deg", "longitude", longitude_deg, "deg", digits=".5f"),
            Row("altitude_m", "altitude above ellipsoid", altitude_m, "m", digits=".0f"),
            Row("date", "date", on.isoformat()),
        )),
        _field_section(field),
    ]
    if site is not None:
        sections.append(_site_file_section(site, field, g_shielded))
    sections.append(Section("larmor", "Proton Larmor frequency at the IGRF total field", (
        Row("shielded_hz", "shielded protons (H2O, CODATA 2022)", f_shielded, "Hz", digits=".3f"),
        Row("free_hz", "free protons (CODATA 2022)", field.total_nt * g_free, "Hz", digits=".3f"),
        Row("free_minus_shielded_hz", "free minus shielded", field.total_nt * (g_free - g_shielded), "Hz",
            digits=".4f"),
        Row("shielded_hz_per_nt", "shielded gamma/2pi", g_shielded, "Hz/nT", digits=".9f"),
    ), notes=("field from frequency uses the shielded value (water sample); the free-proton value is for "
              "comparison; geomagnetic observatories have used CODATA 2006 gamma'p since 2010",)))
    sections.append(_mains_section(f_shielded, site))
    sections.append(_band_section(field.total_nt, band_margin_nt, g_shielded))
    return sections


def _field_section(field: GeomagneticField) -> Section:
    return Section("field", "Main field (IGRF-14 via ppigrf)", (
        Row("north_nt", "X north", field.north_nt, "nT", digits=".1f"),
        Row("east_nt", "Y east", field.east_nt, "nT", digits=".1f"),
        Row("down_nt", "Z down", field.down_nt, "nT", digits=".1f"),
        Row("horizontal_nt", "H horizontal", field.horizontal_nt, "nT", digits=".1f"),
        Row("total_nt", "F total", field.total_nt, "nT", digits=".1f"),
        Row("inclination_deg", "inclination (down positive)", field.inclination_deg, "deg", digits=".3f"),
        Row("declination_deg", "declination (east positive)", field.declination_deg, "deg", digits=".3f"),
    ), notes=("core field only: local crustal anomalies and the daily variation (20-50 nT at mid-latitudes) "
              "come on top",))


def _site_file_section(site: SiteConfig, field: GeomagneticField, g_hz_per_nt: float) -> Section:
    return Section("site_file", "Site file values against IGRF", (
        Row("field_nt", "field_nt in the site file", site.field_nt, "nT", digits=".1f"),
        Row("field_minus_igrf_nt", "file minus IGRF", site.field_nt - field.total_nt, "nT", digits="+.1f"),
        Row("inclination_minus_igrf_deg", "inclination file minus IGRF",
            site.inclination_deg - field.inclination_deg, "deg", digits="+.2f"),
        Row("declination_minus_igrf_deg", "declination file minus IGRF",
            site.declination_deg - field.declination_deg, "deg", digits="+.2f"),
        Row("larmor_hz", "Larmor frequency at the file's field", site.field_nt * g_hz_per_nt, "Hz", digits=".3f"),
    ))


def _mains_section(frequency_hz: float, site: SiteConfig | None) -> Section:
    rows = []
    for mains_hz in GRID_FREQUENCIES_HZ:
        h = nearest_harmonic(frequency_hz, mains_hz)
        tag = f"{mains_hz:g} Hz grid" + (" (site)" if site is not None and site.mains_hz == mains_hz else "")
        rows += [
            Row(f"harmonic_{mains_hz:g}hz", f"{tag}: nearest harmonic", h.harmonic,
                note=f"{h.harmonic_hz:g} Hz, next {h.other_side_hz:g} Hz"),
            Row(f"offset_{mains_hz:g}hz_hz", f"{tag}: line minus harmonic", h.offset_hz, "Hz", digits="+.2f"),
            Row(f"wander_{mains_hz:g}hz_hz", f"{tag}: moves per {GRID_WANDER_HZ:g} Hz of grid drift",
                h.shift_hz_per_grid_hz() * GRID_WANDER_HZ, "Hz", digits=".2f"),
        ]
    return Section("mains", "Mains harmonics near the line", tuple(rows), notes=(
        "a harmonic within a few Hz of the line needs model-based hum removal or a reference coil",))


def _band_section(total_nt: float, margin_nt: float, g_hz_per_nt: float) -> Section:
    low, high = (total_nt - margin_nt) * g_hz_per_nt, (total_nt + margin_nt) * g_hz_per_nt
    return Section("band", "Acquisition band", (
        Row("margin_nt", "field margin either side", margin_nt, "nT", digits=".0f"),
        Row("low_hz", "low edge", low, "Hz", digits=".1f"),
        Row("high_hz", "high edge", high, "Hz", digits=".1f"),
        Row("width_hz", "width", high - low, "Hz", digits=".1f"),
    ), notes=(f"use {low:.0f}-{high:.0f} Hz as the receive pass-band and the line-search band",))
