"""Identify a coil's thermal parameters from a recorded heating and cooling curve.

The curve holds, at sample times t_k, the winding temperature T_k (resistance method) and
the current I_k held from t_k to t_(k+1).  With the winding's R20 known (the rig's coil,
or its measured cold resistance), the one-node model has two unknowns (heat capacity C,
thermal resistance R_th) and the two-node model four (C_w, R_wa, C_f, R_wf); both are fitted
by nonlinear least squares on log-parameters (scipy.optimize.least_squares), the model
advanced exactly between samples.  The two-node model is preferred only when it lowers the
Bayesian information criterion BIC = n ln(RSS/n) + k ln n [pub: Schwarz, Ann. Stat. 6:461
(1978)] by more than 10, "very strong" evidence [mem: Kass & Raftery, JASA 90:773 (1995)].

CSV layout (our own): comment lines start with '#'; a header row names the columns; the
columns time_s, current_a and temperature_c are required, voltage_v and thermistor_c optional.
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import numpy as np
from scipy.optimize import least_squares

from controller.errors import InputError
from controller.physics.thermal import CoilThermal, ThermalModel
from controller.physics.thermal_two_node import TwoNodeThermalModel

REQUIRED_COLUMNS = ("time_s", "current_a", "temperature_c")
OPTIONAL_COLUMNS = ("voltage_v", "thermistor_c")
BIC_MARGIN = 10.0


@dataclass(frozen=True)
class HeatingCurve:
    """Samples of a heating/cooling record; NaN where a value was not measured."""

    times_s: np.ndarray
    current_a: np.ndarray  # held from this sample to the next
    temperature_c: np.ndarray  # winding, resistance method
    voltage_v: np.ndarray | None = None
    thermistor_c: np.ndarray | None = None


def write_curve_csv(path: str | Path, curve: HeatingCurve, comments: Sequence[str] = ()) -> None:
    columns = {"time_s": curve.times_s, "current_a": curve.current_a, "temperature_c": curve.temperature_c}
    if curve.voltage_v is not None:
        columns["voltage_v"] = curve.voltage_v
    if curve.thermistor_c is not None:
        columns["thermistor_c"] = curve.thermistor_c
    with open(path, "w", encoding="utf-8", newline="") as f:
        for line in comments:
            f.write(f"# {line}\n")
        writer = csv.writer(f)
        writer.writerow(list(columns))
        for row in zip(*columns.values()):
            writer.writerow(["" if math.isnan(v) else f"{v:.6g}" for v in row])


def read_curve_csv(path: str | Path) -> HeatingCurve:
    """Read a curve; a missing file, column or number is an InputError naming it."""
    try:
        lines = [line for line in Path(path).read_text(encoding="utf-8").splitlines()
                 if line.strip() and not line.lstrip().startswith("#")]
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"{path}: cannot read the curve ({exc})") from None
    rows = list(csv.reader(lines))
    if not rows:
        raise InputError(f"{path}: no header row; expected columns {', '.join(REQUIRED_COLUMNS)}")
    header = [h.strip() for h in rows[0]]
    missing = [c for c in REQUIRED_COLUMNS if c not in header]
    if missing:
        raise InputError(f"{path}: missing column(s) {', '.join(missing)}; required: {', '.join(REQUIRED_COLUMNS)}")
    data: dict[str, list[float]] = {name: [] for name in header}
    for number, row in enumerate(rows[1:], start=2):
        if len(row) != len(header):
            raise InputError(f"{path}: data row {number}: {len(row)} fields, the header has {len(header)}")
        for name, text in zip(header, row):
            try:
                data[name].append(float(text) if text.strip() else math.nan)
            except ValueError:
                raise InputError(f"{path}: data row {number}, column {name}: {text!r} is not a number") from None
    arrays = {k: np.array(v) for k, v in data.items()}
    times = arrays["time_s"]
    if times.size < 8 or np.any(~np.isfinite(times)) or np.any(np.diff(times) <= 0):
        raise InputError(f"{path}: time_s must hold at least 8 increasing values")
    if np.any(~np.isfinite(arrays["current_a"])):
        raise InputError(f"{path}: current_a must be given on every row")
    return HeatingCurve(times, arrays["current_a"], arrays["temperature_c"],
                        arrays.get("voltage_v"), arrays.get("thermistor_c"))


def simulate_curve(model: CoilThermal, curve: HeatingCurve, start_c: float) -> np.ndarray:
    """Winding temperature at the curve's sample times, from a uniform start_c."""
    state = model.initial_state(start_c)
    out = np.empty(curve.times_s.size)
    out[0] = model.winding_c(state)
    dts = np.diff(curve.times_s)
    if isinstance(model, TwoNodeThermalModel):
        out[1:] = model.winding_trajectory(state, curve.current_a[:-1], dts)
        return out
    for k, dt in enumerate(dts):
        state = model.advance(state, float(curve.current_a[k]), float(dt))
        out[k + 1] = model.winding_c(state)
    return out


