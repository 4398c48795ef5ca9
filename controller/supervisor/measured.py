"""Coil temperature measured two ways: the resistance method and a thermistor, compared.

Resistance method: with R0 measured at T0, copper follows R(T) = R0 (1 + alpha0 (T - T0)).
Writing alpha0 through the inferred zero-resistance temperature K = 1/alpha20 - 20 C
(234.5 C for alpha20 = 0.00393 /K) makes the inversion independent of T0:

    T = (R / R0) (K + T0) - K                      [IEC 60028 / IEC 60034-1 form, K from alpha20]

so +10 % resistance from 20 C reads as +25.4 K (REFERENCE.md).
"""

from __future__ import annotations

from controller.config.schema import RigConfig
from controller.physics.wire import COPPER_ALPHA_PER_K, REFERENCE_TEMPERATURE_C
from controller.rigmodel import coil_model

INFERRED_ZERO_C = 1.0 / COPPER_ALPHA_PER_K - REFERENCE_TEMPERATURE_C


def cold_resistance(rig: RigConfig) -> tuple[float, float]:
    """(R0 ohm, T0 C): the measured cold resistance if configured, else the winding's R20."""
    sup = rig.supervisor
    if sup.cold_resistance_ohm > 0.0:
        return sup.cold_resistance_ohm, sup.cold_resistance_at_c
    return coil_model(rig.coil).resistance_20c_ohm, REFERENCE_TEMPERATURE_C


def resistance_temperature_c(resistance_ohm: float, r0_ohm: float, t0_c: float) -> float:
    """T = (R/R0)(K + T0) - K, K = 1/alpha20 - 20 C (copper)."""
    return resistance_ohm / r0_ohm * (INFERRED_ZERO_C + t0_c) - INFERRED_ZERO_C


def expected_resistance_ohm(temperature_c: float, r0_ohm: float, t0_c: float) -> float:
    """R(T) = R0 (K + T) / (K + T0): the inverse of resistance_temperature_c."""
    return r0_ohm * (INFERRED_ZERO_C + temperature_c) / (INFERRED_ZERO_C + t0_c)


def supply_temperature_c(voltage_v: float, current_a: float, r0_ohm: float, t0_c: float,
                         min_current_a: float) -> float | None:
    """Winding temperature from the supply's V/I readback, or None below min_current_a."""
    if current_a is None or voltage_v is None or abs(current_a) < min_current_a:
        return None
    return resistance_temperature_c(voltage_v / current_a, r0_ohm, t0_c)


def disagreement_k(resistance_c: float | None, thermistor_c: float | None) -> float | None:
    """|T_resistance - T_thermistor|, or None unless both are known."""
    if resistance_c is None or thermistor_c is None:
        return None
    return abs(resistance_c - thermistor_c)
