"""Build a Rig from its configuration: the only place that names concrete driver classes."""

from __future__ import annotations

from dataclasses import dataclass, field
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
    raise ConfigError(loaded.path, "transceiver.driver",
                      f"{cfg.transceiver.driver!r} with supply {cfg.supply.driver!r} is not buildable yet; allowed: 'simulated'")
