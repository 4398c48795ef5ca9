"""Analyse a run by its sequence kind: the fitted quantity with its uncertainty, and the details.

Every result is a plain dict (JSON-ready) holding the kind, a `headline` {quantity, value,
sd, unit, text} - the one number a practitioner came for - and the arrays behind it.

    fid          field (and f, T2*) from the stacked FID                  fid_entry
    echo         echo amplitude (one TE) or T2 from amplitude vs TE        echoes + relaxation
    cpmg         T2 from the echo train                                    echoes + relaxation
    t1-polarise  T1 at the polarising field, amplitude vs polarising time  series + relaxation
    t1-earth     T1 in the Earth's field, amplitude vs delay               series + relaxation
    nutation     90 deg pulse and B1 per volt                               series + nutation
    noise        input-referred noise density, mains lines                  noise
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from controller.analysis import noise as noise_analysis
from controller.analysis.cleaning import cleaned_shots
from controller.analysis.demodulate import principal_axis_projection
from controller.analysis.echoes import echo_table
from controller.analysis.fid_entry import analyse_fid_shots, fid_shot
from controller.analysis.nutation import b1_rot_per_volt, fit_nutation
from controller.analysis.relaxation import fit_exponential
from controller.analysis.pipeline import DEFAULT_BAND_HZ
from controller.analysis.series import series_amplitudes
from controller.analysis.shots import ShotLike, channel, good_shots
from controller.sequences.timeline import Pulse, Timeline


@dataclass(frozen=True)
class AnalysisContext:
    """What the analysis needs from the rig: the receive chain (to refer amplitudes to the input)."""

    gain: float = 1.0
    highpass_hz: float = 0.0
    mains_hz: float = 50.0
    full_scale_v: float | None = None  # the converter's full scale (overload blanking)
    clean: bool = True  # hum, spikes and reference pickup removed before amplitudes (cleaning module)


def prepared_shots(timeline: Timeline, shots: list[ShotLike], ctx: AnalysisContext) -> list[ShotLike]:
    """The good shots, cleaned like the FID pipeline cleans its records (cleaning.cleaned_shots) unless ctx.clean is off."""
    if not ctx.clean:
        return shots
    return cleaned_shots(timeline, shots, fid_band(timeline), ctx.mains_hz)


def fid_band(timeline: Timeline) -> tuple[float, float]:
    """+/-20 % around the timeline's Larmor frequency, else the Earth's-field band."""
    f = timeline.larmor_hz
    return (0.8 * f, 1.2 * f) if f else DEFAULT_BAND_HZ


def _input_v(adc_v: float, frequency_hz: float, ctx: AnalysisContext) -> float:
    """ADC volts -> volts at the coil: divide by G |H(f)|."""
    response = ctx.gain * float(noise_analysis.highpass_magnitude(np.array([frequency_hz]), ctx.highpass_hz)[0])
    return adc_v / response


def headline(quantity: str, value: float | None, sd: float | None, unit: str, text: str) -> dict[str, Any]:
    return {"quantity": quantity, "value": value, "sd": sd, "unit": unit, "text": text}


def _pm(value: float, sd: float, scale: float, unit: str, digits: int = 3) -> str:
    return f"{value * scale:.{digits}f} +/- {sd * scale:.{digits}f} {unit}"


# ---- kinds ---------------------------------------------------------------------------------
def analyse_fid(timeline: Timeline, spec: Any, shots: list[ShotLike], ctx: AnalysisContext) -> dict[str, Any]:
    data = [fid_shot(plan, shot, ctx.full_scale_v) for plan, shot in good_shots(timeline, shots)]
    if not data:
        raise ValueError("no usable shots")
    r = analyse_fid_shots(data, fid_band(timeline))
    r["headline"] = fid_headline(r)
    return r


def fid_headline(r: dict[str, Any]) -> dict[str, Any]:
    """The field with f, T2* and SNR; or why there is no FID."""
    if not r["detected"]:
        return headline("field", None, None, "nT", f"no FID detected ({r['detection_reason']})")
    return headline("field", r["field_nt"], r["field_sd_nt"], "nT",
                    f"f = {_pm(r['frequency_hz'], r['frequency_sd_hz'], 1, 'Hz', 4)}, "
                    f"B = {_pm(r['field_nt'], r['field_sd_nt'], 1, 'nT', 2)}, "
                    f"T2* = {_pm(r['t2star_s'], r['t2star_sd_s'], 1, 's')}, SNR {r['snr']:.1f}")


def analyse_echo(timeline: Timeline, spec: Any, shots: list[ShotLike], ctx: AnalysisContext) -> dict[str, Any]:
    table = echo_table(timeline, prepared_shots(timeline, shots, ctx), spec.echo_window_s)
    signed, axis = principal_axis_projection(table.amplitudes[:, 0])
    r: dict[str, Any] = {"echo_times_s": table.values.tolist(), "echo_amplitudes_v": signed.tolist(),
                         "shots_per_point": table.shots.tolist(), "transmit_frequency_hz": table.frequency_hz,
                         "phase_rad": axis, "echo_window_s": spec.echo_window_s}
    if len(table.values) == 1:
        amplitude, sd = float(signed[0]), float(table.noise_sd[0, 0])
        uv = 1e6 * _input_v(1.0, table.frequency_hz, ctx)
        r.update(echo_time_s=float(table.values[0]), echo_amplitude_v=amplitude, echo_amplitude_sd_v=sd,
                 echo_amplitude_input_uv=amplitude * uv, echo_amplitude_input_sd_uv=sd * uv)
        r["headline"] = headline("echo amplitude", amplitude * uv, sd * uv, "uV",
                                 f"echo at TE = {table.values[0]:.4f} s: {_pm(amplitude * uv, sd * uv, 1, 'uV', 4)} "
                                 f"at the coil (averaged over {spec.echo_window_s * 1e3:g} ms)")
        return r
    fit = fit_exponential(table.values, signed)
    r.update(fit.as_dict("t2"))
    r["headline"] = headline("T2", fit.time_constant_s, fit.time_constant_sd_s, "s",
                             f"T2 = {_pm(fit.time_constant_s, fit.time_constant_sd_s, 1, 's')} "
                             f"(Hahn echoes at {len(table.values)} echo times)")
    return r


def analyse_cpmg(timeline: Timeline, spec: Any, shots: list[ShotLike], ctx: AnalysisContext) -> dict[str, Any]:
    table = echo_table(timeline, prepared_shots(timeline, shots, ctx), spec.echo_window_s)
    signed, axis = principal_axis_projection(table.amplitudes[0])
    values = signed if spec.variant == "cpmg" else np.abs(signed)
    fit = fit_exponential(table.echo_times_s[0], values)
    r: dict[str, Any] = {"variant": spec.variant, "echo_times_s": table.echo_times_s[0].tolist(),
                         "echo_amplitudes_v": signed.tolist(), "shots": int(table.shots[0]),
                         "transmit_frequency_hz": table.frequency_hz, "phase_rad": axis, **fit.as_dict("t2")}
    label = "CPMG" if spec.variant == "cpmg" else "CP, magnitudes"
    r["headline"] = headline("T2", fit.time_constant_s, fit.time_constant_sd_s, "s",
                             f"T2 = {_pm(fit.time_constant_s, fit.time_constant_sd_s, 1, 's')} "
                             f"({label}, {len(values)} echoes, {spec.echo_spacing_s * 1e3:g} ms spacing)")
    return r


def _series(timeline: Timeline, shots: list[ShotLike], ctx: AnalysisContext) -> tuple[Any, np.ndarray, dict[str, Any]]:
    amps = series_amplitudes(timeline, prepared_shots(timeline, shots, ctx), fid_band(timeline))
    signed, axis = principal_axis_projection(amps.amplitudes)
    details = {"series": timeline.series_name, "series_unit": timeline.series_unit, "values": amps.values.tolist(),
               "amplitudes_v": signed.tolist(), "amplitude_sd_v": amps.amplitude_sd.tolist(),
               "shots_per_point": amps.shots.tolist(), "frequency_hz": amps.frequency_hz,
               "t2star_s": amps.t2star_s, "phase_rad": axis}
    return amps, signed, details


def _t1(timeline: Timeline, shots: list[ShotLike], ctx: AnalysisContext, where: str, unit_name: str) -> dict[str, Any]:
    """T1 from y = c + a exp(-x/T1) over the series (relaxation.fit_exponential with an offset)."""
    amps, signed, r = _series(timeline, shots, ctx)
    fit = fit_exponential(amps.values, signed, offset=True)
    r.update(fit.as_dict("t1"))
    r["headline"] = headline("T1", fit.time_constant_s, fit.time_constant_sd_s, "s",
                             f"T1 = {_pm(fit.time_constant_s, fit.time_constant_sd_s, 1, 's')} {where} "
                             f"({len(signed)} {unit_name})")
    return r


def analyse_t1_polarise(timeline: Timeline, spec: Any, shots: list[ShotLike], ctx: AnalysisContext) -> dict[str, Any]:
    return _t1(timeline, shots, ctx, "at the polarising field", "polarising times")


def analyse_t1_earth(timeline: Timeline, spec: Any, shots: list[ShotLike], ctx: AnalysisContext) -> dict[str, Any]:
    return _t1(timeline, shots, ctx, "in the Earth's field", "delays")


def analyse_nutation(timeline: Timeline, spec: Any, shots: list[ShotLike], ctx: AnalysisContext) -> dict[str, Any]:
    amps, signed, r = _series(timeline, shots, ctx)
    fit = fit_nutation(amps.values, signed)
    pulse = next(p for plan in timeline.shots for p in plan.of_kind(Pulse))
    if timeline.series_unit == "s":
        t90, t90_sd, amplitude = fit.x90, fit.x90_sd, pulse.amplitude_v
    else:
        t90, t90_sd, amplitude = pulse.duration_s, 0.0, fit.x90
    b1 = b1_rot_per_volt(t90, amplitude)
    b1_sd = b1 * fit.x90_sd / fit.x90
    r.update(pulse_90_s=t90, pulse_90_sd_s=t90_sd, amplitude_90_v=amplitude,
             amplitude_90_sd_v=fit.x90_sd if timeline.series_unit == "V" else 0.0,
             b1_rot_t_per_v=b1, b1_rot_sd_t_per_v=b1_sd, b1_linear_t_per_v=2 * b1, b1_linear_sd_t_per_v=2 * b1_sd,
             transmit_frequency_hz=pulse.frequency_hz, fit_amplitude=fit.amplitude, fit_residual_rms=fit.residual_rms)
    if timeline.series_unit == "s":
        text = f"90 deg pulse = {_pm(t90, t90_sd, 1e3, 'ms')} at {amplitude:g} V"
        r["headline"] = headline("90 deg pulse length", t90, t90_sd, "s", text)
    else:
        text = f"90 deg pulse at {t90 * 1e3:g} ms needs {_pm(amplitude, fit.x90_sd, 1, 'V', 4)}"
        r["headline"] = headline("90 deg pulse amplitude", amplitude, fit.x90_sd, "V", text)
    r["headline"]["text"] += f"; B1 = {_pm(2 * b1, 2 * b1_sd, 1e6, 'uT/V')} (linear; rotating half {b1 * 1e6:.3f})"
    return r


def analyse_noise(timeline: Timeline, spec: Any, shots: list[ShotLike], ctx: AnalysisContext) -> dict[str, Any]:
    from controller.sequences.noise import noise_band_hz

    band = noise_band_hz(spec, timeline.larmor_hz)
    pairs = good_shots(timeline, shots)
    if not pairs:
        raise ValueError("no usable records")
    fs = timeline.sample_rate_hz
    records = [channel(s)[s.acquire_start_sample:s.acquire_start_sample + s.acquire_samples] for _, s in pairs]
    spectrum = noise_analysis.input_referred_psd(records, fs, ctx.gain, ctx.highpass_hz)
    fundamental = noise_analysis.mains_fundamental_hz(records, fs, ctx.mains_hz)
    density, density_sd, bins = noise_analysis.band_density(spectrum, band, fundamental)
    lines = noise_analysis.mains_lines(records, fs, fundamental, ctx.gain, ctx.highpass_hz,
                                       min(fs / 2 * 0.9, max(band[1] + 200.0, 1000.0)))
    strongest = sorted(lines, key=lambda x: -x["amplitude_v"])[:10]
    in_band = [x for x in lines if band[0] <= x["frequency_hz"] <= band[1]]
    f = spectrum.frequencies_hz
    shown = (f >= band[0]) & (f <= band[1])
    r: dict[str, Any] = {"records": len(records), "band_hz": list(band), "density_nv_per_rthz": density * 1e9,
                         "spectrum_frequencies_hz": f[shown].tolist(),
                         "spectrum_nv_per_rthz": (np.sqrt(spectrum.psd_v2_per_hz[shown]) * 1e9).tolist(),
                         "density_sd_nv_per_rthz": density_sd * 1e9, "density_bins": bins,
                         "mains_fundamental_hz": fundamental,
                         "mains_lines_strongest": [{**x, "amplitude_nv": x["amplitude_v"] * 1e9} for x in strongest],
                         "mains_lines_in_band": [{**x, "amplitude_nv": x["amplitude_v"] * 1e9} for x in in_band]}
    references = [channel(s, "reference")[s.acquire_start_sample:s.acquire_start_sample + s.acquire_samples]
                  for _, s in pairs if "reference" in s.channel_names]
    if references:
        r["reference_coherence_in_band"] = noise_analysis.reference_coherence(records, references, fs, band)
    r["headline"] = headline("noise density", density * 1e9, density_sd * 1e9, "nV/sqrt(Hz)",
                             f"noise {_pm(density, density_sd, 1e9, 'nV/sqrt(Hz)', 2)} at the input in "
                             f"{band[0]:.0f}-{band[1]:.0f} Hz; mains {fundamental:.3f} Hz, strongest line "
                             f"{strongest[0]['harmonic']}x at {strongest[0]['amplitude_v'] * 1e9:.1f} nV"
                             if strongest else f"noise {_pm(density, density_sd, 1e9, 'nV/sqrt(Hz)', 2)}")
    return r


ANALYSES: dict[str, Callable[[Timeline, Any, list[ShotLike], AnalysisContext], dict[str, Any]]] = {
    "fid": analyse_fid, "echo": analyse_echo, "cpmg": analyse_cpmg, "t1-polarise": analyse_t1_polarise,
    "t1-earth": analyse_t1_earth, "nutation": analyse_nutation, "noise": analyse_noise,
}


def analyse_run(timeline: Timeline, spec: Any, shots: list[ShotLike], ctx: AnalysisContext | None = None) -> dict[str, Any]:
    """The result of a run of any kind (see module docstring).  Raises ValueError when it cannot be fitted."""
    analysis = ANALYSES.get(timeline.sequence_kind)
    if analysis is None:
        raise ValueError(f"no analysis for sequence kind {timeline.sequence_kind!r}")
    result = analysis(timeline, spec, shots, ctx or AnalysisContext())
    return {"kind": timeline.sequence_kind, **result}


def finite_or_none(value: Any) -> Any:
    """JSON cleaning: nan/inf become None, recursively through lists and dicts; numpy scalars become floats."""
    if isinstance(value, dict):
        return {k: finite_or_none(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [finite_or_none(v) for v in value]
    if isinstance(value, (np.floating, float)):
        return float(value) if math.isfinite(value) else None
    if isinstance(value, np.integer):
        return int(value)
    return value
