"""One run, end to end, as `precess run` and the scheduler both do it.

prepare_run:  load the sequence, pick the pulse frequency (given in the spec, the last
              measurement in the store, or the site's predicted field), load the pulse
              calibration, compile (pure).
finish_run:   analyse the stored shots by sequence kind, store the result and, for a
              nutation run, write the pulse calibration the other sequences read.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from controller.analysis.by_kind import AnalysisContext, analyse_run, finite_or_none
from controller.calibration import PulseCalibration, load_calibration, write_calibration
from controller.config.loader import LoadedRig, load_sequence, with_shots
from controller.errors import ConfigError, PrecessError
from controller.physics.constants import gamma_hz_per_nt
from controller.sequences.building import SpecError
from controller.sequences.compile import compile_sequence
from controller.sequences.timeline import Timeline
from controller.store import Store


@dataclass(frozen=True)
class PreparedRun:
    spec: Any
    timeline: Timeline
    sequence_path: str
    calibration_path: Path | None
    larmor_hz: float | None
    larmor_source: str


def predicted_larmor_hz(loaded: LoadedRig) -> float | None:
    """f = gamma'/2pi B for the site's field, or None without a site."""
    if loaded.site is None:
        return None
    return loaded.site.field_nt * gamma_hz_per_nt("shielded")


def choose_larmor(spec: Any, loaded: LoadedRig, store: Store | None) -> tuple[float | None, str]:
    """(frequency, where it came from) for pulses that give none: the last measurement or the prediction."""
    predicted = predicted_larmor_hz(loaded)
    if getattr(spec, "frequency_from", "predicted") == "last" and store is not None:
        last = store.latest_frequency_hz(loaded.config.name)
        if last is not None:
            return last[0], f"last measurement (run {last[1]})"
        if predicted is not None:
            return predicted, "site's predicted field (no measurement stored yet)"
    return predicted, "site's predicted field"


def calibration_path(spec: Any, sequence_path: str) -> Path | None:
    name = getattr(spec, "calibration", "")
    return Path(sequence_path).parent / name if name else None


def prepare_run(sequence_path: str, loaded: LoadedRig, *, shots: int | None = None, store: Store | None = None,
                larmor_hz: float | None = None, larmor_source: str = "") -> PreparedRun:
    """Load and compile a sequence; larmor_hz, if given, overrides the spec's frequency source."""
    spec = load_sequence(sequence_path)
    if shots is not None:
        spec = with_shots(spec, shots)
    return prepare_spec(spec, sequence_path, loaded, store=store, larmor_hz=larmor_hz, larmor_source=larmor_source)


def prepare_spec(spec: Any, sequence_path: str, loaded: LoadedRig, *, store: Store | None = None,
                 larmor_hz: float | None = None, larmor_source: str = "") -> PreparedRun:
    """prepare_run for a spec already in hand (e.g. edited in the TUI); sequence_path locates its calibration."""
    if larmor_hz is None:
        larmor_hz, larmor_source = choose_larmor(spec, loaded, store)
    cal_path = calibration_path(spec, sequence_path)
    if cal_path is not None and not cal_path.exists() and spec.kind != "nutation":
        raise ConfigError(sequence_path, "calibration", f"{cal_path} not found; run a nutation sequence that "
                                                        "writes it, or give pulse lengths in duration_s")
    timeline = _compile(spec, sequence_path, loaded, larmor_hz, larmor_source, cal_path)
    return PreparedRun(spec=spec, timeline=timeline, sequence_path=sequence_path, calibration_path=cal_path,
                       larmor_hz=larmor_hz, larmor_source=larmor_source)


def run_snapshot(base: dict[str, Any], prepared: PreparedRun) -> dict[str, Any]:
    """A run's config snapshot with the Larmor frequency it used and its source.

    `precess analyze --db --run` reads both to compile the same timeline again.
    """
    return {**base, "larmor_hz": prepared.larmor_hz, "larmor_source": prepared.larmor_source}


def _compile(spec: Any, sequence_path: str, loaded: LoadedRig, larmor_hz: float | None, source: str,
             cal_path: Path | None) -> Timeline:
    calibration = load_calibration(cal_path) if cal_path is not None and cal_path.exists() else None
    try:
        return compile_sequence(spec, loaded.config.transceiver.sample_rate_hz, larmor_hz,
                                larmor_source=source, calibration=calibration)
    except SpecError as exc:
        raise ConfigError(sequence_path, exc.key, exc.message) from None


def analysis_context(loaded: LoadedRig) -> AnalysisContext:
    rx = loaded.config.receive
    mains = loaded.site.mains_hz if loaded.site is not None else 50.0
    return AnalysisContext(gain=rx.gain, highpass_hz=rx.highpass_hz, mains_hz=mains, full_scale_v=rx.adc_full_scale_v)


def finish_run(prepared: PreparedRun, loaded: LoadedRig, store: Store, run_id: str, now_s: float) -> dict[str, Any]:
    """Analyse the run's stored shots, store the result, write a nutation run's calibration; return the result."""
    shots = list(store.shots(run_id))
    if not shots:
        return {}
    try:
        result = analyse_run(prepared.timeline, prepared.spec, shots, analysis_context(loaded))
    except (ValueError, ArithmeticError) as exc:
        raise PrecessError(f"run {run_id} stored, but the analysis failed: {exc}") from None
    result = finite_or_none(result)
    store.add_result(run_id, prepared.timeline.sequence_kind, result, now_s)
    if prepared.timeline.sequence_kind == "nutation" and prepared.calibration_path is not None:
        write_calibration(prepared.calibration_path, calibration_from(result, loaded.config.name, run_id, now_s),
                          comment=f"pulse calibration written by precess from nutation run {run_id}")
        result = {**result, "calibration_file": str(prepared.calibration_path)}
    return result


def calibration_from(result: dict[str, Any], rig_name: str, run_id: str, now_s: float) -> PulseCalibration:
    """The calibration a nutation result implies."""
    return PulseCalibration(
        b1_rot_t_per_v=result["b1_rot_t_per_v"], b1_rot_sd_t_per_v=result.get("b1_rot_sd_t_per_v") or 0.0,
        pulse_90_s=result["pulse_90_s"], amplitude_v=result["amplitude_90_v"],
        frequency_hz=result["transmit_frequency_hz"], rig=rig_name, run_id=run_id,
        measured_at_utc=time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime(now_s)))


def with_larmor(prepared: PreparedRun, loaded: LoadedRig, larmor_hz: float, source: str) -> PreparedRun:
    """The same sequence compiled again for a new Larmor frequency (the scheduler follows the field)."""
    timeline = _compile(prepared.spec, prepared.sequence_path, loaded, larmor_hz, source, prepared.calibration_path)
    return replace(prepared, timeline=timeline, larmor_hz=larmor_hz, larmor_source=source)
