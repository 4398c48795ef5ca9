"""Build a Rig from its configuration: the only place that names concrete driver classes."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from controller.clock import Clock
from controller.config.loader import LoadedRig
from controller.errors import ConfigError
from drivers.protocols import CurrentSupply, SwitchBoard, Transceiver


@dataclass
class Rig:
    """The drivers of one instrument.  `instrument` is the simulator's shared state, or None."""

    name: str
    supply: CurrentSupply
    transceiver: Transceiver
    board: SwitchBoard | None
    simulated: bool
    instrument: Any = None
    notes: list[str] = field(default_factory=list)
    host: Any = None  # host readings for the supervisor (controller.supervisor.host); None = the local machine

    def describe(self) -> dict[str, Any]:
        """Each driver's own description (device, identity, calibration), stored with every run."""
        parts = {"supply": self.supply, "transceiver": self.transceiver, "board": self.board}
        return {role: driver.describe() for role, driver in parts.items() if driver is not None}

    def close(self) -> None:
        """Release ports, sessions and streams (drivers that hold any have close()); safe first."""
        self.make_safe()
        for driver in (self.transceiver, self.board, self.supply):
            close = getattr(driver, "close", None)
            if close is not None:
                try:
                    close()
                except Exception:  # noqa: BLE001 - closing must reach every driver
                    pass

    def make_safe(self) -> list[str]:
        """Current off, transmitter silent, coil path idle.  Tries every step; returns what failed."""
        failures = []
        for what, action in (("supply output off", self.supply.output_off),
                             ("transmitter silent", self.transceiver.silence),
                             ("coil path idle", (lambda: self.board.set_path("idle")) if self.board else (lambda: None))):
            try:
                action()
            except Exception as exc:  # noqa: BLE001 - safe-state must try every step
                failures.append(f"{what}: {exc}")
        return failures


def build_rig(loaded: LoadedRig, clock: Clock) -> Rig:
    cfg = loaded.config
    if cfg.transceiver.driver == "simulated" and cfg.supply.driver == "simulated":
        from drivers.simulated.board import SimulatedBoard
        from drivers.simulated.host import SimulatedHost
        from drivers.simulated.instrument import SimulatedInstrument
        from drivers.simulated.supply import SimulatedSupply
        from drivers.simulated.transceiver import SimulatedTransceiver

        if loaded.site is None or loaded.sample is None:
            raise ConfigError(loaded.path, "simulator", "a simulated rig needs its site and sample files")
        instrument = SimulatedInstrument(cfg, loaded.site, loaded.sample, clock)
        return Rig(name=cfg.name, supply=SimulatedSupply(instrument), transceiver=SimulatedTransceiver(instrument),
                   board=SimulatedBoard(instrument), simulated=True, instrument=instrument,
                   host=SimulatedHost(instrument))
    return _build_hardware_rig(loaded, clock)


def latency_file_for(loaded: LoadedRig) -> Path:
    """The sound card's loopback calibration file: as configured (relative to the rig file) or beside it."""
    sc = loaded.config.transceiver.soundcard
    rig_path = Path(loaded.path)
    if sc is not None and sc.latency_file:
        return rig_path.parent / sc.latency_file
    return rig_path.with_name(rig_path.stem + ".latency.toml")


def _build_hardware_rig(loaded: LoadedRig, clock: Clock) -> Rig:
    """Open every real driver (board first, so the coil path is idle before anything else); close all on failure."""
    cfg = loaded.config
    opened: list[Any] = []
    try:
        board = None
        if cfg.board is not None and cfg.board.serial is not None:
            from drivers.serial_board import SerialBoard

            board = SerialBoard(cfg.board.serial).open()
            opened.append(board)
        if cfg.supply.scpi is None:
            raise ConfigError(loaded.path, "supply.driver", f"{cfg.supply.driver!r} is not buildable; allowed: 'scpi'")
        from drivers.scpi_supply import ScpiSupply

        supply = ScpiSupply(cfg.supply.scpi, cfg.limits, clock.sleep).open()
        opened.append(supply)
        transceiver: Any
        if cfg.transceiver.soundcard is not None:
            from drivers.loopback_calibration import read_calibration
            from drivers.soundcard import SoundCardTransceiver

            calibration = read_calibration(latency_file_for(loaded), cfg.transceiver.sample_rate_hz)
            transceiver = SoundCardTransceiver(cfg.transceiver.soundcard, cfg.transceiver.sample_rate_hz,
                                               calibration, clock.now).open()
        elif cfg.transceiver.scpi_daq is not None:
            from drivers.scpi_daq import ScpiDaqTransceiver

            transceiver = ScpiDaqTransceiver(cfg.transceiver.scpi_daq, cfg.transceiver.sample_rate_hz,
                                             clock.now).open()
        else:
            raise ConfigError(loaded.path, "transceiver.driver",
                              f"{cfg.transceiver.driver!r} is not buildable; allowed: 'soundcard', 'scpi_daq'")
        opened.append(transceiver)
    except BaseException:
        for driver in reversed(opened):
            try:
                driver.close()
            except Exception:  # noqa: BLE001 - unwinding a half-built rig
                pass
        raise
    return Rig(name=cfg.name, supply=supply, transceiver=transceiver, board=board, simulated=False)
