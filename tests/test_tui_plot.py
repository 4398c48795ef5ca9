"""Text plots: braille encoding, axis ticks, rasterising without losing samples."""

from __future__ import annotations

import unicodedata

import numpy as np
import pytest

from controller.tui.plot import (
    BRAILLE_BASE, Marker, PlotSpec, Series, braille_cells, format_tick, nice_step, rasterise, render_plot, si_prefix,
    ticks,
)

# source: The Unicode Standard, Braille Patterns block U+2800-U+28FF: dots 1-2-3-7 run down the
# left column, 4-5-6-8 down the right; the character names (Python's unicodedata) list the dots.
STANDARD_DOT_NUMBER = {(0, 0): 1, (1, 0): 2, (2, 0): 3, (3, 0): 7, (0, 1): 4, (1, 1): 5, (2, 1): 6, (3, 1): 8}


@pytest.mark.parametrize("row_col, dot", sorted(STANDARD_DOT_NUMBER.items()))
def test_each_braille_dot_is_the_unicode_dot(row_col, dot):
    dots = np.zeros((4, 2), dtype=bool)
    dots[row_col] = True
    (code,), = braille_cells(dots)
    assert unicodedata.name(chr(BRAILLE_BASE + int(code))) == f"BRAILLE PATTERN DOTS-{dot}"


def test_full_cell_and_a_pattern_match_unicode_names():
    assert chr(BRAILLE_BASE + int(braille_cells(np.ones((4, 2), dtype=bool))[0, 0])) == "\u28ff"
    dots = np.array([[1, 0], [0, 1], [1, 0], [0, 1]], dtype=bool)  # dots 1, 5, 3, 8
    assert unicodedata.name(chr(BRAILLE_BASE + int(braille_cells(dots)[0, 0]))) == "BRAILLE PATTERN DOTS-1358"


def test_nice_steps_are_one_two_five_decades():
    # common practice, no source: axis steps from {1, 2, 5} x 10^k
    assert nice_step(1.0, 5) == pytest.approx(0.2)
    assert nice_step(90.0, 3) == pytest.approx(50.0)
    assert nice_step(240.0, 4) == pytest.approx(100.0)
    assert ticks(0.015, 1.015, 4) == pytest.approx([0.5, 1.0])
    assert ticks(-45.0, 45.0, 5) == pytest.approx([-40, -20, 0, 20, 40])
    assert format_tick(0.5, 0.5) == "0.5" and format_tick(-0.0, 1.0) == "0" and format_tick(2000.0, 100.0) == "2000"


def test_si_prefix():
    assert si_prefix(0.045) == (1e-3, "m")
    assert si_prefix(3e-6) == (1e-6, "µ")
    assert si_prefix(2.0) == (1.0, "")


def test_a_single_sample_spike_survives_decimation():
    y = np.zeros(48000)
    y[31234] = 1.0
    x = np.arange(y.size) / 48000.0
    dots = rasterise(Series(x, y), (0.0, 1.0), (-1.0, 1.0), n_dot_cols=40, n_dot_rows=16)
    column = int(round(31234 / 48000 * 39))
    assert dots[0, column]  # reaches the top row
    assert dots[:, column].sum() >= 8  # joined to the baseline at the middle row


def test_connected_line_has_no_gaps():
    x = np.linspace(0, 1, 9)
    dots = rasterise(Series(x, np.where(np.arange(9) % 2 == 0, 1.0, -1.0)), (0, 1), (-1, 1), 9, 20)
    assert dots.any(axis=0).all()
    assert dots[:, 1].all()  # a swing from top to bottom fills the column between


@pytest.mark.parametrize("width, height", [(46, 9), (80, 20), (30, 5), (120, 17)])
def test_render_fills_exactly_the_given_size(width, height):
    t = np.linspace(0.015, 1.015, 5000)
    spec = PlotSpec(series=(Series(t, 0.01 * np.exp(-t) * np.cos(2 * np.pi * 40 * t)),), x_unit="s", y_unit="V",
                    markers=(Marker(0.5),))
    lines = render_plot(spec, width, height)
    assert len(lines) == height
    assert all(line.cell_len == width for line in lines)
    assert "mV" in lines[-2].plain and lines[-1].plain.rstrip().endswith("s")


def test_marker_shows_in_empty_cells_only():
    x = np.linspace(0, 10, 11)
    spec = PlotSpec(series=(Series(x, np.zeros_like(x)),), x_range=(0, 10), y_range=(-1, 1), markers=(Marker(5.0),))
    plain = [line.plain for line in render_plot(spec, 40, 8)]
    assert sum("┊" in row for row in plain) == 5  # every plot row but the one with the data
