"""`precess plan ...` from the command line: tables, JSON, and one clear line for bad input."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from controller.cli.main import main

ROOT = Path(__file__).resolve().parents[1]
SITE = str(ROOT / "configs/sites/kestrel-flats.toml")
RIG = str(ROOT / "configs/rigs/demo-sim.toml")
PLAN = str(ROOT / "configs/plans/heron-2-kestrel-flats.toml")


def run_json(capsys, *argv: str) -> dict:
    assert main([*argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def test_plan_site_from_the_site_file(capsys):
    out = run_json(capsys, "plan", "site", "--site", SITE, "--date", "2025-06-01")
    assert out["position"]["latitude_deg"] == 47.25
    field = out["field"]["total_nt"]
    assert 20000 < field < 70000
    # source: CODATA 2022 shielded gamma'p/2pi = 42.57638543 MHz/T
    assert out["larmor"]["shielded_hz"] == pytest.approx(field * 0.04257638543, rel=1e-9)
    assert out["larmor"]["free_hz"] > out["larmor"]["shielded_hz"]
    assert out["site_file"]["field_minus_igrf_nt"] == pytest.approx(48250.0 - field)
    h = out["mains"]["harmonic_50hz"]
    assert out["mains"]["offset_50hz_hz"] == pytest.approx(out["larmor"]["shielded_hz"] - 50.0 * h)
    assert out["band"]["low_hz"] < out["larmor"]["shielded_hz"] < out["band"]["high_hz"]


def test_plan_site_table_names_what_a_user_needs(capsys):
    assert main(["plan", "site", "--lat", "-33.5", "--lon", "151.0", "--alt-m", "40", "--date", "2026-03-01"]) == 0
    text = capsys.readouterr().out
    for words in ("F total", "inclination", "declination", "shielded protons", "free protons",
                  "nearest harmonic", "Acquisition band"):
        assert words in text


def test_plan_coil_for_the_demo_rig(capsys):
    out = run_json(capsys, "plan", "coil", "--rig", RIG, "--current-a", "2")
    assert out["resistance"]["resistance_20c_ohm"] == pytest.approx(4.36, abs=0.01)
    assert out["switch_off"]["regime"] == "sudden"
    assert out["tuning"]["larmor_hz"] == pytest.approx(48250 * 0.04257638543, rel=1e-9)
    assert 0 < out["field"]["sample_end_fraction"] < out["field"]["sample_mean_fraction"] < 1


def test_plan_coil_from_arguments_with_metric_wire(capsys):
    out = run_json(capsys, "plan", "coil", "--turns", "300", "--radius-mm", "30", "--length-mm", "80",
                   "--wire-mm", "1.0", "--insulation-mm", "0.05", "--current-a", "3", "--field-nt", "48000")
    assert out["winding"]["wire"] == "1 mm"
    assert out["winding"]["pitch_m"] == pytest.approx(1.05e-3)
    assert out["winding"]["turns_per_layer"] == 76
    assert out["heating"]["power_ambient_w"] > 0


def test_plan_wires_lists_awg_and_metric(capsys):
    out = run_json(capsys, "plan", "wires")
    awg20 = next(w for w in out["awg"] if w["wire"] == "AWG 20")
    assert awg20["ohm_per_km_20c"] == pytest.approx(33.31, abs=0.005)  # source: REFERENCE.md table (IEC 60028)
    assert any(w["wire"] == "0.5 mm" for w in out["metric"])


def test_plan_signal_table(capsys):
    assert main(["plan", "signal", PLAN]) == 0
    text = capsys.readouterr().out
    for words in ("Curie-law M0", "EMF at time zero", "SNR per shot", "shots to stack", "headroom", "optimum"):
        assert words in text


@pytest.mark.parametrize("argv, words", [
    (["plan", "site", "--lat", "95", "--lon", "0"], "latitude 95 is out of range"),
    (["plan", "site", "--lat", "45", "--lon", "0", "--date", "2031-01-01"], "outside IGRF-14's validity"),
    (["plan", "site", "--lat", "45", "--lon", "0", "--date", "1850-01-01"], "outside IGRF-14's validity"),
    (["plan", "site", "--lon", "0"], "needs a position"),
    (["plan", "coil", "--turns", "-5", "--radius-mm", "40", "--length-mm", "100", "--awg", "20"], "turns -5"),
    (["plan", "coil", "--turns", "500", "--radius-mm", "40", "--length-mm", "100"], "exactly one of --awg"),
    (["plan", "coil", "--rig", RIG, "--turns", "10"], "not both"),
    (["plan", "coil", "--rig", RIG, "--current-a", "-1"], "--current-a -1 is not allowed"),
    (["plan", "signal", "no-such-plan.toml"], "file not found"),
])
def test_bad_input_gives_one_line_and_a_non_zero_exit(capsys, argv, words):
    assert main(argv) != 0
    err = capsys.readouterr().err
    assert err.startswith("precess: error:") and words in err
    assert err.count("\n") == 1 and "Traceback" not in err


def test_plan_file_with_an_unknown_key_names_it(tmp_path, capsys):
    bad = tmp_path / "plan.toml"
    bad.write_text(f'name = "x"\nrig = "{RIG}"\nsequence = "s.toml"\ntarget_nt = 0.1\n')
    assert main(["plan", "signal", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "target_nt: unknown key; did you mean 'target_field_sd_nt'?" in err


def test_console_script_refuses_a_bad_latitude_without_a_traceback():
    proc = subprocess.run([sys.executable, "-m", "controller.cli.main", "plan", "site", "--lat", "95", "--lon", "0"],
                          capture_output=True, text=True, cwd=ROOT, timeout=60)
    assert proc.returncode == 2
    assert proc.stdout == ""
    assert proc.stderr.strip().splitlines() == [
        "precess: error: latitude 95 is out of range; allowed: -90 to 90 degrees (north positive)"]
