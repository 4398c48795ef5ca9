"""Analyse a stored run of any sequence kind again: rebuild its timeline from the run's config snapshot.

The snapshot holds the sequence spec (with the shot count it ran with), the rig and the site.
The timeline is compiled again at the sample rate of the stored shots and at the Larmor frequency
the run used (`larmor_hz` in the snapshot, or the schedule's; older runs: the site's predicted
field), with the pulse calibration found beside the sequence file.  The result is then the
per-kind analysis (`by_kind.analyse_run`) of the stored shots, the same call `precess run` makes.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from controller.analysis.by_kind import AnalysisContext, analyse_run, finite_or_none
from controller.calibration import load_calibration
from controller.config.loader import SEQUENCE_KINDS
from controller.config.strict import build
from controller.errors import ConfigError, InputError, PrecessError
from controller.physics.constants import gamma_hz_per_nt
from controller.sequences.building import SpecError
from controller.sequences.compile import compile_sequence
from controller.store import Store


def stored_larmor_hz(config: dict[str, Any]) -> tuple[float | None, str]:
    """(frequency, source) the run was compiled with, as far as its snapshot tells."""
    for where in (config, config.get("schedule", {})):
        if isinstance(where.get("larmor_hz"), (int, float)):
            return float(where["larmor_hz"]), str(where.get("larmor_source", "stored with the run"))
    field = config.get("site", {}).get("field_nt")
    if isinstance(field, (int, float)):
        return float(field) * gamma_hz_per_nt("shielded"), "site's predicted field (the run stored none)"
    return None, "none"


def stored_context(config: dict[str, Any]) -> AnalysisContext:
    """The receive chain and mains of the snapshot (as runner.analysis_context for a loaded rig)."""
    rx = config.get("rig", {}).get("receive", {})
    return AnalysisContext(gain=float(rx.get("gain", 1.0)), highpass_hz=float(rx.get("highpass_hz", 0.0)),
                           mains_hz=float(config.get("site", {}).get("mains_hz", 50.0)),
                           full_scale_v=rx.get("adc_full_scale_v"))


def analyse_stored_run(db_path: str | Path, run_id: str) -> dict[str, Any]:
    """The per-kind result of a stored run (JSON-ready); InputError when it cannot be rebuilt or fitted."""
    if not Path(db_path).exists():
        raise InputError(f"{db_path}: no such store (give --db PATH of an existing .sqlite file)")
    with Store(db_path) as store:
        run = store.run(run_id)
        shots = [s for s in store.shots(run_id) if not s.bad]
    if not shots:
        raise InputError(f"{db_path}: run {run_id} holds no usable shots")
    config = run["config"]
    data = config.get("sequence", {})
    kind = data.get("kind", "fid")
    if kind not in SEQUENCE_KINDS:
        raise InputError(f"run {run_id}: sequence kind {kind!r} unknown (allowed: {', '.join(SEQUENCE_KINDS)})")
    where = f"run {run_id} sequence"
    larmor_hz, source = stored_larmor_hz(config)
    calibration = None
    name = data.get("calibration") or ""
    if name:
        path = Path(config.get("sequence_file", ".")).parent / name
        if not path.exists() and kind != "nutation":
            raise InputError(f"run {run_id}: pulse calibration {path} not found (the run's pulses need it)")
        calibration = load_calibration(path) if path.exists() else None
    try:
        spec = build(SEQUENCE_KINDS[kind], data, where)
        timeline = compile_sequence(spec, float(shots[0].sample_rate_hz), larmor_hz, larmor_source=source,
                                    calibration=calibration)
    except SpecError as exc:
        raise ConfigError(where, exc.key, exc.message) from None
    try:
        result = analyse_run(timeline, spec, shots, stored_context(config))
    except (ValueError, ArithmeticError) as exc:
        raise PrecessError(f"run {run_id}: the {kind} analysis failed: {exc}") from None
    return finite_or_none({"run_id": run_id, "sequence_name": run["sequence_name"], "larmor_hz": larmor_hz,
                           "larmor_source": source, **result})
