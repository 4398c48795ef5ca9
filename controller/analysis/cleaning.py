"""Cleaning of a sequence shot's record before echo or FID amplitudes are taken from it.

The same pure functions as the FID pipeline (`controller.analysis.pipeline`, steps 2, 4, 5),
applied to a record that is usable only in parts (the receiver windows between pulses):

1. despiking (`despike.despike`) of every contiguous usable stretch of every channel;
2. the mains comb (`mains.estimate_mains`) from the DFT of the record with the unusable
   samples (pulses, dead time) set to zero: the gaps add sidebands but leave each peak at
   m f0; then the amplitudes c_m of the harmonics inside the band by least squares on the
   usable samples alone (`mains.fit_harmonics_on_samples`), which the gaps do not bias;
   h(t) = sum_m Re(c_m exp(i 2 pi m f0 t)) (Butler & Russell, Geophysics 58:898 (1993))
   is subtracted from the signal and, with its own c_m, from every reference;
3. what the references still explain in the band, removed block by block (200 Hz blocks) by the
   multichannel Wiener filter (`reference.cancel_references`; Walsh, J. Appl. Geophys. 2008).

Samples outside the usable stretches are returned unchanged; the input is never modified.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
from scipy.fft import irfft, rfft

from controller.analysis.despike import despike
from controller.analysis.mains import estimate_mains, fit_harmonics_on_samples, harmonics_waveform
from controller.analysis.reference import cancel_references
from controller.analysis.shots import ShotLike, good_shots
from controller.analysis.spectrum import band_bins
from controller.sequences.timeline import Acquire, ShotPlan, Timeline

BAND_MARGIN_HZ = 50.0  # harmonics this far outside the band are modelled too (their leakage)
# The canceller's transfer functions are held constant over 200 Hz (not the line search's 20 Hz): with
# B bins per block it also removes about 1/B of the signal's own power by chance, and here the signal
# is measured from what is left, not fitted jointly with the references as in linefit.  Common practice, no source.
REFERENCE_BLOCK_HZ = 200.0


@dataclass(frozen=True)
class CleanedRecord:
    signal: np.ndarray
    spikes_replaced: int
    mains_hz: float | None


def usable_mask(plan: ShotPlan, n_samples: int) -> np.ndarray:
    """True inside the shot's receiver windows (Acquire events)."""
    usable = np.zeros(n_samples, dtype=bool)
    for window in plan.of_kind(Acquire):
        usable[window.start_sample:min(n_samples, window.start_sample + window.n_samples)] = True
    return usable


def _stretches(usable: np.ndarray) -> list[tuple[int, int]]:
    edges = np.flatnonzero(np.diff(np.concatenate([[0], usable.view(np.int8), [0]])))
    return [(int(lo), int(hi)) for lo, hi in zip(edges[::2], edges[1::2])]


def _despiked(record: np.ndarray, usable: np.ndarray, fs: float) -> tuple[np.ndarray, int]:
    out, replaced = np.array(record, dtype=float), 0
    for lo, hi in _stretches(usable):
        d = despike(out[lo:hi], fs)
        out[lo:hi], replaced = d.cleaned, replaced + d.replaced_samples
    return out, replaced


def clean_record(signal: np.ndarray, references: list[np.ndarray], usable: np.ndarray, sample_rate_hz: float,
                 band_hz: tuple[float, float], mains: str | float = "auto") -> CleanedRecord:
    """Steps 1-3 of the module docstring on one shot (all arrays of the same length)."""
    fs = float(sample_rate_hz)
    usable = np.asarray(usable, dtype=bool)
    x, replaced = _despiked(signal, usable, fs)
    refs = [_despiked(r, usable, fs)[0] for r in references]
    n = x.size
    if usable.sum() < 2:
        return CleanedRecord(np.array(signal, dtype=float), 0, None)
    gapped = np.where(usable, x - x[usable].mean(), 0.0)
    fit = estimate_mains(rfft(gapped), n, fs, mains, min(band_hz[1] + BAND_MARGIN_HZ, fs / 2))
    t = np.arange(n) / fs
    if fit is not None:
        frequencies = fit.frequencies_hz()
        fit = fit.without((frequencies >= band_hz[0] - BAND_MARGIN_HZ) & (frequencies <= band_hz[1] + BAND_MARGIN_HZ))

        def dehum(y: np.ndarray) -> np.ndarray:
            c = fit_harmonics_on_samples(y, usable, fs, fit.fundamental_hz, fit.harmonics)
            return y - harmonics_waveform(t, fit.fundamental_hz, fit.harmonics, c)

        x, refs = dehum(x), [dehum(r) for r in refs]
    if refs:
        spectrum = rfft(np.where(usable, x, 0.0))
        bins = band_bins(n, fs, band_hz)
        spectrum[bins] = cancel_references(spectrum, [rfft(np.where(usable, r, 0.0)) for r in refs], bins, fs / n,
                                         REFERENCE_BLOCK_HZ)
        x = np.where(usable, irfft(spectrum, n), x)
    return CleanedRecord(np.where(usable, x, signal), replaced, None if fit is None else fit.fundamental_hz)


def cleaned_shots(timeline: Timeline, shots: list[ShotLike], band_hz: tuple[float, float],
                  mains: str | float = "auto") -> list[ShotLike]:
    """Every good shot with its "signal" channel cleaned (clean_record); "reference*" channels are used up."""
    out = []
    for plan, shot in good_shots(timeline, shots):
        names = tuple(shot.channel_names)
        samples = np.asarray(shot.samples, dtype=float)
        signal = names.index("signal") if "signal" in names else 0
        refs = [samples[i] for i, name in enumerate(names) if name.startswith("reference") and i != signal]
        cleaned = clean_record(samples[signal], refs, usable_mask(plan, samples.shape[1]), shot.sample_rate_hz,
                               band_hz, mains)
        new = samples.copy()
        new[signal] = cleaned.signal
        out.append(dataclasses.replace(shot, samples=new))
    return out
