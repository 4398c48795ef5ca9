"""Despiking: a clean record passes unchanged; spikes are found and refilled."""

import numpy as np

from controller.analysis.despike import despike, detection_threshold
from controller.analysis.synthetic import SyntheticSpec, fid, make_record, spikes

FS = 48000.0


def test_clean_record_is_unchanged():
    # a record with no impulsive noise (FID + mains hum + white noise) must come back as it went in
    spec = SyntheticSpec(amplitude=3.0, mains_hz=50.01, mains_amplitude=20.0)
    for seed in range(3):
        x = make_record(spec, seed)[0]
        x.setflags(write=False)  # the function must not write into its input
        out = despike(x, FS)
        assert out.replaced_samples == 0
        assert np.array_equal(out.cleaned, x)
        assert out.cleaned is not x


def test_spikes_are_replaced_and_the_fid_kept():
    # source for the approach: Costabel & Mueller-Petke, Near Surface Geophysics 12:185 (2014)
    rng = np.random.default_rng(8)
    t = np.arange(48000) / FS
    clean = fid(t, 2051.3, 0.5, 1.0, 0.4) + rng.normal(0, 0.3, t.size)
    burst = spikes(t.size, FS, 5.0, 20.0, rng)
    out = despike(clean + burst, FS)
    assert out.replaced_samples > 0
    hit = np.abs(burst) > 0
    assert np.all(out.spike_mask[hit] | (np.abs(burst[hit]) < 1.0))  # every sizeable spike sample flagged
    before = np.sum(burst**2)
    after = np.sum((out.cleaned - clean) ** 2)
    assert 10 * np.log10(before / after) > 20.0
    # the prediction refill keeps the FID: the error on refilled samples is at the noise level
    assert np.sqrt(np.mean((out.cleaned - clean)[out.spike_mask] ** 2)) < 1.0


def test_threshold_is_bonferroni():
    # source: Bonferroni bound on N two-sided Gaussian tests at total false-alarm probability 1e-3
    from scipy.stats import norm

    assert detection_threshold(48000) == norm.isf(1e-3 / 96000)
