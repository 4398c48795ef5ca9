"""Rig-file tables of the hardware drivers: strict, with one clear line per mistake."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from controller.cli.main import main
from controller.config.loader import load_rig
from controller.errors import ConfigError

ROOT = Path(__file__).resolve().parent.parent
HERON = (ROOT / "configs/rigs/heron-2.toml").read_text()


def write(tmp_path, text):
    path = tmp_path / "rig.toml"
    path.write_text(text)
    return path


def test_the_example_rig_file_loads():
    cfg = load_rig(ROOT / "configs/rigs/heron-2.toml").config
    assert (cfg.transceiver.driver, cfg.supply.driver, cfg.board.driver) == ("soundcard", "scpi", "serial")
    assert cfg.transceiver.soundcard.reference_in == (1,)
    assert cfg.supply.scpi.commands.set_current == "SOUR:CURR {value:.4f}"


@pytest.mark.parametrize("edit, key, fragment", [
    (("compliance_v = 30.0", "complience_v = 30.0"), "supply.scpi.complience_v", "did you mean 'compliance_v'"),
    (('driver = "scpi"', 'driver = "scpy"'), "supply.driver", "allowed: 'simulated', 'soundcard'"),
    (("marker_out = 1", "marker_out = 0"), "transceiver.soundcard.marker_out", "also pulse_out"),
    (("reference_in = [1]", "reference_in = [0]"), "transceiver.soundcard.reference_in", "repeats an input"),
    (("heartbeat_s = 0.2", "heartbeat_s = 0.8"), "board.serial.heartbeat_s", "at most watchdog_s / 2"),
    (("max_current_a = 5.0", "max_current_a = 2.0"), "limits.max_current_a", "exceeds the supply's rating"),
    (("watchdog_s = 1.0", "watchdog_s = 60.0"), "board.serial.watchdog_s", "allowed: 0.1 to 10.0"),
    (('trigger = "marker"', 'trigger = "sometimes"'), "board.serial.trigger", "allowed: 'marker', 'timer'"),
    (("[supply.scpi]", "[supply.scpi_typo]"), "supply.scpi_typo", "unknown key"),
    (("compliance_v = 30.0", "compliance_v = 24.0"), "supervisor.supply_compliance_v", "differs from supply.scpi"),
])
def test_mistakes_name_file_key_and_what_is_allowed(tmp_path, edit, key, fragment):
    path = write(tmp_path, HERON.replace(*edit, 1))
    with pytest.raises(ConfigError) as info:
        load_rig(path)
    message = str(info.value)
    assert message.startswith(f"{path}: {key}: ") and fragment in message


def test_a_driver_needs_its_table_and_only_its_table(tmp_path):
    no_table = re.sub(r"\[supply\.scpi\][^\[]*", "", HERON)
    with pytest.raises(ConfigError, match=r"supply.scpi: missing; supply.driver = 'scpi' needs a \[supply.scpi\]"):
        load_rig(write(tmp_path, no_table))
    with pytest.raises(ConfigError, match="transceiver.soundcard: given, but transceiver.driver is 'scpi_daq'"):
        load_rig(write(tmp_path, HERON.replace('driver = "soundcard"', 'driver = "scpi_daq"')))


def test_command_maps_are_strict(tmp_path):
    text = HERON + '\n[supply.scpi.commands]\nset_curent = "ISET {value}"\n'
    with pytest.raises(ConfigError, match="supply.scpi.commands.set_curent: unknown key; did you mean 'set_current'"):
        load_rig(write(tmp_path, text))


def test_mixing_simulated_and_real_drivers_is_refused(tmp_path):
    sim = (ROOT / "configs/rigs/demo-sim.toml").read_text().replace("../", str(ROOT / "configs") + "/")
    text = sim.replace('[supply]\ndriver = "simulated"', '[supply]\ndriver = "scpi"\n[supply.scpi]\n'
                       'resource = "TCPIP0::127.0.0.1::1::SOCKET"\nidentity_contains = "x"\ncompliance_v = 30.0\n'
                       'max_current_a = 5.0')
    with pytest.raises(ConfigError, match="supply.driver: mixes real .supply. and simulated"):
        load_rig(write(tmp_path, text))


def test_an_absent_instrument_is_one_line_and_a_nonzero_exit(tmp_path, capsys):
    text = HERON.replace('resource = "TCPIP0::192.0.2.40::5025::SOCKET"', 'resource = "TCPIP0::127.0.0.1::1::SOCKET"')
    text = text.replace('port = "/dev/serial/by-id/usb-Heron_Switch_Board-if00"', f'port = "{tmp_path}/no-board"')
    code = main(["rig", "test", str(write(tmp_path, text))])
    err = capsys.readouterr().err.strip()
    assert code == 3 and "\n" not in err
    assert err.startswith("precess: error: serial board: cannot open") and "no-board" in err
