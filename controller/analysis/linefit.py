"""Joint fit of the FID with the interference next to it, over one or more shots.

Model on the DFT bins k within +/-W of the line, for shot s (dtft module for P, Q):

    X_sk = a_s P_k(f, r) + b_s Q_k(f, r)                     the FID, c_s = a_s - i b_s
         + sum_{m near} (a_sm P_k(m f0, 0) + b_sm Q_k(m f0, 0))  mains harmonics within W
         + sum_j (h_sj + h'_sj (f_k - f_c) / W) R_sjk            reference channels (local
                                                                 multichannel Wiener)
         + H_sk                                                  far harmonics (fixed)

with (f, r = 1/T2*) shared by all shots and every other coefficient per shot, so the shots
need not share amplitude or phase: stacking with phase alignment is built into the model.
The fit is maximum likelihood for white Gaussian noise (real and imaginary parts of each
bin independent, equal variance).  (f, r) are found by variable projection (Golub &
Pereyra, SIAM J. Numer. Anal. 10:413 (1973); Kaufman's Jacobian, BIT 15:49 (1975)): for
given (f, r) the linear coefficients are solved per shot, and the Gauss-Newton step uses the
Jacobian J_s projected off the shot's linear columns B_s.  Covariances, with s^2 the
residual variance per real component (after each shot is weighted by its own noise):

    C_theta = s^2 (sum_s J_perp,s^T J_perp,s)^-1,
    C_beta_s = s^2 (B_s^T B_s)^-1 + K_s C_theta K_s^T,   C_beta_s,theta = -K_s C_theta,
    K_s = B_s^+ J_s,

the exact blocks of s^2 (J^T J)^-1 for the full parameter vector (Schur complement).  A
shot's amplitude at time zero A0 = |c_s| exp(r t_s) and phase phi0 = arg c_s - 2 pi f t_s
(t_s the shot's first usable sample after time zero) follow by the delta method.

Public: `ShotSpectrum`, `LineFit`, `ShotLine`, `fit_line`, `fid_spectrum`, `window_half_width_hz`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from controller.analysis.dtft import line_columns, line_columns_with_derivatives
from controller.analysis.mains import MainsFit, mains_spectrum

MIN_HALF_WIDTH_HZ = 30.0
MIN_HALF_WIDTH_BINS = 24
LINEWIDTHS_IN_WINDOW = 20.0
RATE_START_FACTORS = (0.05, 0.2, 0.7, 2.0, 6.0, 20.0)
MAX_ITERATIONS = 40


@dataclass(frozen=True)
class ShotSpectrum:
    """One shot as the fit sees it: the DFT of its usable window and what else is known."""

    spectrum: np.ndarray  # rfft of the signal channel's usable window
    n_samples: int
    sample_rate_hz: float
    start_s: float  # first usable sample, seconds after time zero
    mains: MainsFit | None = None
    references: tuple[np.ndarray, ...] = ()  # rfft of each reference channel, same window


@dataclass(frozen=True)
class ShotLine:
    """Per-shot part of a LineFit."""

    amplitude: float  # A0 at time zero
    amplitude_sd: float
    phase_rad: float  # phi0 at time zero
    noise_sd: float  # per-sample white-noise sd implied by the bins' residual
    coefficients: np.ndarray  # linear coefficients at the window start: a, b, then nuisances
    near_harmonics: np.ndarray  # harmonic numbers fitted jointly
    bins: np.ndarray
    residual: np.ndarray  # complex, on bins (unweighted)
    fid_model: np.ndarray  # complex, on bins
    nuisance_model: np.ndarray  # complex, on bins: near harmonics + references + far harmonics


@dataclass(frozen=True)
class LineFit:
    frequency_hz: float
    frequency_sd_hz: float
    rate_per_s: float
    rate_sd_per_s: float
    amplitude: float  # mean A0 over shots
    amplitude_sd: float
    phase_rad: float  # phase of the sum of the shots' c0
    noise_sd: float  # rms of the shots' per-sample noise sd
    detection_statistic: float  # (RSS without FID - RSS) / s^2
    degrees_of_freedom: int
    half_width_hz: float
    iterations: int
    shots: tuple[ShotLine, ...] = field(default=())

    @property
    def t2star_s(self) -> float:
        return 1.0 / self.rate_per_s if self.rate_per_s > 0 else math.inf

    @property
    def t2star_sd_s(self) -> float:
        return self.rate_sd_per_s / self.rate_per_s**2 if self.rate_per_s > 0 else math.inf


def _real(z: np.ndarray) -> np.ndarray:
    """Stack real and imaginary parts along the first axis: [Re z; Im z]."""
    return np.concatenate([z.real, z.imag], axis=0)


@dataclass
class _Shot:
    data: ShotSpectrum
    bins: np.ndarray
    y: np.ndarray  # real-stacked target (spectrum minus far harmonics), weighted
    nuisance: np.ndarray  # real-stacked nuisance columns, weighted (2M x L)
    fixed: np.ndarray  # complex far-harmonic spectrum on bins
    near: np.ndarray
    weight: float
    q_nuisance: np.ndarray  # orthonormal basis of the nuisance columns
    y_perp: np.ndarray  # y with the nuisance part projected out


@dataclass
class _Eval:
    """One shot at one (f, r): FID coefficients, weighted residual, FID columns, Jacobians."""

    fid_coef: np.ndarray
    res: np.ndarray
    fid_cols: np.ndarray
    jac: np.ndarray | None  # d(model)/d(f, r), weighted, not projected
    jac_perp: np.ndarray | None  # projected off the FID and nuisance columns


def _prepare(shot: ShotSpectrum, centre_hz: float, half_width_hz: float, weight: float) -> _Shot:
    df = shot.sample_rate_hz / shot.n_samples
    k_lo = max(1, int(math.ceil((centre_hz - half_width_hz) / df)))
    k_hi = min(shot.spectrum.size - 2, int(math.floor((centre_hz + half_width_hz) / df)))
    bins = np.arange(k_lo, k_hi + 1)
    cols: list[np.ndarray] = []
    near = np.zeros(0, dtype=int)
    fixed = np.zeros(bins.size, dtype=complex)
    if shot.mains is not None and shot.mains.harmonics.size:
        freqs = shot.mains.frequencies_hz()
        is_near = np.abs(freqs - centre_hz) <= half_width_hz + 2 * df
        near = shot.mains.harmonics[is_near]
        fixed = mains_spectrum(bins, shot.n_samples, shot.sample_rate_hz, shot.mains.without(~is_near))
        if near.size:
            p, q = line_columns(bins, shot.n_samples, shot.sample_rate_hz, freqs[is_near], np.zeros(near.size))
            for pm, qm in zip(p, q):
                cols += [_real(pm), _real(qm)]
    slope = (bins * df - centre_hz) / half_width_hz
    for ref in shot.references:
        r = ref[bins]
        cols += [_real(r), _real(1j * r), _real(r * slope), _real(1j * r * slope)]
    nuisance = (np.stack(cols, axis=1) if cols else np.zeros((2 * bins.size, 0))) * weight
    y = _real(shot.spectrum[bins] - fixed) * weight
    q_n = np.linalg.qr(nuisance)[0] if cols else np.zeros((2 * bins.size, 0))
    return _Shot(shot, bins, y, nuisance, fixed, near, weight, q_n, y - q_n @ (q_n.T @ y))


def _project_off(q: np.ndarray, x: np.ndarray) -> np.ndarray:
    return x - q @ (q.T @ x) if q.shape[1] else x


def _evaluate(shots: list[_Shot], f: float, r: float, with_jacobian: bool) -> list[_Eval]:
    """Variable projection per shot: nuisance projected out first, then the FID's two columns."""
    out = []
    for s in shots:
        d = s.data
        if with_jacobian:
            p, q, pf, qf, pr, qr = line_columns_with_derivatives(s.bins, d.n_samples, d.sample_rate_hz, f, r)
        else:
            p, q = line_columns(s.bins, d.n_samples, d.sample_rate_hz, f, r)
        fid_cols = np.stack([_real(p), _real(q)], axis=1) * s.weight
        fp = _project_off(s.q_nuisance, fid_cols)
        gram = fp.T @ fp
        coef = np.linalg.solve(gram, fp.T @ s.y_perp)
        res = s.y_perp - fp @ coef
        jac = jac_perp = None
        if with_jacobian:
            a, b = coef
            jac = np.stack([_real(a * pf + b * qf), _real(a * pr + b * qr)], axis=1) * s.weight
            j1 = _project_off(s.q_nuisance, jac)
            jac_perp = j1 - fp @ np.linalg.solve(gram, fp.T @ j1)
        out.append(_Eval(coef, res, fid_cols, jac, jac_perp))
    return out


