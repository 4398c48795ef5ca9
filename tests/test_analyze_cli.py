"""`precess analyze` end to end: the simulated rig's runs and WAV recordings; bad input."""

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from controller.export.wav import WavWriter
from controller.cli.common import config_snapshot, load_and_compile, make_clock, open_rig
from controller.cli.main import main
from controller.config.loader import load_rig
from controller.engine import Engine
from controller.records import ShotAcquired

def write_wav(path, samples, rate, encoding="pcm24"):
    with WavWriter(path, rate, samples.shape[0], encoding) as w:
        w.write(samples)


ROOT = Path(__file__).resolve().parent.parent
RIG = ROOT / "configs" / "rigs" / "demo-sim.toml"
FID_SUDDEN = ROOT / "configs" / "sequences" / "fid-sudden.toml"


def _one_line_error(capsys, argv) -> str:
    try:
        code = main(argv)
    except SystemExit as exc:  # argparse rejects a malformed option before the handler runs
        code = exc.code
    err = capsys.readouterr().err
    assert code != 0
    assert "Traceback" not in err
    assert len(err.strip().splitlines()) == 1
    return err


@pytest.fixture(scope="module")
def simulated_shot():
    """One shot of the demo rig (sudden switch-off FID) and the simulator's truth at that time."""
    loaded = load_rig(RIG)
    spec, timeline = load_and_compile(str(FID_SUDDEN), loaded, 1)
    clock = make_clock(loaded)
    rig = open_rig(loaded, clock)
    shots = []
    engine = Engine(rig, clock)
    engine.critical_sinks.append(lambda r: shots.append(r) if isinstance(r, ShotAcquired) else None)
    engine.run(timeline, config_snapshot(loaded, spec, str(FID_SUDDEN)))
    inst = rig.transceiver.inst
    return shots[0], inst.larmor_hz(shots[0].started_at_s), inst.t2star_s, loaded.config.receive.adc_full_scale_v


def test_wav_of_a_simulated_shot_gives_the_true_frequency(tmp_path, capsys, simulated_shot):
    # truth: SimulatedInstrument.larmor_hz (CODATA 2022 shielded gamma x the site's field) and t2star_s
    shot, f_true, t2_true, full_scale = simulated_shot
    path = tmp_path / "shot.wav"
    write_wav(path, shot.samples / full_scale, 48000)  # both channels, from before the switch-off
    plot = tmp_path / "shot.png"
    assert main([ "analyze", str(path), "--ref-channel", "1", "--json", "--plot", str(plot)]) == 0
    result = json.loads(capsys.readouterr().out)
    assert result["detected"] is True
    assert abs(result["frequency_hz"] - f_true) < 4 * result["frequency_sd_hz"]
    assert abs(result["t2star_s"] - t2_true) < 4 * result["t2star_sd_s"]
    assert result["dead_time_s"] > shot.switch_off_sample / 48000  # the ringing was blanked
    assert result["reference_channels"] == [1]
    for key in ("detected", "frequency_hz", "frequency_sd_hz", "field_nt", "field_sd_nt", "t2star_s", "t2star_sd_s",
                "amplitude", "phase_rad", "snr", "mains_hz", "dead_time_s", "sample_rate_hz", "gamma_hz_per_nt"):
        assert key in result
    assert plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and plot.stat().st_size > 20_000


def test_stored_run_through_analyze(tmp_path, capsys):
    db = tmp_path / "run.sqlite"
    assert main(["run", str(FID_SUDDEN), "--rig", str(RIG), "--db", str(db), "--shots", "2", "--json"]) == 0
    stored = json.loads(capsys.readouterr().out)
    assert main(["analyze", "--db", str(db), "--run", "latest", "--json"]) == 0
    result = json.loads(capsys.readouterr().out)
    assert result["shots"] == 2 and result["detected"]
    # the same functions; the run searched +/-20 % around the predicted Larmor frequency, analyze the
    # default band, so the hum model holds a few more harmonics: the answers agree to 1 % of an sd
    assert result["frequency_hz"] == pytest.approx(stored["frequency_hz"], abs=0.01 * result["frequency_sd_hz"])
    assert result["dead_time_s"] == pytest.approx(0.015)
    assert main(["analyze", "--db", str(db), "--run", stored["run_id"]]) == 0
    assert "nT" in capsys.readouterr().out


