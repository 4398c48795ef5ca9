"""Specs of the sequences beyond the plain FID: echoes, CPMG, T1 series, nutation, noise.

Every spec is a frozen dataclass built strictly from TOML (controller.config.strict).  Keys
shared by all of them:

* ``shots``: shots stacked per point (per series point for a series);
* ``phase_cycle``: transmit and receiver phase lists, stepped shot by shot within a point;
* ``frequency_from``: where the pulse frequency comes from when a pulse gives none;
* ``calibration``: the pulse calibration file (relative to the sequence file) that turns
  ``flip_deg`` into a pulse length; the nutation sequence writes it.

Times are seconds.  Consistency between fields (echo time against pulse lengths and dead
time, list lengths against the phase cycle) is checked by the compilers, which know the
sample clock and the calibration.
"""

from __future__ import annotations

from dataclasses import dataclass

from controller.config.schema import (
    FREQUENCY_SOURCES, PhaseCycleSpec, PolariseSpec, ReceiveSpec, RfPulseSpec, SwitchOffSpec,
)
from controller.config.strict import field

ADIABATIC_RAMP_S = 0.4  # common practice, no source: slow enough for dBp/dt << gamma Be^2


@dataclass(frozen=True, kw_only=True)
class NutationPulseSpec:
    """The stepped pulse of a nutation series: the quantity not stepped is given here."""

    duration_s: float | None = field(None, gt=0.0, max=1.0, help="needed when pulse_amplitudes_v is stepped")
    amplitude_v: float | None = field(None, gt=0.0, max=100.0, help="needed when pulse_lengths_s is stepped")
    frequency_hz: float | None = field(None, gt=0.0, max=10000.0,
                                       help="omit to use the last measured or predicted Larmor frequency")
    phase_deg: float = field(0.0, min=-360.0, max=360.0)


@dataclass(frozen=True, kw_only=True)
class PolariseCurrentSpec:
    """Polarising current only (the series gives the durations)."""

    current_a: float = field(gt=0.0, max=100.0)


def _adiabatic() -> SwitchOffSpec:
    return SwitchOffSpec(ramp_s=ADIABATIC_RAMP_S, shape="linear")


_COMMON_HELP = {
    "shots": "shots stacked per point",
    "recovery_s": "wait after each shot, coil off",
}


@dataclass(frozen=True, kw_only=True)
class PulsedSequenceKeys:
    """Keys every sequence with pulses or a FID readout shares (see the module docstring)."""

    receive: ReceiveSpec = field(default_factory=ReceiveSpec)
    phase_cycle: PhaseCycleSpec = field(default_factory=PhaseCycleSpec)
    frequency_from: str = field("last", choices=FREQUENCY_SOURCES)
    calibration: str = field("", help="pulse calibration file, relative to this file (a nutation run writes it)")
    description: str = field("")


@dataclass(frozen=True, kw_only=True)
class EchoSequence(PulsedSequenceKeys):
    """Hahn spin echo: excitation (sudden switch-off, or a pulse after an adiabatic ramp), then a
    refocusing pulse at TE/2 and the echo at TE.  One echo time, or a series of them for T2."""

    name: str = field(help="sequence name")
    kind: str = field("echo", choices=("echo",))
    shots: int = field(1, min=1, max=100000, help=_COMMON_HELP["shots"])
    recovery_s: float = field(3.0, min=0.0, max=3600.0, help=_COMMON_HELP["recovery_s"])
    polarise: PolariseSpec = field()
    switch_off: SwitchOffSpec = field(default_factory=SwitchOffSpec)
    excite: RfPulseSpec | None = field(None, help="omit: the sudden switch-off itself excites")
    excite_delay_s: float = field(0.01, min=0.0, max=600.0, help="from the end of the ramp to the excite pulse")
    refocus: RfPulseSpec = field()
    echo_time_s: float | None = field(None, gt=0.0, max=60.0, help="one echo time TE, from excitation to echo")
    echo_times_s: tuple[float, ...] | None = field(None, gt=0.0, max=60.0, min_items=2,
                                                   help="a series of echo times for T2")
    echo_window_s: float = field(0.01, gt=0.0, max=1.0, help="width around the echo centre that is averaged")
    order: str = field("interleaved", choices=("interleaved", "sequential"))


