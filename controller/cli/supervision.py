"""What `run` and `coil` share for supervised runs: the latch, the supervised engine, cautions."""

from __future__ import annotations

import argparse
from typing import Any

from controller.clock import Clock
from controller.config.loader import LoadedRig
from controller.engine import Engine
from controller.rig import Rig
from controller.supervisor.latch import ENV_STATE_DIR, TripLatch
from controller.supervisor.machine import Supervisor


def add_state_dir_argument(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--state-dir", help=f"where trip latches are kept (default ${ENV_STATE_DIR}, "
                                            "else $XDG_STATE_HOME/precess, else ~/.local/state/precess)")


def latch_for(loaded: LoadedRig, state_dir: str | None) -> TripLatch:
    return TripLatch(loaded.config.name, state_dir)


def supervised_engine(loaded: LoadedRig, rig: Rig, clock: Clock, store: Any, latch: TripLatch,
                      skip: tuple[str, ...] = ()) -> Engine:
    """An Engine sampling at the rig's control period, a Supervisor on the rig's limits, the store as critical sink."""
    cfg = loaded.config
    supervisor = Supervisor(cfg, clock, latch=latch, store=store, skip=skip)
    engine = Engine(rig, clock, control_period_s=cfg.supervisor.control_period_s, supervisor=supervisor)
    if store is not None:
        engine.critical_sinks.append(store.write)
    return engine