@dataclass(frozen=True)
class ThermalFit:
    nodes: int
    parameters: dict[str, float]  # the rig file's [coil] keys
    rms_k: float
    bic: float
    model: CoilThermal


def _model(nodes: int, x: np.ndarray, r20_ohm: float, ambient_c: float) -> CoilThermal:
    p = np.exp(x)
    if nodes == 1:
        return ThermalModel(r20_ohm, p[0], p[1], ambient_c)
    return TwoNodeThermalModel(r20_ohm, p[0], p[1], p[2], p[3], ambient_c)


def _fit(curve: HeatingCurve, r20_ohm: float, ambient_c: float, nodes: int, starts: list[np.ndarray],
         bounds: tuple[np.ndarray, np.ndarray] | None = None) -> ThermalFit:
    good = np.isfinite(curve.temperature_c)
    start_c = float(curve.temperature_c[good][0])

    def residuals(x: np.ndarray) -> np.ndarray:
        return (simulate_curve(_model(nodes, x, r20_ohm, ambient_c), curve, start_c) - curve.temperature_c)[good]

    best = None
    for x0 in starts:
        result = least_squares(residuals, x0, method="trf", x_scale=1.0, xtol=1e-10, ftol=1e-10, max_nfev=400,
                               bounds=bounds if bounds is not None else (-np.inf, np.inf))
        if best is None or result.cost < best.cost:
            best = result
    n = int(good.sum())
    rss = float(np.sum(best.fun**2))
    k = len(best.x)
    p = np.exp(best.x)
    names = (("heat_capacity_j_per_k", "thermal_resistance_k_per_w") if nodes == 1 else
             ("heat_capacity_j_per_k", "thermal_resistance_k_per_w", "former_heat_capacity_j_per_k",
              "winding_to_former_k_per_w"))
    return ThermalFit(nodes, dict(zip(names, map(float, p))), math.sqrt(rss / n),
                      n * math.log(max(rss, 1e-300) / n) + k * math.log(n), _model(nodes, best.x, r20_ohm, ambient_c))


def fit_one_node(curve: HeatingCurve, r20_ohm: float, ambient_c: float) -> ThermalFit:
    """C and R_th; first guesses from the largest rise and the time to 63 % of it."""
    good = np.isfinite(curve.temperature_c)
    temps, times = curve.temperature_c[good], curve.times_s[good]
    rise = max(float(np.max(temps) - temps[0]), 0.1)
    power = max(float(np.max(curve.current_a)) ** 2 * r20_ohm, 1e-6)
    r_guess = rise / power
    tau = float(times[np.argmax(temps - temps[0] >= 0.63 * rise)] - times[0]) or float(times[-1] - times[0]) / 4
    return _fit(curve, r20_ohm, ambient_c, 1, [np.log([tau / r_guess, r_guess]),
                                               np.log([2 * tau / r_guess, 1.5 * r_guess])])


def fit_two_node(curve: HeatingCurve, r20_ohm: float, ambient_c: float, one: ThermalFit) -> ThermalFit:
    """C_w, R_wa, C_f, R_wf, each kept within a physical range around the one-node fit.

    The bounds (C_f at least 1 % of C, R_wf at least 0.1 % of R_th...) keep the fit away
    from the degenerate corners where a second node of no size makes the system stiff.
    """
    c, r = one.parameters["heat_capacity_j_per_k"], one.parameters["thermal_resistance_k_per_w"]
    scale = np.array([c, r, c, r])
    bounds = (np.log(scale * [0.01, 0.1, 0.01, 0.001]), np.log(scale * [10.0, 10.0, 100.0, 100.0]))
    starts = [np.log(scale * f) for f in ((0.3, 1.0, 1.0, 0.3), (0.6, 1.0, 0.5, 0.1), (0.2, 1.0, 3.0, 1.0))]
    return _fit(curve, r20_ohm, ambient_c, 2, starts, bounds)


def identify(curve: HeatingCurve, r20_ohm: float, ambient_c: float) -> tuple[ThermalFit, ThermalFit, ThermalFit]:
    """(one-node fit, two-node fit, the one the data call for)."""
    one = fit_one_node(curve, r20_ohm, ambient_c)
    two = fit_two_node(curve, r20_ohm, ambient_c, one)
    return one, two, (two if two.bic < one.bic - BIC_MARGIN else one)