def _rss(evaluated: list[_Eval]) -> float:
    return float(sum(e.res @ e.res for e in evaluated))


def _gauss_newton(shots: list[_Shot], f: float, r: float, df_max: float, rate_floor: float) -> tuple[float, float, int]:
    """Levenberg-Marquardt on (f, r) with the variable-projection Jacobian; returns (f, r, iterations)."""
    lam = 1e-3
    current = _evaluate(shots, f, r, True)
    rss = _rss(current)
    it = 0
    for it in range(1, MAX_ITERATIONS + 1):
        jtj = sum(e.jac_perp.T @ e.jac_perp for e in current)
        jtr = sum(e.jac_perp.T @ e.res for e in current)
        scale = np.sqrt(np.maximum(np.diag(jtj), 1e-300))
        accepted, done = False, False
        while lam < 1e10:
            step = np.linalg.solve(jtj / np.outer(scale, scale) + lam * np.eye(2), jtr / scale) / scale
            f_new = f + float(np.clip(step[0], -df_max, df_max))
            r_new = max(rate_floor, r + float(step[1]))
            trial = _evaluate(shots, f_new, r_new, True)
            rss_new = _rss(trial)
            if rss_new <= rss:
                accepted = True
                done = abs(f_new - f) < 1e-6 * df_max and abs(r_new - r) < 1e-6 * max(abs(r), 1.0)
                f, r, current, rss = f_new, r_new, trial, rss_new
                lam = max(lam / 10.0, 1e-9)
                break
            lam *= 10.0
        if not accepted or done:
            break
    return f, r, it


