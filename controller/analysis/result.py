"""The analysis result: the numbers a person or a store wants, and (optionally) what a plot needs.

Derived quantities:
- field B = f / (gamma / 2 pi), sd(B) = sd(f) / (gamma / 2 pi), gamma the chosen ratio in Hz/nT;
- T2* = 1 / r, sd(T2*) = sd(r) / r^2 (delta method);
- snr = A(t_d) / (sigma / sqrt(S)): the FID amplitude at the first usable sample,
  A(t_d) = A0 exp(-t_d / T2*), over the per-sample white-noise sd of the stack of S shots
  (sigma from the residual in the fit window, i.e. the noise density there over the whole
  Nyquist band); the quantity that sets the Cramer-Rao bound.
A record without a detected FID reports detected = false and no frequency, field, T2*,
amplitude or phase.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Any

import numpy as np

from controller.analysis.detection import Detection
from controller.analysis.linefit import LineFit
from controller.analysis.mains import MainsFit

if TYPE_CHECKING:
    from controller.analysis.display import DisplayData
    from controller.analysis.pipeline import AnalysisOptions, PreparedShot

FID_FIELDS = ("frequency_hz", "frequency_sd_hz", "field_nt", "field_sd_nt", "t2star_s", "t2star_sd_s",
              "amplitude", "amplitude_sd", "phase_rad", "snr", "shot_amplitudes", "shot_phases_rad")


@dataclass(frozen=True)
class AnalysisResult:
    detected: bool
    frequency_hz: float
    frequency_sd_hz: float
    field_nt: float
    field_sd_nt: float
    t2star_s: float
    t2star_sd_s: float
    amplitude: float  # at time zero, in the record's units
    amplitude_sd: float
    phase_rad: float  # at time zero, cosine phase
    snr: float
    noise_sd: float
    mains_hz: float | None
    mains_sd_hz: float | None
    dead_time_s: float
    sample_rate_hz: float
    gamma_hz_per_nt: float
    shots: int
    samples_used: int
    band_hz: tuple[float, float]
    channel: int
    reference_channels: tuple[int, ...]
    spikes_replaced: int
    blanking: str
    detection_statistic: float
    detection_threshold: float
    detection_reason: str
    fit_half_width_hz: float
    near_harmonics: tuple[int, ...]
    shot_amplitudes: tuple[float, ...]  # A0 of each shot
    shot_phases_rad: tuple[float, ...]  # phi0 of each shot (for phase-aligned stacking)
    display: "DisplayData | None" = field(default=None, repr=False, compare=False)

    def as_dict(self) -> dict[str, Any]:
        """JSON-ready fields; FID fields are None when nothing was detected; non-finite floats become None."""
        out: dict[str, Any] = {}
        for name in self.__dataclass_fields__:
            if name == "display":
                continue
            value = getattr(self, name)
            if name in FID_FIELDS and not self.detected:
                value = None
            if isinstance(value, tuple):
                value = [_finite_or_none(v) for v in value]
            value = _finite_or_none(value)
            out[name] = value
        return out


def _finite_or_none(value: Any) -> Any:
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(value) else None
    if isinstance(value, np.integer):
        return int(value)
    return value


def _mean_mains(mains: list[MainsFit | None]) -> tuple[float | None, float | None]:
    found = [m for m in mains if m is not None]
    if not found:
        return None, None
    f0 = float(np.mean([m.fundamental_hz for m in found]))
    sd = float(np.sqrt(np.mean([m.fundamental_sd_hz**2 for m in found]) / len(found)))
    return f0, sd


def build_result(prepared: "list[PreparedShot]", mains: list[MainsFit | None], fit: LineFit, decision: Detection,
                 options: "AnalysisOptions", gamma_hz_per_nt: float, display: bool) -> AnalysisResult:
    """Assemble the AnalysisResult (module docstring for the derived quantities)."""
    n_shots = len(prepared)
    mains_hz, mains_sd = _mean_mains(mains)
    dead_time = max(p.start_s for p in prepared)
    amp_at_start = float(np.mean([line.amplitude * math.exp(-fit.rate_per_s * p.start_s)
                                  for p, line in zip(prepared, fit.shots)]))
    stack_noise = fit.noise_sd / math.sqrt(n_shots)
    snr = amp_at_start / stack_noise if stack_noise > 0 else math.inf
    near = sorted({int(m) for line in fit.shots for m in line.near_harmonics})
    result = AnalysisResult(
        detected=decision.detected, frequency_hz=fit.frequency_hz, frequency_sd_hz=fit.frequency_sd_hz,
        field_nt=fit.frequency_hz / gamma_hz_per_nt, field_sd_nt=fit.frequency_sd_hz / gamma_hz_per_nt,
        t2star_s=fit.t2star_s, t2star_sd_s=fit.t2star_sd_s, amplitude=fit.amplitude, amplitude_sd=fit.amplitude_sd,
        phase_rad=fit.phase_rad, snr=snr, noise_sd=fit.noise_sd, mains_hz=mains_hz, mains_sd_hz=mains_sd,
        dead_time_s=dead_time, sample_rate_hz=prepared[0].sample_rate_hz, gamma_hz_per_nt=gamma_hz_per_nt,
        shots=n_shots, samples_used=int(sum(p.n_samples for p in prepared)), band_hz=tuple(options.band_hz),
        channel=options.channel, reference_channels=tuple(options.reference_channels),
        spikes_replaced=int(sum(p.spikes_replaced for p in prepared)),
        blanking=",".join(sorted({p.blanking.reason for p in prepared})),
        detection_statistic=decision.statistic, detection_threshold=decision.threshold,
        detection_reason=decision.reason, fit_half_width_hz=fit.half_width_hz, near_harmonics=tuple(near),
        shot_amplitudes=tuple(line.amplitude for line in fit.shots),
        shot_phases_rad=tuple(line.phase_rad for line in fit.shots))
    if not display:
        return result
    from controller.analysis.display import build_display

    return replace(result, display=build_display(prepared, mains, fit, options))
