"""Two-node lumped thermal model of a coil: the winding and a slower node (former, potting).

    C_w dT_w/dt = I^2 R20 (1 + alpha (T_w - 20 C)) - (T_w - T_amb) / R_wa - (T_w - T_f) / R_wf
    C_f dT_f/dt = (T_w - T_f) / R_wf

The winding loses heat to ambient through R_wa and exchanges heat with the former through
R_wf; the former is a heat reservoir reached only through the winding.  In steady state
T_f = T_w and T_w = T_amb + P R_wa, so R_wa keeps the meaning of the one-node model's
thermal resistance, and C_f -> 0 gives back the one-node model.  The transfer function
from power to winding temperature, R_wa (1 + s tau_f) / (second-order polynomial) with
tau_f = C_f R_wf, has four free coefficients, so one temperature record (the resistance
method) identifies all four parameters.  (Lumped-capacitance networks: Incropera &
DeWitt, Fundamentals of Heat and Mass Transfer, ch. 5 [mem].)

For a constant current the system is linear, dx/dt = A x + b, and is advanced exactly with
the matrix exponential of the augmented matrix [[A, b], [0, 0]] (Van Loan, IEEE Trans. AC
23:395 (1978)), which also covers a singular or unstable A (thermal runaway).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import ClassVar

import numpy as np
from scipy.linalg import expm
from scipy.optimize import brentq

from controller.physics.wire import COPPER_ALPHA_PER_K, REFERENCE_TEMPERATURE_C


@dataclass(frozen=True)
class TwoNodeThermalModel:
    """Parameters of the two-node model; state = (winding C, former C)."""

    model_name: ClassVar[str] = "two-node"

    resistance_20c_ohm: float
    winding_heat_capacity_j_per_k: float
    winding_to_ambient_k_per_w: float
    former_heat_capacity_j_per_k: float
    winding_to_former_k_per_w: float
    ambient_c: float
    alpha_per_k: float = COPPER_ALPHA_PER_K
    _cache: dict = field(default_factory=dict, init=False, repr=False, compare=False, hash=False)

    def system(self, current_a: float) -> tuple[np.ndarray, np.ndarray]:
        """A (2x2, 1/s) and b (K/s) of dx/dt = A x + b at a constant current."""
        c_w, c_f = self.winding_heat_capacity_j_per_k, self.former_heat_capacity_j_per_k
        g_a, g_f = 1.0 / self.winding_to_ambient_k_per_w, 1.0 / self.winding_to_former_k_per_w
        p20 = current_a**2 * self.resistance_20c_ohm
        a = np.array([[(p20 * self.alpha_per_k - g_a - g_f) / c_w, g_f / c_w],
                      [g_f / c_f, -g_f / c_f]])
        b = np.array([(p20 * (1.0 - REFERENCE_TEMPERATURE_C * self.alpha_per_k) + g_a * self.ambient_c) / c_w, 0.0])
        return a, b

    def _propagator(self, current_a: float, duration_s: float) -> np.ndarray:
        """The 3x3 matrix mapping (x0, 1) to (x(t), 1); cached per (current, duration).

        With A's two real eigenvalues (an RC network has them) Sylvester's formula gives
        e^(At) = (e^(l1 t)(A - l2) - e^(l2 t)(A - l1)) / (l1 - l2), and x(t) = e^(At) x0 +
        (1 - e^(At)) x_inf with x_inf = -A^-1 b: fast and stable when the two time constants
        are far apart.  Otherwise (equal or complex eigenvalues, singular A) the matrix
        exponential of the augmented matrix is used.
        """
        key = (float(current_a), float(duration_s))
        found = self._cache.get(key)
        if found is None:
            found = self._sylvester(current_a, duration_s)
            if found is None:
                a, b = self.system(current_a)
                augmented = np.zeros((3, 3))
                augmented[:2, :2] = a
                augmented[:2, 2] = b
                found = expm(augmented * duration_s)
            if len(self._cache) > 4096:
                self._cache.clear()
            self._cache[key] = found
        return found

    def _sylvester(self, current_a: float, duration_s: float) -> np.ndarray | None:
        a, b = self.system(current_a)
        half_trace = 0.5 * (a[0, 0] + a[1, 1])
        det = a[0, 0] * a[1, 1] - a[0, 1] * a[1, 0]
        disc = half_trace**2 - det
        if disc <= 0.0 or abs(det) < 1e-300:
            return None
        root = np.sqrt(disc)
        l1, l2 = half_trace + root, half_trace - root
        if root < 1e-9 * abs(half_trace):
            return None
        eye = np.eye(2)
        e_at = (np.exp(l1 * duration_s) * (a - l2 * eye) - np.exp(l2 * duration_s) * (a - l1 * eye)) / (l1 - l2)
        x_inf = -np.linalg.solve(a, b)
        out = np.eye(3)
        out[:2, :2] = e_at
        out[:2, 2] = x_inf - e_at @ x_inf
        return out

    def initial_state(self, temperature_c: float) -> tuple[float, float]:
        return (float(temperature_c), float(temperature_c))

    def advance(self, state: tuple[float, ...], current_a: float, duration_s: float) -> tuple[float, float]:
        if duration_s <= 0.0:
            return (float(state[0]), float(state[1]))
        phi = self._propagator(current_a, duration_s)
        x = phi @ np.array([state[0], state[1], 1.0])
        return (float(x[0]), float(x[1]))

    def winding_c(self, state: tuple[float, ...]) -> float:
        return state[0]

    def winding_trajectory(self, state: tuple[float, ...], currents_a: np.ndarray, durations_s: np.ndarray) -> np.ndarray:
        """Winding temperature after each (current, duration) step in turn; same as repeated
        `advance`, with the 3x3 products done on plain floats for speed."""
        w, f = float(state[0]), float(state[1])
        out = np.empty(len(durations_s))
        for k, (current, duration) in enumerate(zip(currents_a.tolist(), durations_s.tolist())):
            if duration > 0.0:
                (a, b, c), (d, e, g) = self._propagator(current, duration)[:2].tolist()
                w, f = a * w + b * f + c, d * w + e * f + g
            out[k] = w
        return out

    def steady_state_c(self, current_a: float) -> float:
        """Winding temperature -A^-1 b in steady state, or +inf when the coil would run away."""
        a, b = self.system(current_a)
        if np.any(np.linalg.eigvals(a).real >= 0.0):
            return float("inf")
        return float(-np.linalg.solve(a, b)[0])

    def step(self, temperature_c: float, current_a: float, duration_s: float) -> float:
        """Winding temperature after duration_s from a uniform temperature_c (one-node call shape)."""
        return self.advance(self.initial_state(temperature_c), current_a, duration_s)[0]

    def power_w(self, current_a: float, temperature_c: float) -> float:
        """Dissipation I^2 R(T) in the winding."""
        return current_a**2 * self.resistance_20c_ohm * (
            1.0 + self.alpha_per_k * (temperature_c - REFERENCE_TEMPERATURE_C))

    def heating_rate_k_per_s(self, current_a: float, temperature_c: float) -> float:
        """Initial rate of rise of the winding, before any heat leaves it: I^2 R(T) / C_w."""
        return self.power_w(current_a, temperature_c) / self.winding_heat_capacity_j_per_k

    def max_duty_cycle(self, current_a: float, limit_c: float) -> float:
        """Largest on-fraction whose mean power keeps the steady winding temperature at limit_c.

        In steady state no heat flows into the former, so T_w = T_amb + P_mean R_wa and
        duty = (T_lim - T_amb) / (R_wa I^2 R(T_lim)), capped at 1 (pulses short against
        both time constants) [calc from the model's equations].
        """
        power = self.power_w(current_a, limit_c)
        if power <= 0.0:
            return 1.0
        return max(0.0, min(1.0, (limit_c - self.ambient_c) / (self.winding_to_ambient_k_per_w * power)))

    def time_to_reach_s(self, current_a: float, start_c: float, target_c: float) -> float:
        """Time for a constant current to heat the winding from a uniform start_c to target_c.

        inf when the steady winding temperature stays at or below target_c.  From a uniform
        start the winding's rise is monotonic (a passive RC network's step response), so
        the crossing is bracketed by doubling and found with Brent's method on `step`.
        """
        if target_c <= start_c:
            return 0.0
        steady = self.steady_state_c(current_a)
        if math.isfinite(steady) and steady <= target_c:
            return math.inf
        tau = self.winding_heat_capacity_j_per_k * self.winding_to_ambient_k_per_w
        high = max(tau * 1e-3, 1e-6)
        for _ in range(200):
            if self.step(start_c, current_a, high) >= target_c:
                break
            high *= 2.0
        else:
            return math.inf
        return float(brentq(lambda t: self.step(start_c, current_a, t) - target_c, 0.0, high,
                            xtol=1e-9 * high, rtol=1e-12))