def _start_rate(shots: list[_Shot], f: float, record_s: float) -> float:
    """Best of a few rates r on a geometric grid around 1/T (variable-projection RSS)."""
    candidates = [k / record_s for k in RATE_START_FACTORS] + [k * 10.0 / record_s for k in (5.0, 20.0)]
    scores = [_rss(_evaluate(shots, f, r, False)) for r in candidates]
    return candidates[int(np.argmin(scores))]


def _full(s: _Shot, e: _Eval) -> tuple[np.ndarray, np.ndarray]:
    """(all linear coefficients, all columns) of a shot: FID first, then the nuisance."""
    basis = np.concatenate([e.fid_cols, s.nuisance], axis=1)
    if s.nuisance.shape[1]:
        nuis, *_ = np.linalg.lstsq(s.nuisance, s.y - e.fid_cols @ e.fid_coef, rcond=None)
        return np.concatenate([e.fid_coef, nuis]), basis
    return np.array(e.fid_coef), basis


def _shot_line(s: _Shot, coef: np.ndarray, res: np.ndarray, basis: np.ndarray, jac: np.ndarray, f: float, r: float,
               cov_theta: np.ndarray, s2: float, n_shots: int) -> tuple[ShotLine, np.ndarray, np.ndarray]:
    d = s.data
    m = s.bins.size
    pinv = np.linalg.pinv(basis)
    k = pinv @ jac
    cov_beta = s2 * (pinv @ pinv.T) + k @ cov_theta @ k.T
    a, b = coef[0], coef[1]
    mag = math.hypot(a, b)
    growth = math.exp(r * d.start_s)
    amp0 = mag * growth
    # gradient of A0 with respect to (a, b) and (f, r)
    g_beta = np.zeros(coef.size)
    if mag > 0:
        g_beta[:2] = np.array([a, b]) / mag * growth
    g_theta = np.array([0.0, d.start_s * amp0])
    cross = -k @ cov_theta
    var = g_beta @ cov_beta @ g_beta + 2 * g_beta @ cross @ g_theta + g_theta @ cov_theta @ g_theta
    phase = math.atan2(-b, a) - 2 * math.pi * f * d.start_s
    fid_cols = basis[:, :2] / s.weight
    fid_model = fid_cols[:m] @ coef[:2] + 1j * (fid_cols[m:] @ coef[:2])
    nuis = basis[:, 2:] / s.weight
    nuisance_model = nuis[:m] @ coef[2:] + 1j * (nuis[m:] @ coef[2:]) + s.fixed
    res_c = (res[:m] + 1j * res[m:]) / s.weight
    dof = max(1.0, 2 * m - coef.size - 2.0 / n_shots)
    # per real component var = N sigma^2 / 2, so sigma^2 = 2 RSS / (dof N)
    noise_sd = math.sqrt(2.0 * float(np.sum(np.abs(res_c) ** 2)) / dof / d.n_samples)
    line = ShotLine(amp0, math.sqrt(max(var, 0.0)), math.atan2(math.sin(phase), math.cos(phase)), noise_sd,
                    np.array(coef), s.near, s.bins, res_c, fid_model, nuisance_model)
    return line, g_beta, k


