"""`precess report`: the PNG plots and the text summary of a stored night (here: a few minutes)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from matplotlib import image
from scipy import constants

from controller.cli.main import main
from controller.config.loader import load_rig
from controller.records import InterlockTripped
from controller.report.data import detected_gaps, gather
from controller.report.summary import noise_floor_near_larmor
from controller.store import Store
from controller.store_queries import Selection, measurements

from tests.conftest import DEMO_RIG, EPOCH_NOON_UTC, quiet_rig
from tests.store_data import copy_store, simulated_run

PLOTS = ("field.png", "t2star_snr.png", "coil_temperature.png", "noise_spectrum.png", "overview.png")


@pytest.fixture
def night(two_run_template, tmp_path):
    path, run_a, run_b = two_run_template
    path = copy_store(path, tmp_path / "night.sqlite")
    assert main(["db", "measure", "--db", str(path)]) == 0
    with Store(path) as store:
        store.write(InterlockTripped(run_b, EPOCH_NOON_UTC + 605.0, "coil_temperature",
                                     "coil at 71.0 C over the 70 C limit", {"coil_temperature_c": 71.0}))
        store.record_gap(run_b, EPOCH_NOON_UTC + 620.0, EPOCH_NOON_UTC + 680.0, "restarted after a power cut")
    return path, run_a, run_b


def test_report_writes_plots_and_summary(night, tmp_path, capsys):
    path, run_a, run_b = night
    out = tmp_path / "report"
    assert main(["report", "--db", str(path), "--out", str(out)]) == 0
    for name in PLOTS:
        pixels = image.imread(out / name)  # a real PNG that an independent decoder opens
        assert pixels.shape[0] > 300 and pixels.shape[1] > 800
        assert pixels[..., :3].std() > 0.05  # not a blank canvas
    summary = (out / "summary.txt").read_text()
    assert summary == capsys.readouterr().out.split("wrote 5 plot(s)")[0]
    with Store(path) as store:
        field = measurements(store, Selection())["field_nt"]
    assert f"field: 7 reading(s), mean {field.mean():.2f} nT" in summary
    assert "runs: 2 (2 completed)" in summary and "shots: 7 stored, 0 compacted" in summary
    assert "gaps: 2" in summary and "restarted after a power cut" in summary
    assert "trips: 1" in summary and "coil_temperature: coil at 71.0 C" in summary


def test_report_of_one_run_and_of_an_empty_range(night, tmp_path, capsys):
    path, run_a, _ = night
    assert main(["report", "--db", str(path), "--run", run_a, "--out", str(tmp_path / "a")]) == 0
    assert "runs: 1 (1 completed)" in (tmp_path / "a" / "summary.txt").read_text()
    code = main(["report", "--db", str(path), "--from", "2030-01-01", "--out", str(tmp_path / "b")])
    assert code == 2 and "no runs in from 2030-01-01" in capsys.readouterr().err


def test_report_after_compaction_still_plots_the_series(night, tmp_path):
    from controller.store_maintenance import compact_samples

    path, _, _ = night
    with Store(path) as store:
        compact_samples(store, 0.0, EPOCH_NOON_UTC + 86400.0)
        data = gather(store, Selection())
    assert data.noise is None and data.shots_compacted == 7 and len(data.readings["at_s"]) == 7
    assert main(["report", "--db", str(path), "--out", str(tmp_path / "c")]) == 0


def test_detected_gaps_are_pauses_longer_than_three_spacings():
    t = np.array([0.0, 10.0, 20.0, 30.0, 100.0, 110.0])
    assert [(g["start_s"], g["end_s"]) for g in detected_gaps(t)] == [(30.0, 100.0)]


def test_noise_floor_matches_preamp_and_coil_johnson_noise(tmp_path):
    # source: Johnson (1928), Nyquist (1928): e_n = sqrt(4 k T R); REFERENCE.md worked example:
    # 500 turns, r 40 mm, l 100 mm, AWG 20 -> R 4.36 ohm; preamp 2 nV/sqrt(Hz) (invented rig);
    # uncorrelated sources add in quadrature.  Welch (1967) density scaling via scipy.signal.welch.
    loaded = quiet_rig(load_rig(DEMO_RIG))
    with Store(tmp_path / "quiet.sqlite") as store:
        simulated_run(store, 4, EPOCH_NOON_UTC, loaded=loaded)
        floor = noise_floor_near_larmor(gather(store, Selection()))
    johnson = math.sqrt(4 * constants.k * (273.15 + 18.0) * 4.36)
    expected = math.hypot(2.0e-9, johnson) * 1e9
    assert floor == pytest.approx(expected, rel=0.07)
