"""Bad configuration files give one clear line and a non-zero exit, never a traceback.

Common practice, no source: the error names the file, the key path, the value and what is allowed.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from controller.cli.main import main
from controller.config.loader import load_rig, load_sequence
from controller.errors import ConfigError

from tests.conftest import DEMO_RIG, FID_SUDDEN


def _run_cli(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def _sequence_with(write_toml, replace_from: str, replace_to: str) -> Path:
    text = FID_SUDDEN.read_text().replace(replace_from, replace_to)
    assert text != FID_SUDDEN.read_text()
    return write_toml("seq.toml", text)


def _assert_one_line(code: int, err: str, *fragments: str) -> None:
    assert code != 0
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1, err
    assert "Traceback" not in err
    for fragment in fragments:
        assert fragment in lines[0], lines[0]


def test_unknown_key_is_named_with_suggestion(write_toml, capsys):
    seq = _sequence_with(write_toml, "current_a = 2.0", "curent_a = 2.0")
    code, _, err = _run_cli(capsys, "check", str(seq), "--rig", str(DEMO_RIG))
    _assert_one_line(code, err, "seq.toml", "polarise.curent_a", "unknown key", "current_a")


def test_wrong_type_is_named(write_toml, capsys):
    seq = _sequence_with(write_toml, "duration_s = 2.0", 'duration_s = "two"')
    code, _, err = _run_cli(capsys, "check", str(seq), "--rig", str(DEMO_RIG))
    _assert_one_line(code, err, "polarise.duration_s", "'two'", "not a number")


def test_out_of_range_current_in_rig(write_toml, capsys):
    rig_text = DEMO_RIG.read_text().replace("max_current_a = 3.0", "max_current_a = -1.0")
    rig = write_toml("rigs/rig.toml", rig_text.replace('"../sites/', f'"{DEMO_RIG.parent.parent}/sites/')
                     .replace('"../samples/', f'"{DEMO_RIG.parent.parent}/samples/'))
    code, _, err = _run_cli(capsys, "check", str(FID_SUDDEN), "--rig", str(rig))
    _assert_one_line(code, err, "rig.toml", "limits.max_current_a", "-1.0", "out of range", "more than 0")


def test_missing_file(capsys, tmp_path):
    code, _, err = _run_cli(capsys, "check", str(tmp_path / "nope.toml"), "--rig", str(DEMO_RIG))
    _assert_one_line(code, err, "nope.toml", "file not found")


def test_invalid_toml(write_toml, capsys):
    seq = write_toml("broken.toml", "name = 'x'\n[polarise\n")
    code, _, err = _run_cli(capsys, "check", str(seq), "--rig", str(DEMO_RIG))
    _assert_one_line(code, err, "broken.toml", "not valid TOML")


def test_missing_required_key(write_toml):
    seq = write_toml("s.toml", 'name = "x"\nkind = "fid"\n')
    with pytest.raises(ConfigError, match=r"s\.toml: polarise: missing"):
        load_sequence(seq)


def test_unknown_sequence_kind(write_toml):
    seq = write_toml("s.toml", 'name = "x"\nkind = "spin-dance"\n')
    with pytest.raises(ConfigError, match="'spin-dance' is not a known sequence; allowed: 'fid'"):
        load_sequence(seq)


def test_current_over_rig_limit_is_refused_by_check(write_toml, capsys):
    seq = _sequence_with(write_toml, "current_a = 2.0", "current_a = 4.5")
    code, out, _ = _run_cli(capsys, "check", str(seq), "--rig", str(DEMO_RIG))
    assert code == 5
    assert "polarising current: 4.5 A exceeds the limit 3 A by 1.5 A" in out


def test_run_refuses_over_limit_and_energises_nothing(write_toml, capsys, tmp_path):
    seq = _sequence_with(write_toml, "current_a = 2.0", "current_a = 4.5")
    db = tmp_path / "x.sqlite"
    code, _, err = _run_cli(capsys, "run", str(seq), "--rig", str(DEMO_RIG), "--db", str(db))
    assert code == 5 and "refused" in err
    assert not db.exists()


def test_bad_argument_is_one_line_via_subprocess():
    proc = subprocess.run([sys.executable, "-m", "controller.cli.main", "run", str(FID_SUDDEN), "--rig",
                           str(DEMO_RIG), "--shots", "zero"], capture_output=True, text=True, timeout=60)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr
    assert len(proc.stderr.strip().splitlines()) == 1


def test_demo_configs_load():
    loaded = load_rig(DEMO_RIG)
    assert loaded.site is not None and loaded.sample is not None
    assert load_sequence(FID_SUDDEN).polarise.current_a == 2.0
