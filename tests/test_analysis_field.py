"""Field from frequency with the CODATA 2022 gyromagnetic ratios, through the whole pipeline."""

import numpy as np
import pytest
from scipy.constants import physical_constants

from controller.analysis.pipeline import AnalysisOptions, ShotData, analyse_shots
from controller.analysis.synthetic import SyntheticSpec, make_record

# source: CODATA 2022 via scipy.constants
SHIELDED_HZ_PER_NT = physical_constants["shielded proton gyromag. ratio in MHz/T"][0] * 1e-3
FREE_HZ_PER_NT = physical_constants["proton gyromag. ratio in MHz/T"][0] * 1e-3


def _record(field_nt: float):
    spec = SyntheticSpec(frequency_hz=SHIELDED_HZ_PER_NT * field_nt, amplitude=2.0, t2star_s=0.8)
    return ShotData(make_record(spec, 11)[:1], spec.sample_rate_hz, ("signal",)), spec


def test_field_from_frequency_shielded_codata_2022():
    # source: CODATA 2022 shielded proton gamma'_p/2pi = 42.576 385 43 MHz/T; 50 000 nT -> 2128.819 Hz
    shot, _ = _record(50_000.0)
    result = analyse_shots([shot])
    assert result.detected
    assert result.gamma_hz_per_nt == pytest.approx(0.04257638543, rel=1e-10)
    assert result.field_nt == pytest.approx(result.frequency_hz / SHIELDED_HZ_PER_NT, rel=1e-12)
    assert result.field_sd_nt == pytest.approx(result.frequency_sd_hz / SHIELDED_HZ_PER_NT, rel=1e-12)
    assert abs(result.field_nt - 50_000.0) < 4 * result.field_sd_nt
    assert result.field_sd_nt < 0.2


def test_field_with_free_proton_gamma():
    # source: CODATA 2022 free proton gamma_p/2pi = 42.577 478 461 MHz/T
    shot, _ = _record(48_000.0)
    shielded = analyse_shots([shot])
    free = analyse_shots([shot], AnalysisOptions(gamma="free"))
    assert free.gamma_hz_per_nt == pytest.approx(FREE_HZ_PER_NT, rel=1e-12)
    assert free.frequency_hz == shielded.frequency_hz
    assert free.field_nt == pytest.approx(free.frequency_hz / FREE_HZ_PER_NT, rel=1e-12)
    # the free ratio is 25.7 ppm larger: the same line reads about 1.23 nT less at 48 000 nT [calc]
    assert free.field_nt - shielded.field_nt == pytest.approx(-1.232, abs=0.002)