def test_stored_cpmg_and_noise_runs_get_their_own_analysis(tmp_path, capsys):
    # source: Meiboom & Gill, Rev. Sci. Instrum. 29:688 (1958): the CPMG train decays as exp(-t/T2)
    db = tmp_path / "seq.sqlite"
    cpmg = ROOT / "configs" / "sequences" / "cpmg-t2.toml"
    assert main(["run", str(cpmg), "--rig", str(RIG), "--db", str(db), "--shots", "2", "--json"]) == 0
    stored = json.loads(capsys.readouterr().out)
    assert main(["analyze", "--db", str(db), "--run", stored["run_id"], "--json"]) == 0
    result = json.loads(capsys.readouterr().out)
    assert result["kind"] == "cpmg" and result["run_id"] == stored["run_id"]
    assert result["larmor_source"] == stored_larmor_source(db, stored["run_id"])
    assert result["t2_s"] == pytest.approx(stored["t2_s"], rel=1e-9)  # the timeline rebuilt as it ran
    assert abs(result["t2_s"] - 1.6) < 0.05 * 1.6  # configs/samples/tap-water-half-litre.toml: t2_s = 1.6
    assert main(["analyze", "--db", str(db), "--run", "latest"]) == 0
    assert "T2 = " in capsys.readouterr().out
    assert "--plot" in _one_line_error(capsys, ["analyze", "--db", str(db), "--run", "latest", "--plot", "x.png"])

    noise = ROOT / "configs" / "sequences" / "noise-survey.toml"
    assert main(["run", str(noise), "--rig", str(RIG), "--db", str(db), "--shots", "1"]) == 0
    capsys.readouterr()
    assert main(["analyze", "--db", str(db), "--run", "latest", "--json"]) == 0
    result = json.loads(capsys.readouterr().out)
    assert result["kind"] == "noise" and result["headline"]["unit"] == "nV/sqrt(Hz)"
    # the simulated preamp's white noise, configs/rigs/demo-sim.toml (2 nV/rtHz), is the floor of the density
    assert result["density_nv_per_rthz"] > 2.0


def stored_larmor_source(db, run_id):
    from controller.store import Store

    with Store(db) as store:
        return store.run(run_id)["config"]["larmor_source"]


def test_noise_only_recording_reports_no_detection(tmp_path, capsys):
    rng = np.random.default_rng(3)
    path = tmp_path / "noise.wav"
    write_wav(path, rng.normal(0, 0.01, (1, 48000)), 48000)
    assert main(["analyze", str(path), "--json"]) == 0
    result = json.loads(capsys.readouterr().out)
    assert result["detected"] is False
    assert result["frequency_hz"] is None and result["field_nt"] is None


def test_bad_inputs_give_one_line(tmp_path, capsys):
    good = tmp_path / "good.wav"
    write_wav(good, np.random.default_rng(0).normal(0, 0.01, (2, 48000)), 48000)
    truncated = tmp_path / "truncated.wav"
    truncated.write_bytes(good.read_bytes()[:5000])
    not_wav = tmp_path / "notes.wav"
    not_wav.write_text("field notes, Kestrel Flats\n")
    empty = tmp_path / "empty.wav"
    empty.write_bytes(b"")
    assert "truncated" in _one_line_error(capsys, ["analyze", str(truncated)])
    assert "not a WAV" in _one_line_error(capsys, ["analyze", str(not_wav)])
    assert "empty" in _one_line_error(capsys, ["analyze", str(empty)])
    assert "channel 5 does not exist" in _one_line_error(capsys, ["analyze", str(good), "--channel", "5"])
    assert "channel 2 does not exist" in _one_line_error(capsys, ["analyze", str(good), "--ref-channel", "2"])
    assert "Nyquist" in _one_line_error(capsys, ["analyze", str(good), "--band", "1000:30000"])
    assert "LOW:HIGH" in _one_line_error(capsys, ["analyze", str(good), "--band", "abc"])
    assert "cannot read" in _one_line_error(capsys, ["analyze", str(tmp_path / "missing.wav")])
    assert "no such store" in _one_line_error(capsys, ["analyze", "--db", str(tmp_path / "x.sqlite"), "--run", "a"])
    assert "nothing to analyse" in _one_line_error(capsys, ["analyze"])


def test_bad_input_through_a_real_process(tmp_path):
    path = tmp_path / "short.wav"
    write_wav(path, np.zeros((1, 100)), 48000, "float32")
    proc = subprocess.run([sys.executable, "-m", "controller.cli.main", "analyze", str(path)],
                          capture_output=True, text=True, cwd=ROOT, timeout=120)
    assert proc.returncode != 0
    assert proc.stderr.count("\n") == 1 and proc.stderr.startswith("precess: error:")
    assert "usable samples" in proc.stderr