def window_half_width_hz(shots: list[ShotSpectrum], rate: float) -> float:
    """W = max(30 Hz, 24 bins, 20 Lorentzian half-widths r / (2 pi)) for the shots' coarsest bin spacing."""
    df = max(s.sample_rate_hz / s.n_samples for s in shots)
    linewidth_hz = max(rate, 0.0) / (2 * math.pi)
    return max(MIN_HALF_WIDTH_HZ, MIN_HALF_WIDTH_BINS * df, LINEWIDTHS_IN_WINDOW * linewidth_hz)


def fit_line(shots: list[ShotSpectrum], frequency_start_hz: float, rate_start_per_s: float | None = None,
             weights: list[float] | None = None) -> LineFit:
    """Fit (f, r) and every shot's coefficients near frequency_start_hz (module docstring).

    The window half-width W is max(30 Hz, 24 bins, 20 half-widths r/(2 pi)); the fit is
    repeated once when the fitted r asks for a wider window.  weights (1/noise sd per shot)
    default to 1.
    """
    if not shots:
        raise ValueError("no shots to fit")
    weights = list(weights) if weights is not None else [1.0] * len(shots)
    record_s = max(s.n_samples / s.sample_rate_hz for s in shots)
    df = max(s.sample_rate_hz / s.n_samples for s in shots)
    f, r = float(frequency_start_hz), rate_start_per_s
    half_width = window_half_width_hz(shots, r if r is not None else 0.0)
    iterations = 0
    for _ in range(2):
        prepared = [_prepare(s, f, half_width, w) for s, w in zip(shots, weights)]
        if r is None:
            r = _start_rate(prepared, f, record_s)
        f, r, it = _gauss_newton(prepared, f, r, df_max=0.5 * df, rate_floor=-2.0 / record_s)
        iterations += it
        wanted = window_half_width_hz(shots, r)
        if wanted <= half_width * 1.25:
            break
        half_width = wanted
    evaluated = _evaluate(prepared, f, r, True)
    full = [_full(s, e) for s, e in zip(prepared, evaluated)]
    rss = _rss(evaluated)
    n_params = 2 + sum(basis.shape[1] for _, basis in full)
    dof = max(1, sum(e.res.size for e in evaluated) - n_params)
    s2 = rss / dof
    jtj = sum(e.jac_perp.T @ e.jac_perp for e in evaluated)
    rss_null = float(sum(s.y_perp @ s.y_perp for s in prepared))
    cov_theta = s2 * np.linalg.pinv(jtj)
    lines, grads, ks = [], [], []
    for (coef, basis), e, s in zip(full, evaluated, prepared):
        line, g, k = _shot_line(s, coef, e.res, basis, e.jac, f, r, cov_theta, s2, len(prepared))
        lines.append(line)
        grads.append(g)
        ks.append(k)
    n = len(lines)
    amplitude = float(np.mean([ln.amplitude for ln in lines]))
    # var(mean A0): per-shot terms plus the terms all shots share through (f, r)
    g_theta = np.array([0.0, np.mean([s.data.start_s * ln.amplitude for s, ln in zip(prepared, lines)])])
    shared = g_theta - sum(g @ k for g, k in zip(grads, ks)) / n
    own = sum(s2 * float(g @ np.linalg.pinv(basis) @ np.linalg.pinv(basis).T @ g)
              for g, (_, basis) in zip(grads, full)) / n**2
    amplitude_var = own + float(shared @ cov_theta @ shared)
    resultant = sum(ln.amplitude * complex(math.cos(ln.phase_rad), math.sin(ln.phase_rad)) for ln in lines)
    return LineFit(
        frequency_hz=f, frequency_sd_hz=math.sqrt(max(cov_theta[0, 0], 0.0)),
        rate_per_s=r, rate_sd_per_s=math.sqrt(max(cov_theta[1, 1], 0.0)),
        amplitude=amplitude, amplitude_sd=math.sqrt(max(amplitude_var, 0.0)),
        phase_rad=math.atan2(resultant.imag, resultant.real),
        noise_sd=math.sqrt(float(np.mean([ln.noise_sd**2 for ln in lines]))),
        detection_statistic=(rss_null - rss) / s2, degrees_of_freedom=dof, half_width_hz=half_width,
        iterations=iterations, shots=tuple(lines))


def fid_spectrum(bins: np.ndarray, n_samples: int, sample_rate_hz: float, frequency_hz: float, rate_per_s: float,
                 coefficients: np.ndarray) -> np.ndarray:
    """DFT of the fitted FID (coefficients a, b at the window start) on any bins: a P + b Q."""
    p, q = line_columns(np.asarray(bins), n_samples, sample_rate_hz, frequency_hz, rate_per_s)
    return coefficients[0] * p + coefficients[1] * q
