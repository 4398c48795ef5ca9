"""Configuration tables of the real-hardware drivers (sound card, serial board, SCPI instruments).

Each table is strict like the rest of the rig file: unknown keys are rejected and every
value is range-checked.  A role's table sits under the role and is named after its driver,
e.g. ``[supply.scpi]`` or ``[transceiver.soundcard]``; cross-field rules (distinct channels,
heartbeat faster than the watchdog, the right table for the chosen driver) are checked by
`check_hardware` once the whole rig has been built.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from typing import Any

from controller.config.strict import field
from controller.errors import ConfigError

TRANSCEIVER_DRIVERS = ("simulated", "soundcard", "scpi_daq")
SUPPLY_DRIVERS = ("simulated", "scpi")
BOARD_DRIVERS = ("simulated", "serial")


@dataclass(frozen=True, kw_only=True)
class SoundCardConfig:
    """A sound card as transceiver: one full-duplex stream, channels counted from 0."""

    device: str | int = field(help="device name (or part of it) or its index, as `precess devices` lists it")
    host_api: str = field("", help="host API name or part of it, e.g. 'ALSA' or 'JACK'; empty = any")
    pulse_out: int = field(0, min=0, max=63, help="output channel carrying the transmit pulses")
    marker_out: int = field(1, min=0, max=63, help="output channel carrying the switch-off marker")
    signal_in: int = field(0, min=0, max=63, help="input channel of the signal coil's preamp")
    reference_in: tuple[int, ...] = field((), help="input channels of reference coils (may be empty)")
    output_full_scale_v: float = field(1.0, gt=0.0, max=20.0, help="peak output volts at digital full scale")
    input_full_scale_v: float = field(1.0, gt=0.0, max=20.0, help="peak input volts at digital full scale")
    marker_level: float = field(0.8, gt=0.0, max=1.0, help="marker carrier amplitude, fraction of full scale")
    blocksize: int = field(0, min=0, max=8192, help="stream block size in frames; 0 lets the host API choose")
    latency_file: str = field("", help="loopback calibration file; empty = <rig file stem>.latency.toml beside it")
    tail_s: float = field(0.05, min=0.0, max=2.0, help="extra recording after the segment to cover the latency")


@dataclass(frozen=True, kw_only=True)
class SerialBoardConfig:
    """The switch/sensor board on a serial port (protocol in docs/board-protocol.md)."""

    port: str = field(help="serial device, e.g. /dev/ttyACM0 or a stable /dev/serial/by-id/ link")
    baud: int = field(115200, choices=(9600, 19200, 38400, 57600, 115200, 230400, 460800, 921600))
    reply_timeout_s: float = field(0.5, gt=0.0, max=10.0, help="wait for one reply")
    watchdog_s: float = field(1.0, min=0.1, max=10.0, help="board turns the coil off after this long without a frame")
    heartbeat_s: float = field(0.2, min=0.02, max=5.0, help="host sends a heartbeat this often (< watchdog_s / 2)")
    reconnect_s: float = field(5.0, min=0.0, max=120.0, help="how long to wait for a vanished port to come back")
    trigger: str = field("marker", choices=("marker", "timer"),
                         help="what starts the board's switch-off: the sound card's marker, or the board's own timer")


@dataclass(frozen=True, kw_only=True)
class ScpiSupplyCommands:
    """SCPI command words of a current supply; `{value}` is replaced by the number."""

    identify: str = field("*IDN?")
    clear: str = field("*CLS")
    error_query: str = field("SYST:ERR?", help="empty = the supply has no error queue")
    set_voltage: str = field("SOUR:VOLT {value:.4f}", help="the compliance (voltage limit) in CC operation")
    set_current: str = field("SOUR:CURR {value:.4f}")
    output_on: str = field("OUTP ON")
    output_off: str = field("OUTP OFF")
    output_query: str = field("OUTP?", help="asked after output off to confirm it; empty = not confirmed")
    measure_current: str = field("MEAS:CURR?")
    measure_voltage: str = field("MEAS:VOLT?")


@dataclass(frozen=True, kw_only=True)
class ScpiSupplyConfig:
    """A programmable supply over VISA (pyvisa with the pure-Python pyvisa-py backend by default)."""

    resource: str = field(help="VISA resource, e.g. TCPIP0::192.0.2.40::5025::SOCKET or ASRL/dev/ttyUSB0::INSTR")
    backend: str = field("@py", help="pyvisa backend; '@py' is pyvisa-py")
    identity_contains: str = field(help="text the *IDN? reply must contain (guards against the wrong instrument)")
    timeout_s: float = field(2.0, gt=0.0, max=60.0)
    compliance_v: float = field(gt=0.0, max=1000.0, help="voltage limit set before the output goes on")
    max_current_a: float = field(gt=0.0, max=100.0, help="the supply's rating; setpoints above it are refused")
    ramp_step_a: float = field(0.25, gt=0.0, max=100.0, help="current changes in steps of at most this")
    ramp_step_s: float = field(0.02, min=0.0, max=10.0, help="pause between ramp steps")
    readback_tolerance_a: float = field(0.05, gt=0.0, max=10.0, help="how far the readback may exceed the setpoint")
    commands: ScpiSupplyCommands = field(default_factory=ScpiSupplyCommands)


@dataclass(frozen=True, kw_only=True)
class GeneratorCommands:
    """Function-generator command words for a triggered sine burst (`{value}` = the number)."""

    identify: str = field("*IDN?")
    clear: str = field("*CLS")
    error_query: str = field("SYST:ERR?", help="empty = the generator has no error queue")
    function_sine: str = field("SOUR1:FUNC SIN")
    frequency: str = field("SOUR1:FREQ {value:.6f}")
    amplitude_vpp: str = field("SOUR1:VOLT {value:.4f}")
    phase_deg: str = field("SOUR1:PHAS {value:.4f}")
    burst_cycles: str = field("SOUR1:BURS:NCYC {value:d}")
    burst_on: str = field("SOUR1:BURS:STAT ON")
    trigger_delay_s: str = field("TRIG1:DEL {value:.9f}")
    trigger_bus: str = field("TRIG1:SOUR BUS")
    marker_delay_s: str = field("SOUR2:PULS:DEL {value:.9f}", help="switch-off marker on channel 2")
    output_on: str = field("OUTP1 ON;:OUTP2 ON")
    output_off: str = field("OUTP1 OFF;:OUTP2 OFF")
    trigger: str = field("*TRG")


@dataclass(frozen=True, kw_only=True)
class DigitiserCommands:
    """Digitiser/oscilloscope command words for a triggered capture and a binary waveform transfer."""

    identify: str = field("*IDN?")
    clear: str = field("*CLS")
    sample_rate: str = field("ACQ:SRAT {value:.1f}")
    points: str = field("ACQ:POIN {value:d}")
    channels: str = field("ACQ:CHAN {value:d}")
    range_v: str = field("VOLT:RANG {value:.4f}")
    trigger_external: str = field("TRIG:SOUR EXT")
    arm: str = field("INIT")
    ready_query: str = field("ACQ:DONE?", help="answers 1 once the capture is complete")
    fetch: str = field("FETC:WAV? {value:d}", help="IEEE 488.2 binary block of little-endian float32 volts")
    abort: str = field("ABOR")


@dataclass(frozen=True, kw_only=True)
class ScpiDaqConfig:
    """A function generator (burst) and a digitiser (capture) instead of a sound card."""

    generator: str = field(help="VISA resource of the function generator")
    digitiser: str = field(help="VISA resource of the digitiser or oscilloscope")
    backend: str = field("@py")
    generator_identity_contains: str = field()
    digitiser_identity_contains: str = field()
    timeout_s: float = field(2.0, gt=0.0, max=60.0)
    input_channels: int = field(2, min=1, max=8, help="signal first, then reference coils")
    input_range_v: float = field(1.0, gt=0.0, max=100.0)
    max_output_vpp: float = field(10.0, gt=0.0, max=40.0)
    generator_commands: GeneratorCommands = field(default_factory=GeneratorCommands)
    digitiser_commands: DigitiserCommands = field(default_factory=DigitiserCommands)


@dataclass(frozen=True, kw_only=True)
class BoardConfig:
    """Which switch/sensor board the rig has."""

    driver: str = field("simulated", choices=BOARD_DRIVERS)
    serial: SerialBoardConfig | None = field(None)


# ---- cross-field checks -----------------------------------------------------------------------
def _table_for_driver(file: str, role: str, table: Any, known: tuple[str, ...]) -> None:
    """The table named after the chosen driver is present; no other driver's table is."""
    chosen = table.driver
    for f in fields(table):
        if f.name in known and f.name != chosen and getattr(table, f.name) is not None:
            raise ConfigError(file, f"{role}.{f.name}", f"given, but {role}.driver is {chosen!r}; "
                                                        f"remove it or set {role}.driver = {f.name!r}")
    if chosen != "simulated" and getattr(table, chosen, None) is None:
        raise ConfigError(file, f"{role}.{chosen}", f"missing; {role}.driver = {chosen!r} needs a [{role}.{chosen}] table")


