"""`precess run` works for every worked example on the simulated rig and prints its fitted quantity."""

from __future__ import annotations

import json
import math
import shutil
from pathlib import Path

import pytest

from controller.calibration import load_calibration
from controller.cli.main import main
from sequence_rigs import ROOT

EXAMPLES = sorted(p.stem for p in (ROOT / "configs" / "sequences").glob("*.toml"))
NOT_NUTATION = [name for name in EXAMPLES if name != "nutation"]  # nutation has its own test below
HEADLINES = {"fid": "field", "echo": ("echo amplitude", "T2"), "cpmg": "T2", "t1-polarise": "T1", "t1-earth": "T1",
             "nutation": "90 deg pulse length", "noise": "noise density"}


@pytest.fixture(scope="module")
def configs(tmp_path_factory) -> Path:
    """A copy of configs/ (a nutation run writes its calibration next to the sequences)."""
    target = tmp_path_factory.mktemp("cli") / "configs"
    shutil.copytree(ROOT / "configs", target)
    return target


@pytest.mark.parametrize("name", NOT_NUTATION)
def test_run_prints_the_fitted_quantity_with_its_uncertainty(name, configs, capsys):
    db = configs.parent / "runs.sqlite"
    code = main(["run", str(configs / "sequences" / f"{name}.toml"), "--rig", str(configs / "rigs" / "demo-sim.toml"),
                 "--db", str(db), "--shots", "2", "--json"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    result = json.loads(captured.out)
    assert result["exit_status"] == "completed"
    headline = result["headline"]
    expected = HEADLINES[result["kind"]]
    assert headline["quantity"] in (expected if isinstance(expected, tuple) else (expected,))
    assert math.isfinite(headline["value"]) and math.isfinite(headline["sd"]) and headline["sd"] > 0
    assert "+/-" in headline["text"]
    assert "shot 1/" in captured.err  # progress goes to stderr with --json


def test_nutation_writes_the_calibration_the_cpmg_example_reads(configs, capsys):
    cal_path = configs / "calibrations" / "heron-2-sim.toml"
    before = load_calibration(cal_path)
    assert main(["run", str(configs / "sequences" / "nutation.toml"), "--rig", str(configs / "rigs" / "demo-sim.toml"),
                 "--db", str(configs.parent / "cal.sqlite"), "--shots", "2"]) == 0
    out = capsys.readouterr().out
    assert "result: 90 deg pulse = " in out and " +/- " in out and "wrote pulse calibration" in out
    after = load_calibration(cal_path)
    assert after.run_id != before.run_id
    assert after.pulse_90_s == pytest.approx(before.pulse_90_s, rel=0.02)
    assert main(["check", str(configs / "sequences" / "cpmg-t2.toml"), "--rig", str(configs / "rigs" / "demo-sim.toml")]) == 0
    out = capsys.readouterr().out
    n180 = round(after.duration_for_s(180.0, 0.5) * 48000)
    assert f"({n180} samples from segment sample" in out  # the refocusing pulses take the new calibration


def test_a_missing_calibration_is_one_clear_line(configs, tmp_path, capsys):
    sequence = tmp_path / "cpmg.toml"
    sequence.write_text((configs / "sequences" / "cpmg-t2.toml").read_text())
    code = main(["run", str(sequence), "--rig", str(configs / "rigs" / "demo-sim.toml"), "--db", str(tmp_path / "x.sqlite")])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1
    assert "calibration" in err and "not found" in err and "nutation" in err


def test_a_run_the_rig_cannot_do_is_refused_with_numbers(configs, tmp_path, capsys):
    rig = tmp_path / "strict-rig.toml"
    text = (configs / "rigs" / "demo-sim.toml").read_text().replace("max_acquire_s = 4.0",
                                                                     "max_acquire_s = 4.0\nmin_dead_time_s = 0.05")
    rig.write_text(text.replace('"../sites/', f'"{configs}/sites/').replace('"../samples/', f'"{configs}/samples/'))
    code = main(["run", str(configs / "sequences" / "echo-hahn.toml"), "--rig", str(rig), "--db", str(tmp_path / "r.sqlite")])
    err = capsys.readouterr().err
    assert code == 5
    assert "refused: receiver dead time: 0.015 s is below the minimum 0.05 s" in err
