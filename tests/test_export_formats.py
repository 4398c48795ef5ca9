"""JCAMP-DX, WAV, CSV and npz exports read back with independent readers and compared.

Readers: nmrglue's JCAMP-DX reader (nmrglue.jcampdx); scipy.io.wavfile; the standard csv
module; numpy.load with pickles refused.
"""

from __future__ import annotations

import csv
import warnings

from types import SimpleNamespace

import numpy as np
import pytest
from scipy import constants
from scipy.io import wavfile
from scipy.signal import hilbert

from controller.analysis.sources import shot_from_record
from controller.cli.main import main
from controller.store import Store
from controller.store_queries import Selection, measurements

from tests.conftest import EPOCH_NOON_UTC

ng = pytest.importorskip("nmrglue")


def _export(path, fmt, out, *extra):
    assert main(["export", "--db", str(path), "--format", fmt, "--out", str(out), *extra]) == 0
    return out


def _stack(store, run_id):
    """The run's stacked FID computed here from the stored shots, independently of the exporter."""
    shots = [s for s in store.shots(run_id) if not s.bad]
    windows = []
    for s in shots:
        signal = s.samples[s.channel_names.index("signal")].astype(float)
        windows.append(signal[s.acquire_start_sample:s.acquire_start_sample + s.acquire_samples])
    return np.mean(windows, axis=0), shots


def test_jcampdx_reads_back_with_nmrglue(two_run_template, tmp_path):
    path, run_a, _ = two_run_template
    out = _export(path, "jcampdx", tmp_path / "fid.jdx", "--run", run_a)
    lines = out.read_text(encoding="ascii").splitlines()
    # source: JCAMP-DX 5.01 (McDonald & Wilks 1988): lines of at most 80 characters
    assert max(len(line) for line in lines) <= 80
    for required in ("##JCAMP-DX= 5.01", "##DATA TYPE= NMR FID", "##DATA TYPE= NMR SPECTRUM", "##DATA CLASS= NTUPLES",
                     "##SYMBOL= X, R, I, N", "##PAGE= N=1", "##PAGE= N=2", "##END NTUPLES= NMR FID",
                     "##DATA TABLE= (X++(R..R)), XYDATA", "##DATA TABLE= (X++(I..I)), XYDATA"):
        assert required in lines, required
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # the reader must not complain about anything
        dic, spectrum = ng.jcampdx.read(str(out))
        fid_block = dic["_datatype_NMRFID"][0]
        fid = ng.fileio.jcampdx.getdataarray(fid_block)
    with Store(path) as store:
        stacked, shots = _stack(store, run_a)
        fs = shots[0].sample_rate_hz
    # FID pages: the stack and its Hilbert transform (scipy.signal.hilbert), to the file's integer resolution
    scale = np.max(np.abs(stacked))
    np.testing.assert_allclose(fid[0], stacked, rtol=0, atol=scale * 1e-9)
    np.testing.assert_allclose(fid[1], np.imag(hilbert(stacked)), rtol=0, atol=scale * 1e-8)
    # spectrum pages: numpy's FFT of the stacked FID
    expected = np.fft.rfft(stacked)
    np.testing.assert_allclose(spectrum[0], expected.real, rtol=0, atol=np.max(np.abs(expected)) * 1e-9)
    np.testing.assert_allclose(spectrum[1], expected.imag, rtol=0, atol=np.max(np.abs(expected)) * 1e-9)
    udic = ng.jcampdx.guess_udic(dic, spectrum)
    assert udic[0]["size"] == stacked.size // 2 + 1 and udic[0]["sw"] == pytest.approx(fs / 2)
    # observe frequency in MHz: the proton Larmor frequency at the simulated field
    # source: CODATA 2022 shielded proton gyromagnetic ratio via scipy.constants; field: invented
    # site 48250 nT + 25 nT diurnal peak at noon (configs/sites/kestrel-flats.toml)
    gamma_hz_per_nt = constants.physical_constants["shielded proton gyromag. ratio in MHz/T"][0] * 1e-3
    observe_mhz = float(dic[".OBSERVEFREQUENCY"][0])
    assert observe_mhz * 1e6 == pytest.approx(48275.0 * gamma_hz_per_nt, abs=2.5)
    peak_hz = np.argmax(np.hypot(spectrum[0], spectrum[1])) * fs / stacked.size
    assert peak_hz == pytest.approx(observe_mhz * 1e6, abs=1.5)
    # the FID's first abscissa is the dead time after switch-off
    first = [float(v) for v in fid_block["FIRST"][0].split(",")[:1]]
    assert first[0] == pytest.approx(shots[0].dead_time_s, abs=1 / fs)


def test_jcampdx_single_shot_and_ambiguous_selection(two_run_template, tmp_path, capsys):
    path, run_a, _ = two_run_template
    out = _export(path, "jcampdx", tmp_path / "one.jdx", "--run", run_a, "--shot", "2")
    dic, spectrum = ng.jcampdx.read(str(out))
    assert dic[".AVERAGES"] == ["1"]
    code = main(["export", "--db", str(path), "--format", "jcampdx", "--out", str(tmp_path / "x.jdx")])
    assert code == 2 and "has 2 runs: give --run ID" in capsys.readouterr().err
    assert not (tmp_path / "x.jdx").exists() and not (tmp_path / "x.jdx.part").exists()