def _check_soundcard(file: str, sc: SoundCardConfig) -> None:
    key = "transceiver.soundcard"
    if sc.pulse_out == sc.marker_out:
        raise ConfigError(file, f"{key}.marker_out", f"{sc.marker_out} is also pulse_out; allowed: two different channels")
    inputs = (sc.signal_in, *sc.reference_in)
    if len(set(inputs)) != len(inputs):
        raise ConfigError(file, f"{key}.reference_in", f"{list(sc.reference_in)} repeats an input channel "
                                                       f"(signal_in = {sc.signal_in}); allowed: distinct channels")
    for i, ch in enumerate(sc.reference_in):
        if not 0 <= ch <= 63:
            raise ConfigError(file, f"{key}.reference_in[{i}]", f"{ch} is out of range; allowed: 0 to 63")


def check_hardware(file: str, rig: Any) -> None:
    """Cross-field rules of the driver tables of a built RigConfig; raises ConfigError."""
    _table_for_driver(file, "transceiver", rig.transceiver, TRANSCEIVER_DRIVERS)
    _table_for_driver(file, "supply", rig.supply, SUPPLY_DRIVERS)
    if rig.transceiver.driver not in TRANSCEIVER_DRIVERS:
        raise ConfigError(file, "transceiver.driver", f"{rig.transceiver.driver!r} is not a transceiver; "
                                                      f"allowed: {', '.join(map(repr, TRANSCEIVER_DRIVERS))}")
    if rig.supply.driver not in SUPPLY_DRIVERS:
        raise ConfigError(file, "supply.driver", f"{rig.supply.driver!r} is not a current supply; "
                                                 f"allowed: {', '.join(map(repr, SUPPLY_DRIVERS))}")
    if rig.transceiver.soundcard is not None:
        _check_soundcard(file, rig.transceiver.soundcard)
    supervisor = getattr(rig, "supervisor", None)
    if rig.supply.scpi is not None and supervisor is not None \
            and supervisor.supply_compliance_v != rig.supply.scpi.compliance_v:
        raise ConfigError(file, "supervisor.supply_compliance_v",
                          f"{supervisor.supply_compliance_v:g} V differs from supply.scpi.compliance_v = "
                          f"{rig.supply.scpi.compliance_v:g} V; allowed: the same value (the supervisor judges "
                          "'supply at its voltage limit' by it)")
    if rig.supply.scpi is not None and rig.supply.scpi.max_current_a < rig.limits.max_current_a:
        raise ConfigError(file, "limits.max_current_a", f"{rig.limits.max_current_a} exceeds the supply's rating "
                                                        f"supply.scpi.max_current_a = {rig.supply.scpi.max_current_a}")
    if rig.board is not None:
        _table_for_driver(file, "board", rig.board, BOARD_DRIVERS)
        serial = rig.board.serial
        if serial is not None and serial.heartbeat_s * 2 > serial.watchdog_s:
            raise ConfigError(file, "board.serial.heartbeat_s", f"{serial.heartbeat_s} is too slow for watchdog_s = "
                                                                f"{serial.watchdog_s}; allowed: at most watchdog_s / 2")
    sim_roles = [r for r, d in (("transceiver", rig.transceiver.driver), ("supply", rig.supply.driver),
                               ("board", rig.board.driver if rig.board else None)) if d == "simulated"]
    real_roles = [r for r, d in (("transceiver", rig.transceiver.driver), ("supply", rig.supply.driver),
                                ("board", rig.board.driver if rig.board else None)) if d not in (None, "simulated")]
    if sim_roles and real_roles:
        raise ConfigError(file, f"{real_roles[0]}.driver", f"mixes real ({', '.join(real_roles)}) and simulated "
                                                           f"({', '.join(sim_roles)}) drivers; allowed: all simulated or all real")
