"""First-order (lumped) thermal model of a copper coil driven by I^2 R(T).

    C dT/dt = I^2 R20 (1 + alpha (T - 20 C)) - (T - T_amb) / R_th

For a constant current this is linear in T, dT/dt = a - b T with

    a = (I^2 R20 (1 - 20 alpha) + T_amb / R_th) / C,   b = (1/R_th - I^2 R20 alpha) / C,

whose exact solution is T(t) = T_inf + (T0 - T_inf) exp(-b t), T_inf = a / b.  When b <= 0
the coil runs away (heating grows faster than cooling); the model then integrates the
linear growth T(t) = T0 + (a - b T0) t exactly for b = 0 and exp growth for b < 0.

Every thermal model of a coil offers the same small state interface (`CoilThermal`):
`initial_state`, `advance` and `winding_c`; the two-node model lives in
controller.physics.thermal_two_node.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import ClassVar, Protocol

from controller.physics.wire import COPPER_ALPHA_PER_K, REFERENCE_TEMPERATURE_C
from controller.physics.thermal_two_node import TwoNodeThermalModel


ThermalState = tuple[float, ...]


class CoilThermal(Protocol):
    """A lumped thermal model of a coil: a state of node temperatures (C), the winding's first."""

    ambient_c: float

    def initial_state(self, temperature_c: float) -> ThermalState:
        """Every node at temperature_c."""

    def advance(self, state: ThermalState, current_a: float, duration_s: float) -> ThermalState:
        """The state after holding current_a for duration_s (exact for a constant current)."""

    def winding_c(self, state: ThermalState) -> float:
        """The winding's (average, resistance-method) temperature."""


@dataclass(frozen=True)
class ThermalModel:
    model_name: ClassVar[str] = "one-node"

    resistance_20c_ohm: float
    heat_capacity_j_per_k: float
    thermal_resistance_k_per_w: float
    ambient_c: float
    alpha_per_k: float = COPPER_ALPHA_PER_K

    def _coefficients(self, current_a: float) -> tuple[float, float]:
        c = self.heat_capacity_j_per_k
        p20 = current_a**2 * self.resistance_20c_ohm
        a = (p20 * (1.0 - REFERENCE_TEMPERATURE_C * self.alpha_per_k) + self.ambient_c / self.thermal_resistance_k_per_w) / c
        b = (1.0 / self.thermal_resistance_k_per_w - p20 * self.alpha_per_k) / c
        return a, b

    def initial_state(self, temperature_c: float) -> ThermalState:
        return (float(temperature_c),)

    def advance(self, state: ThermalState, current_a: float, duration_s: float) -> ThermalState:
        return (self.step(state[0], current_a, duration_s),)

    def winding_c(self, state: ThermalState) -> float:
        return state[0]

    def step(self, temperature_c: float, current_a: float, duration_s: float) -> float:
        """Temperature after holding current_a for duration_s from temperature_c (exact)."""
        if duration_s <= 0.0:
            return temperature_c
        a, b = self._coefficients(current_a)
        if abs(b) < 1e-15:
            return temperature_c + a * duration_s
        t_inf = a / b
        return t_inf + (temperature_c - t_inf) * math.exp(-b * duration_s)

    def steady_state_c(self, current_a: float) -> float:
        """T_inf = a / b, or +inf when the coil would run away."""
        a, b = self._coefficients(current_a)
        return a / b if b > 0 else math.inf

    def heating_rate_k_per_s(self, current_a: float, temperature_c: float) -> float:
        """Initial rate of rise, before any cooling: I^2 R(T) / C."""
        return self.power_w(current_a, temperature_c) / self.heat_capacity_j_per_k

    def max_duty_cycle(self, current_a: float, limit_c: float) -> float:
        """Largest on-fraction whose mean power keeps the steady temperature at limit_c.

        duty = (T_lim - T_amb) / (R_th I^2 R(T_lim)), capped at 1; valid when each pulse is
        short against the thermal time constant R_th C [calc from the first-order model].
        """
        power = self.power_w(current_a, limit_c)
        if power <= 0.0:
            return 1.0
        return max(0.0, min(1.0, (limit_c - self.ambient_c) / (self.thermal_resistance_k_per_w * power)))

    def time_to_reach_s(self, current_a: float, start_c: float, target_c: float) -> float:
        """Time for a constant current to heat the coil from start_c to target_c (inf if it never does).

        Inverts T(t) = T_inf + (T0 - T_inf) exp(-b t): t = ln((T0 - T_inf)/(T_target - T_inf)) / b,
        and t = (T_target - T0)/a when b = 0.
        """
        if target_c <= start_c:
            return 0.0
        a, b = self._coefficients(current_a)
        if abs(b) < 1e-15:
            return (target_c - start_c) / a if a > 0 else math.inf
        t_inf = a / b
        ratio = (start_c - t_inf) / (target_c - t_inf)
        if ratio <= 0:
            return math.inf
        t = math.log(ratio) / b
        return t if t >= 0 else math.inf

    @property
    def time_constant_s(self) -> float:
        """Thermal time constant R_th C (at zero current)."""
        return self.thermal_resistance_k_per_w * self.heat_capacity_j_per_k

    def power_w(self, current_a: float, temperature_c: float) -> float:
        """Dissipation I^2 R(T)."""
        return current_a**2 * self.resistance_20c_ohm * (
            1.0 + self.alpha_per_k * (temperature_c - REFERENCE_TEMPERATURE_C))


def thermal_model_for(coil_config: object, coil_model: object) -> CoilThermal:
    """Build the model from a CoilConfig and its CoilModel (heat capacity 0 means copper alone).

    A positive `former_heat_capacity_j_per_k` selects the two-node model.
    """
    heat_capacity = coil_config.heat_capacity_j_per_k or coil_model.heat_capacity_j_per_k
    former_j_per_k = getattr(coil_config, "former_heat_capacity_j_per_k", 0.0)
    if former_j_per_k > 0.0:
        return TwoNodeThermalModel(
            resistance_20c_ohm=coil_model.resistance_20c_ohm,
            winding_heat_capacity_j_per_k=heat_capacity,
            winding_to_ambient_k_per_w=coil_config.thermal_resistance_k_per_w,
            former_heat_capacity_j_per_k=former_j_per_k,
            winding_to_former_k_per_w=coil_config.winding_to_former_k_per_w,
            ambient_c=coil_config.ambient_c,
        )
    return ThermalModel(
        resistance_20c_ohm=coil_model.resistance_20c_ohm,
        heat_capacity_j_per_k=heat_capacity,
        thermal_resistance_k_per_w=coil_config.thermal_resistance_k_per_w,
        ambient_c=coil_config.ambient_c,
    )
