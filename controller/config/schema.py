"""Configuration dataclasses: a site, a sample, a rig and sequence specs.

All keys carry their unit in the name.  Objects are frozen: a run keeps a snapshot of the
exact configuration it ran with.
"""

from __future__ import annotations

from dataclasses import dataclass

from controller.config.hardware import (
    TRANSCEIVER_DRIVERS, SUPPLY_DRIVERS, BoardConfig, ScpiDaqConfig, ScpiSupplyConfig, SoundCardConfig,
)
from controller.config.strict import field


@dataclass(frozen=True, kw_only=True)
class SiteConfig:
    """Where the instrument stands and the field it sees."""

    name: str = field(help="site name")
    latitude_deg: float = field(0.0, min=-90.0, max=90.0)
    longitude_deg: float = field(0.0, min=-180.0, max=360.0)
    altitude_m: float = field(0.0, min=-500.0, max=9000.0)
    iaga_code: str = field("XXX", help="three-letter station code used in IAGA-2002 exports")
    field_nt: float = field(50000.0, min=15000.0, max=70000.0, help="total field at the sensor")
    inclination_deg: float = field(65.0, min=-90.0, max=90.0)
    declination_deg: float = field(0.0, min=-180.0, max=180.0)
    gradient_nt_per_m: float = field(0.5, min=0.0, max=10000.0, help="field gradient across the sample")
    diurnal_amplitude_nt: float = field(25.0, min=0.0, max=1000.0)
    mains_hz: float = field(50.0, choices=(50.0, 60.0))


@dataclass(frozen=True, kw_only=True)
class SampleConfig:
    """The liquid in the coil."""

    name: str = field(help="sample name")
    liquid: str = field("water", choices=("water",))
    volume_l: float = field(0.5, gt=0.0, max=100.0)
    temperature_c: float = field(20.0, min=0.0, max=40.0)
    t1_s: float = field(2.5, gt=0.0, max=20.0, help="longitudinal relaxation time")
    t2_s: float = field(2.0, gt=0.0, max=20.0, help="transverse relaxation time (T2 <= T1)")
    t1_earth_s: float | None = field(None, gt=0.0, max=20.0,
                                     help="T1 in the Earth's field when it differs from t1_s (omit: same)")


@dataclass(frozen=True, kw_only=True)
class CoilConfig:
    """The solenoid that polarises and receives."""

    turns: int = field(min=1, max=100000)
    radius_m: float = field(gt=0.0, max=2.0, help="inner radius of the winding = outer radius of the former")
    length_m: float = field(gt=0.0, max=5.0, help="winding length")
    wire_awg: int | None = field(None, min=0, max=40, help="AWG size (ASTM B258); or give wire_diameter_m")
    wire_diameter_m: float = field(0.0, min=0.0, max=0.02, help="bare copper diameter; 0 = from wire_awg")
    insulation_m: float = field(0.0, min=0.0, max=0.002, help="enamel added to the bare diameter (winding pitch)")
    build_m: float = field(0.0, min=0.0, max=0.5, help="radial depth of the winding; 0 = close-wound layers")
    axis_to_field_deg: float = field(90.0, min=0.0, max=180.0, help="angle between coil axis and Earth's field")
    heat_capacity_j_per_k: float = field(0.0, min=0.0, help="thermal capacity; 0 = copper mass only")
    thermal_resistance_k_per_w: float = field(5.0, gt=0.0, help="winding to ambient")
    ambient_c: float = field(20.0, min=-40.0, max=60.0)
    clamp_voltage_v: float = field(200.0, gt=0.0, max=2000.0, help="flyback clamp at switch-off")
    former_heat_capacity_j_per_k: float = field(0.0, min=0.0, help="second thermal node (former, potting); 0 = one node")
    winding_to_former_k_per_w: float = field(1.0, gt=0.0, help="thermal resistance winding -> former (two-node model)")
    insulation_class: str = field("A", choices=("A", "E", "B", "F", "H"), help="IEC 60085 thermal class of the coil")


