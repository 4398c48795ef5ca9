"""The polarising current supply over VISA, speaking SCPI (or the rig file's command map).

Setpoints are checked against the rig's limit and the supply's rating, the current is
ramped in steps of at most `ramp_step_a`, the compliance voltage is set before the output
goes on, and every readback must be plausible.  `output_off` is idempotent, sends both
"current 0" and "output off" even if the first fails, and is what the engine calls on the
way out.
"""

from __future__ import annotations

import math
import time
from typing import Any, Callable

from controller.config.hardware import ScpiSupplyConfig
from controller.config.schema import LimitsConfig
from controller.errors import DriverError
from drivers.visa_session import VisaSession

VOLTAGE_READBACK_MARGIN = 1.05


def ramp_steps(start_a: float, target_a: float, step_a: float) -> list[float]:
    """Setpoints from start to target (target included, start not) spaced by at most step_a."""
    count = max(1, math.ceil(abs(target_a - start_a) / step_a - 1e-9))
    return [start_a + (target_a - start_a) * k / count for k in range(1, count + 1)]


class ScpiSupply:
    """See module docstring.  `sleep` is the engine clock's sleep (ramp pauses)."""

    def __init__(self, cfg: ScpiSupplyConfig, limits: LimitsConfig,
                 sleep: Callable[[float], None] = time.sleep, session: VisaSession | None = None) -> None:
        self.cfg = cfg
        self.commands = cfg.commands
        self.limit_a = min(cfg.max_current_a, limits.max_current_a)
        self._sleep = sleep
        self._session = session
        self.identity = ""
        self._setpoint_a = 0.0
        self._highest_setpoint_a = 0.0
        self._output_on = False

    def open(self) -> "ScpiSupply":
        if self._session is None:
            self._session = VisaSession(self.cfg.resource, self.cfg.backend, self.cfg.timeout_s, "SCPI supply")
        s = self._session
        self.identity = s.check_identity(self.commands.identify, self.cfg.identity_contains)
        s.write(self.commands.clear)
        self.output_off()
        s.write(self.commands.set_voltage.format(value=self.cfg.compliance_v))
        s.check_errors(self.commands.error_query, "setting the compliance voltage")
        return self

    def close(self) -> None:
        if self._session is None:
            return
        try:
            self.output_off()
        finally:
            self._session.close()

    @property
    def session(self) -> VisaSession:
        if self._session is None:
            raise DriverError(f"SCPI supply at {self.cfg.resource}: not open")
        return self._session

    def describe(self) -> dict[str, Any]:
        return {"driver": "scpi", "role": "supply", "resource": self.cfg.resource, "identity": self.identity,
                "compliance_v": self.cfg.compliance_v, "limit_a": self.limit_a, "ramp_step_a": self.cfg.ramp_step_a}

    # ---- the CurrentSupply protocol ----------------------------------------------------------
    def set_current(self, current_a: float) -> None:
        """Ramp to current_a (output on first if needed); refuses values outside 0..limit."""
        if not math.isfinite(current_a) or not 0.0 <= current_a <= self.limit_a:
            raise DriverError(f"SCPI supply: setpoint {current_a!r} A refused; allowed: 0 to {self.limit_a:g} A "
                              "(the rig's max_current_a and the supply's rating)")
        s = self.session
        if not self._output_on and current_a > 0:
            s.write(self.commands.set_current.format(value=0.0))
            s.write(self.commands.output_on)
            self._output_on = True
            self._setpoint_a = 0.0
        steps = ramp_steps(self._setpoint_a, current_a, self.cfg.ramp_step_a)
        for i, value in enumerate(steps):
            s.write(self.commands.set_current.format(value=value))
            self._setpoint_a = value
            self._highest_setpoint_a = max(self._highest_setpoint_a, value)
            if i + 1 < len(steps) and self.cfg.ramp_step_s > 0:
                self._sleep(self.cfg.ramp_step_s)
        s.check_errors(self.commands.error_query, f"setting {current_a:g} A")

    def read_current(self) -> float:
        tol = self.cfg.readback_tolerance_a
        high = (self._highest_setpoint_a if self._output_on else 0.0) + tol
        return self.session.query_number(self.commands.measure_current, -tol, high, "A")

    def read_voltage(self) -> float:
        high = self.cfg.compliance_v * VOLTAGE_READBACK_MARGIN + 0.1
        return self.session.query_number(self.commands.measure_voltage, -high, high, "V")

    def output_off(self) -> None:
        """Current to zero and output off; both are attempted; idempotent.

        Then the output state is read back (`output_query`, "0" or "OFF" expected) so a supply
        that ignored the command is reported, not assumed off.  Raises only if neither command
        got through or the supply says its output is still on.
        """
        failures = []
        for command in (self.commands.set_current.format(value=0.0), self.commands.output_off):
            try:
                self.session.write(command)
            except DriverError as exc:
                failures.append(str(exc))
        self._setpoint_a = 0.0
        if len(failures) == 2:
            raise DriverError(failures[-1])
        self._output_on = False
        self._highest_setpoint_a = 0.0
        self._confirm_output_off()

    def _confirm_output_off(self) -> None:
        query = self.commands.output_query
        if not query:
            return
        try:
            reply = self.session.query(query).upper()
        except DriverError as exc:
            raise DriverError(f"SCPI supply: output off sent but not confirmed ({exc}); check the supply by hand") from None
        if reply not in ("0", "OFF"):
            raise DriverError(f"SCPI supply at {self.cfg.resource}: output still on after {self.commands.output_off!r} "
                              f"({query!r} replied {reply[:20]!r}); switch it off by hand")
