"""The SCPI current supply driver through pyvisa-py against the coil-supply emulator on 127.0.0.1."""

from __future__ import annotations

import dataclasses
import math
import time

import pytest

from controller.config.hardware import ScpiSupplyCommands, ScpiSupplyConfig
from controller.config.schema import LimitsConfig
from controller.errors import DriverError
from drivers.emulators.scpi_server import ScpiServer
from drivers.emulators.scpi_supply import COPPER_ALPHA_PER_K, CoilSupply
from drivers.scpi_supply import ScpiSupply, ramp_steps

pytestmark = pytest.mark.timeout(60)


@pytest.fixture
def emulator():
    instrument = CoilSupply(resistance_ohm=4.4, inductance_h=0.03, max_current_a=5.0, max_voltage_v=60.0)
    server = ScpiServer(instrument).start()
    yield instrument, server
    server.stop()


def settled(predicate, timeout_s=1.0):
    """Writes are not acknowledged: give the emulator's thread a moment to act on them."""
    deadline = time.monotonic() + timeout_s
    while not predicate() and time.monotonic() < deadline:
        time.sleep(0.002)
    return predicate()


def make(server, limits=LimitsConfig(max_current_a=3.0), **overrides):
    values = dict(resource=f"TCPIP0::127.0.0.1::{server.port}::SOCKET", identity_contains="KI-CS60",
                  compliance_v=30.0, max_current_a=5.0, ramp_step_a=0.5, ramp_step_s=0.0, timeout_s=1.0)
    values.update(overrides)
    return ScpiSupply(ScpiSupplyConfig(**values), limits)


def test_ramp_steps_are_even_and_end_on_the_target():
    assert ramp_steps(0.0, 2.0, 0.5) == [0.5, 1.0, 1.5, 2.0]
    assert ramp_steps(0.0, 1.1, 0.5) == pytest.approx([1.1 / 3, 2.2 / 3, 1.1])
    assert ramp_steps(2.0, 0.0, 1.0) == [1.0, 0.0]
    assert ramp_steps(1.0, 1.0, 0.25) == [1.0]


def test_open_sets_compliance_before_output_and_ramps_in_steps(emulator):
    instrument, server = emulator
    supply = make(server).open()
    supply.set_current(2.0)
    log = instrument.log
    assert log.index("SOUR:VOLT 30.0000") < log.index("OUTP ON")
    steps = [float(c.split()[1]) for c in log[log.index("OUTP ON"):] if c.startswith("SOUR:CURR ")]
    assert steps == [0.5, 1.0, 1.5, 2.0]
    supply.close()


def test_readback_follows_the_coil_physics(emulator):
    """Steady state: V = I R(T) with R(T) = R20 (1 + alpha (T - 20)), copper alpha from IEC 60028."""
    instrument, server = emulator
    supply = make(server).open()
    supply.set_current(2.0)
    time.sleep(0.1)  # many L/R = 6.8 ms
    current, voltage = supply.read_current(), supply.read_voltage()
    assert current == pytest.approx(2.0, abs=1e-3)
    r_expected = 4.4 * (1 + COPPER_ALPHA_PER_K * (instrument.temperature_c - 20.0))
    assert voltage / current == pytest.approx(r_expected, rel=1e-3)
    supply.close()


def test_emulated_current_rise_is_compliance_limited():
    """i(t) = Vc/R (1 - exp(-t R/L)) from zero until the setpoint: L di/dt = Vc - R i [calc]."""
    coil = CoilSupply(resistance_ohm=4.0, inductance_h=0.4, heat_capacity_j_per_k=1e9)
    coil.execute("SOUR:VOLT 20;SOUR:CURR 3;OUTP ON")
    t0 = coil._at
    coil.advance(t0 + 0.05)
    expected = 20.0 / 4.0 * (1 - math.exp(-0.05 * 4.0 / 0.4))
    assert coil.current_a == pytest.approx(expected, rel=1e-3)
    assert coil.execute("MEAS:VOLT?") == ["20.0000"]  # at compliance while the current is still rising
    coil.advance(t0 + 5.0)
    assert coil.current_a == pytest.approx(3.0)