@pytest.mark.parametrize("encoding, step", [("float32", 0.0), ("pcm24", 2.0**-23)])
def test_wav_reads_back_with_scipy(two_run_template, tmp_path, encoding, step):
    path, run_a, run_b = two_run_template
    out = _export(path, "wav", tmp_path / f"{encoding}.wav", "--encoding", encoding)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        rate, data = wavfile.read(out)
    with Store(path) as store:
        shots = list(store.shots(run_a)) + list(store.shots(run_b))
        full_scale_v = store.run(run_a)["config"]["rig"]["receive"]["adc_full_scale_v"]
    expected = np.concatenate([s.samples for s in shots], axis=1).T / full_scale_v
    assert rate == 48000 and data.shape == expected.shape and data.shape[1] == len(shots[0].channel_names)
    if encoding == "float32":
        assert data.dtype == np.float32
        np.testing.assert_array_equal(data, expected.astype(np.float32))
    else:
        assert data.dtype == np.int32  # scipy returns 24-bit PCM left-justified in int32
        np.testing.assert_allclose(data / 2.0**31, expected, rtol=0, atol=step / 2 + 1e-12)


def test_csv_and_npz_hold_the_readings(two_run_template, tmp_path):
    path, run_a, run_b = two_run_template
    csv_out = _export(path, "csv", tmp_path / "r.csv")
    npz_out = _export(path, "npz", tmp_path / "r.data", "--run", run_a)
    with Store(path) as store:
        series = measurements(store, Selection())
        shots = list(store.shots(run_a))
    with open(csv_out, newline="") as f:
        rows = list(csv.DictReader(f))
    assert [r["run_id"] for r in rows] == [run_a, run_b]
    assert [float(r["field_nt"]) for r in rows] == series["field_nt"].tolist()
    assert rows[0]["time_utc"].startswith("2026-06-21T12:0") and rows[0]["time_utc"].endswith("Z")
    with np.load(npz_out, allow_pickle=False) as z:
        assert z["field_nt"].tolist() == series["field_nt"][:1].tolist()
        assert z["samples"].shape == (4, *shots[0].samples.shape)
        np.testing.assert_array_equal(z["samples"][3], shots[3].samples)
        assert z["channel_names"].tolist() == list(shots[0].channel_names)
        assert z["shot_run_id"].tolist() == [run_a] * 4
        w = shot_from_record(SimpleNamespace(
            samples=z["samples"][0], channel_names=tuple(z["channel_names"]), sample_rate_hz=float(z["sample_rate_hz"]),
            acquire_start_sample=int(z["acquire_start_sample"][0]), acquire_samples=int(z["acquire_samples"][0]),
            dead_time_s=float(z["dead_time_s"][0])))
        assert w.n_samples == shots[0].acquire_samples
        assert w.first_sample - w.time_zero_sample == round(shots[0].dead_time_s * shots[0].sample_rate_hz)


def test_bad_selections_are_one_line(two_run_template, tmp_path, capsys):
    path, _, _ = two_run_template
    cases = [
        (["--run", "nosuchrun", "--format", "csv"], "no run 'nosuchrun'"),
        (["--from", "2026-06-22", "--to", "2026-06-21", "--format", "csv"], "must come after --from"),
        (["--from", "2030-01-01", "--format", "iaga2002"], "no field readings"),
    ]
    for args, message in cases:
        code = main(["export", "--db", str(path), "--out", str(tmp_path / "o"), *args])
        err = capsys.readouterr().err
        assert code != 0 and message in err and err.count("\n") == 1, err
    with pytest.raises(SystemExit) as exit_info:
        main(["export", "--db", str(path), "--out", "o", "--format", "csv", "--from", "21/06/2026"])
    assert exit_info.value.code == 2 and "not a UTC time" in capsys.readouterr().err
    assert main(["export", "--db", str(tmp_path / "none.sqlite"), "--format", "csv", "--out", "o"]) == 2
    assert "no such store" in capsys.readouterr().err
    assert EPOCH_NOON_UTC  # the template's runs start at noon on 2026-06-21


def test_run_latest_selects_the_newest_run(two_run_template, tmp_path):
    # common practice, no source: `--run latest` means the run started last
    path, run_a, run_b = two_run_template
    with Store(path) as store:
        newest = max(store.runs(), key=lambda r: r["started_at_s"])["run_id"]
    latest = ng.jcampdx.read(str(_export(path, "jcampdx", tmp_path / "l.jdx", "--run", "latest")))[0]
    named = ng.jcampdx.read(str(_export(path, "jcampdx", tmp_path / "n.jdx", "--run", newest)))[0]
    assert latest["TITLE"] == named["TITLE"]
    assert newest in latest["TITLE"][0]


def test_wav_of_one_shot_holds_exactly_that_shot(two_run_template, tmp_path):
    # source: scipy.io.wavfile reads the file back independently
    path, run_a, _ = two_run_template
    out = _export(path, "wav", tmp_path / "one.wav", "--run", run_a, "--shot", "1")
    rate, data = wavfile.read(out)
    with Store(path) as store:
        (shot,) = [s for s in store.shots(run_a) if s.shot_index == 1]
        full_scale_v = store.run(run_a)["config"]["rig"]["receive"]["adc_full_scale_v"]
    np.testing.assert_array_equal(data, (shot.samples.T / full_scale_v).astype(np.float32))
