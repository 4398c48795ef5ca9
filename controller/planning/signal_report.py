"""The signal plan as sections: what goes in, the signal, the noise, the precision, the ADC, the timing."""

from __future__ import annotations

from controller.checks import check_all
from controller.physics.precision import shots_for_precision
from controller.planning.planfile import LoadedPlan
from controller.planning.report import Row, Section
from controller.planning.signal import AdcBudget, PolariseChoice, SignalBudget
from controller.sequences.timeline import Timeline


def signal_sections(plan: LoadedPlan, timeline: Timeline, b: SignalBudget, adc: AdcBudget,
                    choice: PolariseChoice) -> list[Section]:
    target = plan.config.target_field_sd_nt
    shots = shots_for_precision(b.field_sd_nt, target)
    violations = tuple(str(v) for v in check_all(timeline, plan.rig.config))
    return [
        Section("inputs", f"Plan: {plan.config.name}", (
            Row("rig", "rig", plan.rig.config.name),
            Row("sequence", "sequence", f"{plan.sequence.name} ({plan.sequence_path})"),
            Row("site", "site", plan.site.name),
            Row("sample", "sample", plan.sample.name),
            Row("field_nt", "site field", b.field_nt, "nT", digits=".1f"),
        )),
        Section("polarisation", "Polarisation", (
            Row("current_a", "polarising current", b.current_a, "A", digits=".3g"),
            Row("polarising_field_t", "polarising field at the centre", b.polarising_field_t, "mT", 1e3, ".3f"),
            Row("polarise_s", "polarising time", b.polarise_s, "s", digits=".3g"),
            Row("magnetisation_equilibrium_a_per_m", "Curie-law M0", b.magnetisation_equilibrium_a_per_m,
                "A/m", digits=".4g"),
            Row("buildup_fraction", "built up (1 - exp(-tp/T1))", b.buildup_fraction, "%", 100, ".1f"),
        )),
        Section("switch_off", "Switch-off", (
            Row("ramp_s", "ramp", b.ramp_s, "ms", 1e3, ".3g"),
            Row("field_rate_t_per_s", "dBp/dt as Bp passes Be", b.field_rate_t_per_s, "T/s", digits=".3g"),
            Row("adiabatic_ratio", "ratio to gamma Be^2", b.adiabatic_ratio, digits=".3g"),
            Row("regime", "switch-off is", b.regime),
            Row("transverse_fraction", "magnetisation left across the field", b.transverse_fraction, "%", 100,
                ".1f", note="Bloch integration of the ramp"),
        ), notes=("the sequence has a pulse: taken as a 90 degree pulse",) if b.has_pulse else ()),
        Section("signal", "Signal", (
            Row("larmor_hz", "Larmor frequency (shielded)", b.larmor_hz, "Hz", digits=".2f"),
            Row("transverse_magnetisation_a_per_m", "M across the field", b.transverse_magnetisation_a_per_m,
                "A/m", digits=".4g"),
            Row("emf0_v", "EMF at time zero (reciprocity)", b.emf0_v, "uV", 1e6, ".4g"),
            Row("t2star_s", "T2* (T2 and the site gradient)", b.t2star_s, "s", digits=".3g"),
            Row("dead_time_s", "dead time", b.dead_time_s, "ms", 1e3, ".3g"),
            Row("amplitude_v", "amplitude at the start of acquisition", b.amplitude_v, "uV", 1e6, ".4g"),
        )),
        Section("noise", "Noise (referred to the coil)", (
            Row("coil_temperature_c", "coil temperature (predicted peak)", b.coil_temperature_c, "C", digits=".1f"),
            Row("coil_resistance_ohm", "coil resistance", b.coil_resistance_ohm, "ohm", digits=".3f"),
            Row("johnson_v_per_rthz", "coil Johnson noise", b.johnson_v_per_rthz, "nV/rtHz", 1e9, ".3f"),
            Row("preamp_v_per_rthz", "preamp noise", b.preamp_v_per_rthz, "nV/rtHz", 1e9, ".3f"),
            Row("noise_v_per_rthz", "total", b.noise_v_per_rthz, "nV/rtHz", 1e9, ".3f"),
            Row("snr", f"SNR per shot in {b.snr_bandwidth_hz:g} Hz", b.snr, digits=".4g",
                note="peak amplitude / rms noise"),
        ), notes=("white noise only: mains hum, spikes and switch-off ringing come on top",)),
        Section("precision", "Field precision (Cramer-Rao floor, white noise)", (
            Row("acquire_s", "record length", b.acquire_s, "s", digits=".3g"),
            Row("frequency_sd_hz", "frequency sd per shot", b.frequency_sd_hz, "mHz", 1e3, ".4g"),
            Row("field_sd_nt", "field sd per shot", b.field_sd_nt, "nT", digits=".4g"),
            Row("target_field_sd_nt", "target", target, "nT", digits=".3g"),
            Row("shots_needed", "shots to stack for the target", shots),
            Row("time_needed_s", "time for those shots", shots * b.shot_s, "s", digits=".1f"),
        ), notes=("hum harmonics near the line and other nuisances raise the floor; real fits reach it "
                  "only on clean records",)),
        Section("adc", "ADC", (
            Row("gain", "gain coil -> ADC", plan.rig.config.receive.gain, digits=".4g"),
            Row("highpass_gain", "high-pass passes at the line", adc.highpass_gain, "%", 100, ".1f"),
            Row("signal_peak_v", "signal peak at the ADC", adc.signal_peak_v, "mV", 1e3, ".4g"),
            Row("noise_rms_v", "broadband noise at the ADC (rms)", adc.noise_rms_v, "mV", 1e3, ".4g"),
            Row("full_scale_v", "full scale", plan.rig.config.receive.adc_full_scale_v, "V", digits=".3g"),
            Row("headroom_db", "headroom for signal + 4 sd noise", adc.headroom_db, "dB", digits=".1f"),
            Row("noise_over_quantisation_db", "noise above the quantisation step", adc.noise_over_quantisation_db,
                "dB", digits=".1f"),
        ), notes=_adc_notes(adc)),
        Section("polarise_time", "Polarising time for the best SNR per unit time", (
            Row("t1_s", "T1", plan.sample.t1_s, "s", digits=".3g"),
            Row("polarise_s", "planned", choice.current_s, "s", digits=".3g"),
            Row("other_s", "rest of each shot", choice.other_s, "s", digits=".3g"),
            Row("optimum_s", "optimum", choice.optimum_s, "s", digits=".3g"),
            Row("gain_fraction", "SNR per root time gained at the optimum", choice.gain_fraction, "%", 100, "+.1f"),
            Row("optimum_allowed", "rig limits allow the optimum", not choice.violations_at_optimum),
        ), notes=choice.violations_at_optimum),
        Section("checks", "Rig limits for the sequence as planned", (
            Row("violations", "limit violations", len(violations)),
        ), notes=violations),
    ]


def _adc_notes(adc: AdcBudget) -> tuple[str, ...]:
    notes = ["hum and switch-off transients can be far larger than the FID: keep headroom for them"]
    if adc.headroom_db < 0:
        notes.insert(0, "the ADC would clip: lower the gain")
    if adc.noise_rms_v < adc.lsb_v:
        notes.insert(0, "the noise is smaller than one ADC step: raise the gain or use more bits")
    return tuple(notes)
