"""Record a heating and cooling curve of the coil, supervised, for `precess coil identify`.

Heat at current_a for heat_s (or until the resistance method reads stop_at_c), then hold a
small sense current for cool_s so that the resistance method keeps reading the winding
while it cools; sample every period_s.  The run is supervised like any other, except that
it is exempt from the duty-cycle and predicted-temperature checks (it exists because the
thermal model is not yet known); it stops heating at stop_at_c and trips on a measured
over-temperature.  Whatever happens the rig is made safe at the end.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from controller.clock import Clock
from controller.coil_identify import HeatingCurve
from controller.supervisor.machine import THERMISTOR_KEY, InterlockTrip, Supervisor
from controller.supervisor.measured import supply_temperature_c
from controller.thermal_plan import CurrentStep

EXEMPT_CHECKS = ("duty_cycle", "predicted_over_temperature")


def record_heating_curve(rig: Any, clock: Clock, supervisor: Supervisor, current_a: float, heat_s: float,
                         cool_s: float, period_s: float, sense_current_a: float, stop_at_c: float,
                         run_id: str = "coil-record") -> HeatingCurve:
    """Drive the rig and return the curve (times from switch-on).  Raises InterlockTrip on a trip."""
    watched = supervisor.watch(rig)
    supervisor.begin([CurrentStep(0.0, heat_s, current_a), CurrentStep(heat_s, cool_s, sense_current_a)], watched)
    r0, t0 = supervisor.r0_ohm, supervisor.t0_c
    rows: list[tuple[float, ...]] = []
    try:
        if watched.board is not None:
            watched.board.set_path("polarise")
        watched.supply.set_current(current_a)
        start = clock.now()
        clock.sleep(supervisor.rig.supervisor.settle_s)
        phase_current, phase_end = current_a, heat_s
        while True:
            readings = supervisor.read(watched)
            derived, finding = supervisor.evaluate(readings)
            now = clock.now() - start
            if finding is not None:
                failures = watched.make_safe()
                raise InterlockTrip(supervisor.trip(run_id, finding, clock.now(), failures))
            temperature = supply_temperature_c(readings["voltage_v"], readings["current_a"], r0, t0, 1e-6)
            rows.append((now, phase_current, math.nan if temperature is None else temperature, readings["voltage_v"],
                         readings.get(THERMISTOR_KEY, math.nan)))
            if phase_current == current_a and (now >= heat_s - 1e-9 or (temperature or -math.inf) >= stop_at_c):
                phase_current, phase_end = sense_current_a, now + cool_s
                watched.supply.set_current(sense_current_a)
                rows[-1] = (now, sense_current_a) + rows[-1][2:]
            elif phase_current == sense_current_a and now >= phase_end - 1e-9:
                break
            clock.sleep(period_s)
    finally:
        watched.make_safe()
    columns = np.array(rows)
    return HeatingCurve(times_s=columns[:, 0], current_a=columns[:, 1], temperature_c=columns[:, 2],
                        voltage_v=columns[:, 3], thermistor_c=columns[:, 4])