@dataclass(frozen=True, kw_only=True)
class CpmgSequence(PulsedSequenceKeys):
    """Carr-Purcell-Meiboom-Gill: 90 deg pulse, then refocusing pulses every echo spacing, phase
    shifted by 90 deg (variant "cpmg", Meiboom & Gill 1958) or in phase (variant "cp", Carr &
    Purcell 1954); an echo midway between refocusing pulses."""

    name: str = field(help="sequence name")
    kind: str = field("cpmg", choices=("cpmg",))
    variant: str = field("cpmg", choices=("cpmg", "cp"))
    shots: int = field(1, min=1, max=100000, help=_COMMON_HELP["shots"])
    recovery_s: float = field(3.0, min=0.0, max=3600.0, help=_COMMON_HELP["recovery_s"])
    polarise: PolariseSpec = field()
    switch_off: SwitchOffSpec = field(default_factory=_adiabatic)
    excite: RfPulseSpec = field()
    excite_delay_s: float = field(0.01, min=0.0, max=600.0, help="from the end of the ramp to the excite pulse")
    refocus: RfPulseSpec = field()
    echo_spacing_s: float = field(gt=0.0, max=10.0, help="2 tau: refocusing pulse to refocusing pulse")
    echoes: int = field(min=2, max=100000, help="number of refocusing pulses (and echoes)")
    echo_window_s: float = field(0.01, gt=0.0, max=1.0, help="width around each echo centre that is averaged")


@dataclass(frozen=True, kw_only=True)
class T1PolariseSequence(PulsedSequenceKeys):
    """FIDs after polarising for each of a series of times: amplitude ~ 1 - exp(-tp/T1) at the polarising field."""

    name: str = field(help="sequence name")
    kind: str = field("t1-polarise", choices=("t1-polarise",))
    shots: int = field(1, min=1, max=100000, help=_COMMON_HELP["shots"])
    recovery_s: float = field(10.0, min=0.0, max=3600.0, help="coil off after each shot; several T1 in the Earth's field")
    polarise: PolariseCurrentSpec = field()
    polarise_times_s: tuple[float, ...] = field(gt=0.0, max=600.0, min_items=2, help="the polarising times")
    switch_off: SwitchOffSpec = field(default_factory=SwitchOffSpec)
    pulse: RfPulseSpec | None = field(None, help="a 90 deg pulse after an adiabatic ramp; omit for sudden switch-off")
    excite_delay_s: float = field(0.01, min=0.0, max=600.0, help="from the end of the ramp to the pulse")
    order: str = field("interleaved", choices=("interleaved", "sequential"))


@dataclass(frozen=True, kw_only=True)
class T1EarthSequence(PulsedSequenceKeys):
    """Polarise, ramp down adiabatically (M stays along the Earth's field), wait a delay in the
    Earth's field, then a 90 deg pulse: amplitude ~ exp(-delay/T1) in the Earth's field."""

    name: str = field(help="sequence name")
    kind: str = field("t1-earth", choices=("t1-earth",))
    shots: int = field(1, min=1, max=100000, help=_COMMON_HELP["shots"])
    recovery_s: float = field(5.0, min=0.0, max=3600.0, help=_COMMON_HELP["recovery_s"])
    polarise: PolariseSpec = field()
    switch_off: SwitchOffSpec = field(default_factory=_adiabatic)
    earth_delays_s: tuple[float, ...] = field(min=0.0, max=60.0, min_items=2,
                                              help="from the end of the ramp to the pulse")
    pulse: RfPulseSpec = field()
    order: str = field("interleaved", choices=("interleaved", "sequential"))


@dataclass(frozen=True, kw_only=True)
class NutationSequence(PulsedSequenceKeys):
    """Adiabatic ramp, then a pulse stepped in length (or amplitude): FID amplitude ~ sin(flip angle).
    The fit gives the 90 deg pulse and B1 per volt, written to the calibration file."""

    name: str = field(help="sequence name")
    kind: str = field("nutation", choices=("nutation",))
    shots: int = field(1, min=1, max=100000, help=_COMMON_HELP["shots"])
    recovery_s: float = field(3.0, min=0.0, max=3600.0, help=_COMMON_HELP["recovery_s"])
    polarise: PolariseSpec = field()
    switch_off: SwitchOffSpec = field(default_factory=_adiabatic)
    pulse: NutationPulseSpec = field()
    pulse_lengths_s: tuple[float, ...] | None = field(None, gt=0.0, max=1.0, min_items=3)
    pulse_amplitudes_v: tuple[float, ...] | None = field(None, gt=0.0, max=100.0, min_items=3)
    excite_delay_s: float = field(0.01, min=0.0, max=600.0, help="from the end of the ramp to the pulse")
    order: str = field("interleaved", choices=("interleaved", "sequential"))


@dataclass(frozen=True, kw_only=True)
class NoiseSequence:
    """Receive only: no current, no pulse.  For a noise survey and for training reference-coil cancellation."""

    name: str = field(help="sequence name")
    kind: str = field("noise", choices=("noise",))
    shots: int = field(1, min=1, max=100000, help="records averaged")
    recovery_s: float = field(0.0, min=0.0, max=3600.0, help="gap between records")
    acquire_s: float = field(1.0, gt=0.0, max=600.0, help="length of each record")
    band_hz: tuple[float, ...] | None = field(None, gt=0.0, max=50000.0, min_items=2,
                                              help="[low, high] band for the noise density; omit: Larmor +/- 100 Hz")
    frequency_from: str = field("last", choices=FREQUENCY_SOURCES)
    description: str = field("")
