"""A rig's self-test: exercise each driver safely and report what works.

Nothing carries polarising current unless `current_a` is given; then the coil is energised
for `hold_s` through the board's polarise path and the resistance V/I gives the winding
temperature (R(T) = R20 (1 + alpha (T - 20)), IEC 60028).  Every step is tried, each gives
one line, and the rig is made safe at the end whatever happened.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from controller.errors import PrecessError
from controller.physics.coil import temperature_from_resistance_c
from controller.rig import Rig
from controller.rigmodel import coil_model


@dataclass(frozen=True)
class CheckResult:
    name: str
    ok: bool
    detail: str

    def __str__(self) -> str:
        return f"{'ok  ' if self.ok else 'FAIL'}  {self.name}: {self.detail}"


def _try(name: str, action: Callable[[], str]) -> CheckResult:
    try:
        return CheckResult(name, True, action())
    except (PrecessError, OSError, ValueError) as exc:
        return CheckResult(name, False, str(exc))


def self_test(rig: Rig, coil_config, sample_rate_hz: float, current_a: float | None = None,
              hold_s: float = 1.0, sleep: Callable[[float], None] | None = None) -> list[CheckResult]:
    """Run every check; the rig is made safe afterwards (its failures are reported too)."""
    results = []
    board = rig.board
    if board is not None:
        def board_check() -> str:
            board.set_path("idle")
            sensors = board.read_sensors()
            return ", ".join(f"{k} {v:g}" for k, v in sensors.items()) or "no sensors"
        results.append(_try("board: idle path and sensors", board_check))

    def supply_idle() -> str:
        rig.supply.output_off()
        return f"output off; reads {rig.supply.read_current():.3f} A, {rig.supply.read_voltage():.3f} V"
    results.append(_try("supply: output off and readback", supply_idle))

    def transceiver_check() -> str:
        n = int(round(0.1 * sample_rate_hz))
        rec = rig.transceiver.play_and_record(np.ones(n), np.zeros(n))
        rms = ", ".join(f"{name} {np.sqrt(np.mean(np.square(row, dtype=float))) * 1e3:.3g} mV rms"
                        for name, row in zip(rec.channel_names, rec.samples))
        flags = "; ".join(rec.notes)
        if rec.overrun:
            raise ValueError(f"over/underrun while recording 0.1 s ({flags})")
        return f"recorded 0.1 s: {rms}" + (f" ({flags})" if flags else "")
    results.append(_try("transceiver: silent segment recorded", transceiver_check))

    if current_a is not None:
        def current_check() -> str:
            if board is not None:
                board.set_path("polarise")
            rig.supply.set_current(current_a)
            if sleep is not None:
                sleep(hold_s)
            i, v = rig.supply.read_current(), rig.supply.read_voltage()
            rig.supply.output_off()
            if board is not None:
                board.set_path("idle")
            if i <= 0:
                raise ValueError(f"no current flows (reads {i:.3f} A at {v:.2f} V): open circuit or switch path?")
            r20 = coil_model(coil_config).resistance_20c_ohm
            temp = temperature_from_resistance_c(v / i, r20)
            return (f"{i:.3f} A at {v:.3f} V: R = {v / i:.3f} ohm (model R20 {r20:.3f} ohm), "
                    f"winding about {temp:.1f} C")
        results.append(_try(f"supply: {current_a:g} A through the coil for {hold_s:g} s", current_check))

    failures = rig.make_safe()
    results.append(CheckResult("safe state", not failures, "; ".join(failures) or "current off, silent, idle"))
    return results
