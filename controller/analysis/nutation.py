"""Nutation curve: signed FID amplitude against pulse length (or amplitude) -> 90 deg pulse, B1 per volt.

On resonance a rectangular pulse turns M by theta = gamma B1_rot t, and the FID after it has
the amplitude y = A sin(theta).  With x the stepped quantity (length t or amplitude a),

    y = A sin(pi/2 * x / x90),

fitted for A (either sign) and x90 by least squares, started from a grid over x90 with A
solved linearly; sd(x90) from s^2 (J^T J)^-1, s^2 the residual variance [pub: Bevington &
Robinson (2003), ch. 8].  Then (REFERENCE.md: t90 = pi / (2 gamma B1_rot)):

    B1_rot per volt = pi / (2 gamma t90 a)      (length series at amplitude a)
                    = pi / (2 gamma t a90)      (amplitude series at length t)

and the linear transmit field per volt is twice B1_rot (B1_rot is its co-rotating half).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

from controller.physics.constants import GAMMA_SHIELDED_RAD_PER_S_T


@dataclass(frozen=True)
class NutationFit:
    x90: float
    x90_sd: float
    amplitude: float
    amplitude_sd: float
    residual_rms: float


def _model_jac(p: np.ndarray, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    a, x90 = p
    phase = 0.5 * math.pi * x / x90
    s = np.sin(phase)
    return a * s, np.stack([s, -a * np.cos(phase) * phase / x90], axis=1)


def fit_nutation(x: np.ndarray, y: np.ndarray) -> NutationFit:
    """Fit y = A sin(pi/2 x / x90) to signed amplitudes y at stepped values x (> 0)."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    keep = np.isfinite(x) & np.isfinite(y)
    x, y = x[keep], y[keep]
    if x.size < 3:
        raise ValueError(f"{x.size} usable point(s); a nutation fit needs at least 3")
    grid = np.geomspace(x.max() / 16.0, x.max() * 4.0, 400)
    best, best_score = grid[0], math.inf
    for x90 in grid:
        s = np.sin(0.5 * math.pi * x / x90)
        denom = float(s @ s)
        if denom <= 0:
            continue
        a = float(s @ y) / denom
        score = float(((a * s - y) ** 2).sum())
        if score < best_score:
            best, best_score = x90, score
    s = np.sin(0.5 * math.pi * x / best)
    p0 = np.array([float(s @ y) / float(s @ s), best])
    res = least_squares(lambda p: _model_jac(p, x)[0] - y, p0, jac=lambda p: _model_jac(p, x)[1], method="lm")
    model, jac = _model_jac(res.x, x)
    resid = y - model
    sigma2 = float(resid @ resid) / max(1, x.size - 2)
    try:
        cov = np.linalg.inv(jac.T @ jac) * sigma2
    except np.linalg.LinAlgError:
        cov = np.full((2, 2), np.nan)
    sds = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    return NutationFit(x90=float(abs(res.x[1])), x90_sd=float(sds[1]), amplitude=float(abs(res.x[0])),
                       amplitude_sd=float(sds[0]), residual_rms=float(np.sqrt(np.mean(resid**2))))


def b1_rot_per_volt(pulse_90_s: float, amplitude_v: float) -> float:
    """B1_rot / a = pi / (2 gamma t90 a), in tesla per volt of transmit amplitude."""
    return math.pi / (2.0 * GAMMA_SHIELDED_RAD_PER_S_T * pulse_90_s * amplitude_v)