def test_setpoints_outside_the_limits_are_refused_before_anything_is_sent(emulator):
    instrument, server = emulator
    supply = make(server).open()
    sent = len(instrument.log)
    for bad in (3.5, -0.1, float("nan")):
        with pytest.raises(DriverError, match="refused; allowed: 0 to 3 A"):
            supply.set_current(bad)
    assert len(instrument.log) == sent and not instrument.output_on
    supply.close()


def test_output_off_is_idempotent_and_really_off(emulator):
    instrument, server = emulator
    supply = make(server).open()
    supply.set_current(1.0)
    supply.output_off()
    supply.output_off()
    assert settled(lambda: not instrument.output_on and instrument.setpoint_a == 0.0)
    assert supply.read_current() == 0.0
    supply.close()


def test_a_command_map_drives_a_supply_with_other_words(emulator):
    instrument, server = emulator
    words = ScpiSupplyCommands(set_current="CURRENT {value:.3f}", output_on="OUTPUT 1", output_off="OUTPUT 0",
                               measure_current="MEASURE:CURRENT?", error_query="")
    supply = make(server, commands=words).open()
    supply.set_current(1.0)
    assert settled(lambda: instrument.output_on and instrument.setpoint_a == 1.0)
    assert "CURR 1.000" in instrument.log
    supply.close()


@pytest.mark.parametrize("fault, message", [
    ("garbage", "unreadable reply"), ("silent", r"no reply to 'MEAS:CURR\?' within 1 s"),
    ("overrange", "reads overload")])
def test_bad_readback_is_a_clear_error_and_the_output_can_still_be_switched_off(emulator, fault, message):
    instrument, server = emulator
    supply = make(server).open()
    supply.set_current(1.0)
    instrument.fault = fault
    with pytest.raises(DriverError, match=message):
        supply.read_current()
    if fault == "overrange":
        supply.output_off()
    else:  # the commands get through, but a supply that cannot answer cannot confirm it is off
        with pytest.raises(DriverError, match="output off sent but not confirmed"):
            supply.output_off()
    assert settled(lambda: not instrument.output_on)


def test_implausible_readback_is_refused(emulator):
    instrument, server = emulator
    supply = make(server).open()
    supply.set_current(1.0)
    instrument.execute("SOUR:CURR 2.5")  # the supply runs away from what the host commanded
    time.sleep(0.1)
    with pytest.raises(DriverError, match=r"reads 2.5 A, outside the plausible -0.05 to 1.05 A"):
        supply.read_current()
    supply.output_off()


def test_wrong_identity_and_no_server_are_one_line(emulator):
    instrument, server = emulator
    with pytest.raises(DriverError, match="does not contain 'PS-9000'.*wrong instrument"):
        make(server, identity_contains="PS-9000").open()
    server.stop()
    with pytest.raises(DriverError, match=f"SCPI supply at TCPIP0::127.0.0.1::{server.port}::SOCKET"):
        make(server).open()


def test_instrument_errors_are_reported(emulator):
    instrument, server = emulator
    with pytest.raises(DriverError, match=r'instrument error after .*-222,"Data out of range"'):
        make(server, compliance_v=80.0).open()  # above the emulated supply's 60 V


def test_output_off_is_confirmed_by_reading_the_output_state(emulator):
    """A supply that ignores the off command is reported, not assumed off (common practice, no source)."""
    instrument, server = emulator
    supply = make(server).open()
    supply.set_current(1.0)
    supply.output_off()
    assert "OUTP?" in instrument.log and not instrument.output_on
    # a command map whose "off" word this supply does not know: the write goes unanswered
    deaf = ScpiSupply(dataclasses.replace(supply.cfg, commands=ScpiSupplyCommands(output_off="OUTP:STATE OFF")),
                      LimitsConfig(max_current_a=3.0), session=supply.session)
    instrument.execute("OUTP ON")
    with pytest.raises(DriverError, match="output still on"):
        deaf.output_off()
    instrument.execute("OUTP OFF")
    supply.close()
