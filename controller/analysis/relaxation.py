"""Exponential fits for relaxation times: T2 from echo amplitudes, T1 from recovery or decay.

Model, for times t_k and amplitudes y_k:

    y = c + a exp(-t / T)

* T2 (echo train or echo series): c = 0, y = a exp(-TE / T2);
* T1 at the polarising field: y = A_inf + (A_0 - A_inf) exp(-tp / T1), i.e. c = A_inf, a = A_0 - A_inf;
* T1 in the Earth's field: y = c + a exp(-td / T1), c the Earth's-field equilibrium (about
  Be/Bp of the start: half a percent, but a tenth of the signal left after two T1).

The fit is least squares (scipy.optimize.least_squares, trust region) started from the best
T on a logarithmic grid with (c, a) solved linearly at each T.  Uncertainties are the square
roots of the diagonal of s^2 (J^T W J)^-1 with s^2 the reduced chi-square when no standard
deviations are given [pub: Bevington & Robinson, Data Reduction and Error Analysis, 3rd ed.
(2003), ch. 8]; with given standard deviations s^2 = 1.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares


@dataclass(frozen=True)
class ExponentialFit:
    time_constant_s: float
    time_constant_sd_s: float
    amplitude: float
    amplitude_sd: float
    offset: float
    offset_sd: float
    residual_rms: float
    points: int

    def as_dict(self, name: str) -> dict[str, float]:
        """Keys '<name>_s', '<name>_sd_s', and the amplitude and offset of the fit."""
        return {f"{name}_s": self.time_constant_s, f"{name}_sd_s": self.time_constant_sd_s,
                "fit_amplitude": self.amplitude, "fit_amplitude_sd": self.amplitude_sd,
                "fit_offset": self.offset, "fit_offset_sd": self.offset_sd,
                "fit_residual_rms": self.residual_rms, "fit_points": self.points}


def _linear_at(t: np.ndarray, y: np.ndarray, w: np.ndarray, rate: float, offset: bool) -> tuple[np.ndarray, float]:
    e = np.exp(-rate * t)
    basis = np.stack([np.ones_like(t), e], axis=1) if offset else e[:, None]
    coef, *_ = np.linalg.lstsq(basis * w[:, None], y * w, rcond=None)
    resid = (basis @ coef - y) * w
    return coef, float(resid @ resid)


def fit_exponential(times_s: np.ndarray, values: np.ndarray, *, offset: bool = False,
                    sd: np.ndarray | None = None) -> ExponentialFit:
    """Fit y = c + a exp(-t/T) (c = 0 unless offset) to (times_s, values); see module docstring."""
    t = np.asarray(times_s, dtype=float)
    y = np.asarray(values, dtype=float)
    keep = np.isfinite(t) & np.isfinite(y)
    t, y = t[keep], y[keep]
    w = np.ones_like(y) if sd is None else 1.0 / np.asarray(sd, dtype=float)[keep]
    n_par = 3 if offset else 2
    if t.size < n_par + 1:
        raise ValueError(f"{t.size} usable point(s); an exponential fit with {n_par} parameters needs at least {n_par + 1}")
    span = float(t.max() - t.min())
    if span <= 0:
        raise ValueError("all points at the same time; the series needs distinct times")
    step = float(np.min(np.diff(np.unique(t)))) if np.unique(t).size > 1 else span
    rates = 1.0 / np.geomspace(step / 5.0, span * 20.0, 200)
    scores = [_linear_at(t, y, w, r, offset)[1] for r in rates]
    r0 = float(rates[int(np.argmin(scores))])
    coef0, _ = _linear_at(t, y, w, r0, offset)
    c0, a0 = (coef0[0], coef0[1]) if offset else (0.0, coef0[0])

    def model_jac(p: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        c, a, log_r = (p[0], p[1], p[2]) if offset else (0.0, p[0], p[1])
        r = math.exp(log_r)
        e = np.exp(-r * t)
        cols = ([np.ones_like(t)] if offset else []) + [e, -a * t * r * e]
        return c + a * e, np.stack(cols, axis=1)

    p0 = np.array([c0, a0, math.log(r0)] if offset else [a0, math.log(r0)])
    res = least_squares(lambda p: (model_jac(p)[0] - y) * w, p0, jac=lambda p: model_jac(p)[1] * w[:, None],
                        method="trf", x_scale="jac")
    model, jac = model_jac(res.x)
    resid = y - model
    dof = max(1, y.size - n_par)
    scale = float(((resid * w) @ (resid * w)) / dof) if sd is None else 1.0
    jw = jac * w[:, None]
    try:
        cov = np.linalg.inv(jw.T @ jw) * scale
    except np.linalg.LinAlgError:
        cov = np.full((n_par, n_par), np.nan)
    sds = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    log_r, log_r_sd = res.x[-1], sds[-1]
    time_constant = math.exp(-log_r)
    return ExponentialFit(
        time_constant_s=time_constant, time_constant_sd_s=time_constant * log_r_sd,
        amplitude=float(res.x[-2]), amplitude_sd=float(sds[-2]),
        offset=float(res.x[0]) if offset else 0.0, offset_sd=float(sds[0]) if offset else 0.0,
        residual_rms=float(np.sqrt(np.mean(resid**2))), points=int(y.size))