@dataclass(frozen=True, kw_only=True)
class LimitsConfig:
    """Hard limits checked before every run and supervised during it."""

    max_current_a: float = field(3.0, gt=0.0, max=100.0)
    max_polarise_s: float = field(10.0, gt=0.0, max=600.0)
    max_duty_cycle: float = field(0.8, gt=0.0, max=1.0, help="fraction of time the coil carries current")
    max_flyback_energy_j: float = field(5.0, gt=0.0, max=1000.0, help="1/2 L I^2 at switch-off")
    max_coil_temperature_c: float = field(80.0, min=20.0, max=180.0, help="IEC 60085 class minus margin")
    max_pulse_amplitude_v: float = field(1.0, gt=0.0, max=100.0)
    max_acquire_s: float = field(10.0, gt=0.0, max=600.0)
    duty_window_s: float = field(120.0, gt=0.0, max=86400.0, help="averaging window of the duty cycle")
    planning_margin_k: float = field(2.0, min=0.0, max=50.0, help="plans stay this far below max_coil_temperature_c")
    min_dead_time_s: float = field(0.005, min=0.0, max=1.0, help="receiver recovery after a pulse or switch-off")
    max_transmit_duty_cycle: float = field(0.3, gt=0.0, max=1.0, help="fraction of a shot the transmitter is on")
    max_segment_samples: int = field(8_388_608, min=1, help="longest sample-locked segment the buffers hold")


@dataclass(frozen=True, kw_only=True)
class SupervisorConfig:
    """How the supervisor watches a run (controller/supervisor): sampled every control_period_s."""

    control_period_s: float = field(0.1, min=0.01, max=1.0, help="status sampling and trip reaction time")
    settle_s: float = field(0.25, min=0.0, max=10.0, help="after a current change, before readback is compared")
    current_tolerance_fraction: float = field(0.05, gt=0.0, max=1.0, help="readback vs setpoint")
    current_tolerance_a: float = field(0.03, gt=0.0, max=10.0, help="absolute readback tolerance (and 'off')")
    over_current_fraction: float = field(0.05, min=0.0, max=1.0, help="margin above limits.max_current_a")
    off_voltage_v: float = field(0.5, gt=0.0, max=100.0, help="supply voltage above this while off = still live")
    supply_compliance_v: float = field(30.0, gt=0.0, max=1000.0, help="the supply's voltage limit")
    compliance_fraction: float = field(0.98, gt=0.0, max=1.0, help="readback at this share of the limit = in compliance")
    short_resistance_fraction: float = field(0.5, gt=0.0, max=1.0, help="V/I below this share of R(T) = shorted")
    cold_resistance_ohm: float = field(0.0, min=0.0, help="coil + leads measured at cold_resistance_at_c; 0 = from the winding")
    cold_resistance_at_c: float = field(20.0, min=-40.0, max=60.0)
    sense_current_a: float = field(0.05, gt=0.0, max=10.0, help="least current for the resistance method")
    sensor_disagreement_k: float = field(15.0, gt=0.0, max=200.0, help="resistance vs thermistor temperature")
    heartbeat_timeout_s: float = field(0.3, gt=0.0, max=60.0, help="board silent this long = heartbeat lost")
    min_battery_v: float = field(0.0, min=0.0, max=100.0, help="0 = no battery watched")
    min_disk_free_mb: float = field(200.0, min=0.0, help="free space left beside the store")


@dataclass(frozen=True, kw_only=True)
class ReceiveConfig:
    """The receive chain from coil to ADC."""

    preamp_noise_nv_per_rthz: float = field(2.0, min=0.0, max=1000.0)
    gain: float = field(10000.0, gt=0.0, max=1e7, help="voltage gain coil -> ADC")
    highpass_hz: float = field(300.0, min=0.0, max=5000.0, help="AC coupling / high-pass corner")
    adc_full_scale_v: float = field(1.0, gt=0.0, max=20.0)
    adc_bits: int = field(24, choices=(16, 24, 32))


@dataclass(frozen=True, kw_only=True)
class DriverConfig:
    """Which driver serves one role; a real driver's settings sit in the table named after it."""

    driver: str = field("simulated", choices=tuple(dict.fromkeys(TRANSCEIVER_DRIVERS + SUPPLY_DRIVERS)))
    sample_rate_hz: float = field(48000.0, choices=(44100.0, 48000.0, 96000.0, 192000.0))
    soundcard: SoundCardConfig | None = field(None, help="transceiver.driver = 'soundcard'")
    scpi_daq: ScpiDaqConfig | None = field(None, help="transceiver.driver = 'scpi_daq'")
    scpi: ScpiSupplyConfig | None = field(None, help="supply.driver = 'scpi'")


@dataclass(frozen=True, kw_only=True)
class SimulatorConfig:
    """Truth and imperfections of the simulated instrument."""

    seed: int = field(1, min=0)
    site: str = field(help="site file, relative to the rig file")
    sample: str = field(help="sample file, relative to the rig file")
    mains_amplitude_uv: float = field(2.0, min=0.0, help="fundamental at the coil, referred to input")
    mains_harmonics: int = field(60, min=0, max=200)
    mains_drift_hz: float = field(0.02, min=0.0, max=1.0, help="peak slow wander of the mains frequency")
    spike_rate_per_s: float = field(0.5, min=0.0, max=1000.0)
    spike_amplitude_uv: float = field(20.0, min=0.0)
    ringing_amplitude_v: float = field(0.5, min=0.0, help="switch-off ringing at the ADC")
    ringing_decay_s: float = field(0.002, gt=0.0, max=1.0)
    ringing_frequency_hz: float = field(3500.0, gt=0.0)
    reference_coupling: float = field(1.0, min=0.0, max=10.0, help="hum seen by the reference coil / signal coil")


@dataclass(frozen=True, kw_only=True)
class RigConfig:
    """A whole instrument: coil, limits, receive chain, drivers and (for the simulator) its truth."""

    name: str = field(help="rig name")
    coil: CoilConfig = field()
    limits: LimitsConfig = field(default_factory=LimitsConfig)
    receive: ReceiveConfig = field(default_factory=ReceiveConfig)
    transceiver: DriverConfig = field(default_factory=DriverConfig)
    supply: DriverConfig = field(default_factory=DriverConfig)
    board: BoardConfig | None = field(None, help="switch/sensor board; omit on a simulated rig")
    simulator: SimulatorConfig | None = field(None)
    description: str = field("")
    supervisor: SupervisorConfig = field(default_factory=SupervisorConfig)


@dataclass(frozen=True, kw_only=True)
class PolariseSpec:
    current_a: float = field(gt=0.0, max=100.0)
    duration_s: float = field(gt=0.0, max=600.0)


@dataclass(frozen=True, kw_only=True)
class SwitchOffSpec:
    ramp_s: float = field(0.0002, gt=0.0, max=10.0, help="time for the current to fall to zero")
    shape: str = field("linear", choices=("linear", "exponential"))


@dataclass(frozen=True, kw_only=True)
class RfPulseSpec:
    """A transmit pulse: its length (or flip angle from the calibration), amplitude, frequency and phase."""

    duration_s: float | None = field(None, gt=0.0, max=1.0, help="pulse length; or give flip_deg")
    flip_deg: float | None = field(None, gt=0.0, max=720.0, help="flip angle from the pulse calibration")
    amplitude_v: float = field(gt=0.0, max=100.0, help="transmit amplitude at the output")
    frequency_hz: float | None = field(None, gt=0.0, max=10000.0,
                                       help="omit to use the last measured or predicted Larmor frequency")
    phase_deg: float = field(0.0, min=-360.0, max=360.0)


@dataclass(frozen=True, kw_only=True)
class PulseSpec(RfPulseSpec):
    """An excitation pulse at the Larmor frequency after switch-off."""

    delay_s: float = field(0.01, min=0.0, max=600.0, help="after the end of the switch-off ramp")


@dataclass(frozen=True, kw_only=True)
class ReceiveSpec:
    dead_time_s: float = field(0.01, min=0.0, max=1.0, help="after switch-off or pulse end, before acquisition")
    acquire_s: float = field(1.0, gt=0.0, max=600.0)


@dataclass(frozen=True, kw_only=True)
class PhaseCycleSpec:
    """Phase offsets added shot by shot (step i of the cycle for the i-th shot of a point).

    Each list has one entry per step, or a single entry used in every step.
    """

    excite_deg: tuple[float, ...] = field((0.0,), min=-360.0, max=360.0, min_items=1)
    refocus_deg: tuple[float, ...] = field((0.0,), min=-360.0, max=360.0, min_items=1)
    receiver_deg: tuple[float, ...] = field((0.0,), min=-360.0, max=360.0, min_items=1)


FREQUENCY_SOURCES = ("last", "predicted")


@dataclass(frozen=True, kw_only=True)
class FidSequence:
    """Prepolarise, switch off, optionally excite, record the FID; repeat for `shots`."""

    name: str = field(help="sequence name")
    kind: str = field("fid", choices=("fid",))
    shots: int = field(1, min=1, max=100000)
    recovery_s: float = field(1.0, min=0.0, max=3600.0, help="wait after each shot, coil off")
    polarise: PolariseSpec = field()
    switch_off: SwitchOffSpec = field(default_factory=SwitchOffSpec)
    pulse: PulseSpec | None = field(None)
    receive: ReceiveSpec = field(default_factory=ReceiveSpec)
    description: str = field("")
    phase_cycle: PhaseCycleSpec = field(default_factory=PhaseCycleSpec)
    frequency_from: str = field("last", choices=FREQUENCY_SOURCES,
                                help="pulse frequency when not given: last measurement in the store, or the site's field")
    calibration: str = field("", help="pulse calibration file, relative to this file (needed for flip_deg)")
