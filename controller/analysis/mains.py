"""Mains hum as a model: a comb of harmonics of one fundamental, estimated from the record itself.

Model (Butler & Russell, Geophysics 58:898 (1993) and 68:1083 (2003)):

    h(t) = sum_{m in M} Re(c_m exp(i 2 pi m f0 t)),

f0 the mains fundamental (estimated to mHz from the record), c_m the complex amplitude of
harmonic m.  Subtraction of this model removes the hum without the notches a filter would
cut into the spectrum.  Everything here works on the record's DFT with the exact line
shape of `controller.analysis.dtft`, so leakage between harmonics is modelled, not ignored.

Steps (each a pure function):
1. `find_harmonic_peaks`: significant peaks near m * nominal in a Hann-smoothed spectrum;
2. `choose_mains`: 50 Hz, 60 Hz or none, from the number of significant harmonics;
3. `fit_mains`: variable-projection Gauss-Newton (Golub & Pereyra, SIAM J. Numer. Anal.
   10:413 (1973)) for f0 on the bins around the strongest harmonics, with their c_m solved by
   linear least squares at each step (`fit_fundamental`); then every c_m (`fit_amplitudes`);
4. `mains_spectrum`: the model's DFT on any bins, to subtract; `subtract_mains` does it to a record.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from controller.analysis.dtft import line_columns, line_sums

NOMINALS_HZ = (50.0, 60.0)
GRID_TOLERANCE = 0.01  # +/-1 % grid frequency tolerance [pub: EN 50160]
PEAK_SIGNIFICANCE = 25.0  # peak power / local median power; common practice, no source
FIT_HALF_WIDTH_BINS = 3
MIN_HARMONICS = 3
MAX_F0_HARMONICS = 24


@dataclass(frozen=True)
class MainsFit:
    """Fitted hum: fundamental_hz (f0), its sd, harmonic numbers m and complex amplitudes c_m (volts)."""

    fundamental_hz: float
    fundamental_sd_hz: float
    harmonics: np.ndarray  # int, harmonic numbers m
    amplitudes: np.ndarray  # complex c_m = a_m - i b_m at the record's first sample
    strong: np.ndarray  # harmonic numbers f0 is estimated from, most significant first

    def without(self, keep: np.ndarray) -> "MainsFit":
        """The same fit restricted to the harmonics where keep is True."""
        return replace(self, harmonics=self.harmonics[keep], amplitudes=self.amplitudes[keep],
                       strong=self.strong[np.isin(self.strong, self.harmonics[keep])])

    def frequencies_hz(self) -> np.ndarray:
        return self.harmonics * self.fundamental_hz


def hann_smoothed(spectrum: np.ndarray) -> np.ndarray:
    """Hann window applied in the frequency domain: Y_k = X_k / 2 - (X_{k-1} + X_{k+1}) / 4."""
    y = 0.5 * spectrum.astype(complex)
    y[1:-1] -= 0.25 * (spectrum[:-2] + spectrum[2:])
    return y


def find_harmonic_peaks(spectrum: np.ndarray, n_samples: int, sample_rate_hz: float, nominal_hz: float,
                        max_frequency_hz: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Significant peaks near m * nominal_hz: returns (m, peak frequency in Hz, significance).

    For each m with m * nominal * 1.01 below max_frequency_hz, the largest |Y_k|^2 of the
    Hann-smoothed spectrum Y within m * nominal * (1 +/- 0.01) +/- 2 bins is kept when it
    exceeds PEAK_SIGNIFICANCE times the median power of the surrounding 50 bins; its
    frequency is refined by a parabola through the log powers of the peak and its
    neighbours (Grandke, IEEE Trans. IM 32:350 (1983), Gaussian interpolation).
    """
    power = np.abs(hann_smoothed(spectrum)) ** 2
    df = sample_rate_hz / n_samples
    m_max = int(max_frequency_hz / (nominal_hz * (1 + GRID_TOLERANCE)))
    m = np.arange(1, m_max + 1)
    centre = m * nominal_hz / df
    half = m * nominal_hz * GRID_TOLERANCE / df + 2
    lo = np.maximum(27, (centre - half).astype(int))
    hi = np.minimum(power.size - 27, (centre + half).astype(int) + 1)
    m, lo, hi = m[hi - lo >= 3], lo[hi - lo >= 3], hi[hi - lo >= 3]
    if m.size == 0:
        return m, np.zeros(0), np.zeros(0)
    width = int((hi - lo).max())
    windows = lo[:, None] + np.arange(width)[None, :]
    inside = windows < hi[:, None]
    k = lo + np.argmax(np.where(inside, power[np.minimum(windows, power.size - 1)], -1.0), axis=1)
    level = np.median(power[k[:, None] + np.arange(-25, 26)[None, :]], axis=1)
    ok = (level > 0) & (power[k] >= PEAK_SIGNIFICANCE * level)
    m, k, level = m[ok], k[ok], level[ok]
    la, lb, lc = (np.log(power[k + j] + 1e-300) for j in (-1, 0, 1))
    denom = la - 2 * lb + lc
    delta = np.where(denom < 0, 0.5 * (la - lc) / np.where(denom < 0, denom, -1.0), 0.0)
    freqs = (k + np.clip(delta, -0.5, 0.5)) * df
    return m, freqs, power[k] / level


def initial_fundamental_hz(harmonics: np.ndarray, peaks_hz: np.ndarray, bin_hz: float) -> float:
    """Least-squares f0 from peak frequencies f_m = m f0: f0 = sum m f_m / sum m^2.

    Peaks more than 2 bins from m times the median of f_m / m are dropped first (a strong
    FID or another line near a harmonic).
    """
    guess = float(np.median(peaks_hz / harmonics))
    ok = np.abs(peaks_hz - harmonics * guess) <= 2 * bin_hz
    if ok.sum() == 0:
        return guess
    m, f = harmonics[ok], peaks_hz[ok]
    return float(np.sum(m * f) / np.sum(m * m))


def choose_mains(spectrum: np.ndarray, n_samples: int, sample_rate_hz: float, choice: str | float,
                 max_frequency_hz: float) -> tuple[float, np.ndarray, np.ndarray, np.ndarray] | None:
    """Nominal fundamental and its significant peaks (m, f_m, significance), or None when the record shows no hum.

    choice is 50, 60 or "auto"; auto takes the nominal with more significant harmonics
    (ties: the larger summed significance).  Only peaks within 2 bins of m f0 for the
    least-squares f0 of the peaks count (an FID or a stray line is not a comb); fewer than
    MIN_HARMONICS such peaks means no hum is modelled.
    """
    nominals = NOMINALS_HZ if choice == "auto" else (float(choice),)
    best: tuple | None = None
    bin_hz = sample_rate_hz / n_samples
    for nominal in nominals:
        m, f, sig = find_harmonic_peaks(spectrum, n_samples, sample_rate_hz, nominal, max_frequency_hz)
        if m.size:
            f0 = initial_fundamental_hz(m, f, bin_hz)
            consistent = np.abs(f - m * f0) <= 2 * bin_hz
            m, f, sig = m[consistent], f[consistent], sig[consistent]
        score = (float(m.size), float(np.sum(np.log(sig))) if sig.size else 0.0)
        if m.size >= MIN_HARMONICS and (best is None or score > best[:2]):
            best = (*score, nominal, m, f, sig)
    if best is None:
        return None
    return best[2], best[3], best[4], best[5]


def _harmonic_bins(harmonics: np.ndarray, f0: float, n_samples: int, sample_rate_hz: float) -> np.ndarray:
    """(M, 2 H + 1) bins within +/-FIT_HALF_WIDTH_BINS of each harmonic's nearest bin."""
    centres = np.round(harmonics * f0 * n_samples / sample_rate_hz).astype(int)
    return centres[:, None] + np.arange(-FIT_HALF_WIDTH_BINS, FIT_HALF_WIDTH_BINS + 1)[None, :]


def _usable(harmonics: np.ndarray, f0: float, n_samples: int, sample_rate_hz: float, n_bins: int,
            exclude_hz: tuple[tuple[float, float], ...]) -> np.ndarray:
    """True for harmonics whose whole bin window lies inside the spectrum and outside exclude_hz."""
    bins = _harmonic_bins(harmonics, f0, n_samples, sample_rate_hz)
    ok = (bins.min(axis=1) > 0) & (bins.max(axis=1) < n_bins - 1)
    df = sample_rate_hz / n_samples
    for lo, hi in exclude_hz:
        ok &= (bins.max(axis=1) * df < lo) | (bins.min(axis=1) * df > hi)
    return ok


def fit_fundamental(spectrum: np.ndarray, n_samples: int, sample_rate_hz: float, f0_start_hz: float,
                    harmonics: np.ndarray, iterations: int = 4) -> tuple[float, float]:
    """(f0, sd(f0)) by variable projection on the bins around the given harmonics.

    Model on those bins: X_k = sum_m c_m S(u_mk) / 2 (the small negative-frequency images are
    left out here; they shift f0 by far less than its sd).  For each f0 the c_m solve the
    normal equations A^H A c = A^H X, A_km = S(u_mk)/2; the Gauss-Newton step uses the
    Jacobian J = sum_m c_m dS(u_m)/df0 / 2 projected off the columns of A:
    df0 = Re(J_perp^H res) / |J_perp|^2, var(f0) = s^2 / |J_perp|^2, s^2 = |res|^2 / (2K - 2M - 1)
    per real component.  Stops when the step is below 10 % of sd(f0).
    """
    f0 = float(f0_start_hz)
    sd = float("inf")
    harmonics = np.asarray(harmonics, dtype=int)
    for _ in range(iterations + 1):
        bins = np.unique(_harmonic_bins(harmonics, f0, n_samples, sample_rate_hz))
        if bins.size <= 2 * harmonics.size + 1:
            break
        log_z = 2j * np.pi * harmonics * f0 / sample_rate_hz
        su, dsu = line_sums(log_z, bins, n_samples)
        a = 0.5 * su
        y = spectrum[bins]
        gram = np.conj(a) @ a.T
        c = np.linalg.solve(gram, np.conj(a) @ y)
        res = y - c @ a
        jac = (c * harmonics) @ (0.5 * dsu) * (2j * np.pi / sample_rate_hz)
        jac_perp = jac - np.linalg.solve(gram, np.conj(a) @ jac) @ a
        norm = float(np.vdot(jac_perp, jac_perp).real)
        if norm <= 0:
            break
        s2 = float(np.vdot(res, res).real) / max(1, 2 * bins.size - 2 * harmonics.size - 1)
        sd = float(np.sqrt(s2 / norm))
        step = float(np.vdot(jac_perp, res).real) / norm
        limit = 0.3 * sample_rate_hz / n_samples / harmonics.max()
        f0 += float(np.clip(step, -limit, limit))
        if abs(step) < 0.1 * sd:
            break
    return f0, sd


def fit_amplitudes(spectrum: np.ndarray, n_samples: int, sample_rate_hz: float, f0: float, harmonics: np.ndarray,
                   coupled: bool = False) -> np.ndarray:
    """Complex amplitudes c_m at a known f0, from the bins within +/-3 of each harmonic.

    coupled=False: each harmonic alone, c_m = sum_k conj(A_km) X_k / sum_k |A_km|^2 (the
    leakage of the others, about |c_m'| / (pi d) at d bins, is neglected: fine for a line
    search).  coupled=True: all at once with every harmonic's leakage into every bin and the
    negative-frequency images (one refinement): A^H A c = A^H (X - image); use this for
    subtraction.
    """
    harmonics = np.asarray(harmonics, dtype=int)
    if harmonics.size == 0:
        return np.zeros(0, dtype=complex)
    log_z = 2j * np.pi * harmonics * f0 / sample_rate_hz
    if not coupled:
        bins = _harmonic_bins(harmonics, f0, n_samples, sample_rate_hz)
        su, _ = line_sums(log_z, bins, n_samples, derivative=False)
        a = 0.5 * su
        return np.sum(np.conj(a) * spectrum[bins], axis=1) / np.sum(np.abs(a) ** 2, axis=1)
    bins = np.unique(_harmonic_bins(harmonics, f0, n_samples, sample_rate_hz))
    su, _ = line_sums(log_z, bins, n_samples, derivative=False)
    sv, _ = line_sums(-log_z, bins, n_samples, derivative=False)
    a, image = 0.5 * su, 0.5 * sv
    gram = np.conj(a) @ a.T
    c = np.linalg.solve(gram, np.conj(a) @ spectrum[bins])
    return np.linalg.solve(gram, np.conj(a) @ (spectrum[bins] - np.conj(c) @ image))


def fit_mains(spectrum: np.ndarray, n_samples: int, sample_rate_hz: float, f0_start_hz: float,
              harmonics: np.ndarray, exclude_hz: tuple[tuple[float, float], ...] = (),
              strong: np.ndarray | None = None, coupled: bool = False, iterations: int = 4) -> MainsFit:
    """f0 from the strong harmonics (at most MAX_F0_HARMONICS, outside exclude_hz), then every c_m.

    Harmonics whose bins fall in exclude_hz get c_m = 0: fit them jointly with the line there.
    iterations=0 keeps f0 and only solves the amplitudes.
    """
    harmonics = np.asarray(harmonics, dtype=int)
    ok = _usable(harmonics, f0_start_hz, n_samples, sample_rate_hz, spectrum.size, exclude_hz)
    strong = harmonics if strong is None else np.asarray(strong, dtype=int)
    for_f0 = strong[np.isin(strong, harmonics[ok])][:MAX_F0_HARMONICS]
    f0, sd = float(f0_start_hz), float("inf")
    if iterations > 0 and for_f0.size >= 1:
        f0, sd = fit_fundamental(spectrum, n_samples, sample_rate_hz, f0_start_hz, for_f0, iterations)
    amplitudes = np.zeros(harmonics.size, dtype=complex)
    amplitudes[ok] = fit_amplitudes(spectrum, n_samples, sample_rate_hz, f0, harmonics[ok], coupled)
    return MainsFit(f0, sd, harmonics, amplitudes, for_f0)


def mains_spectrum(bins: np.ndarray, n_samples: int, sample_rate_hz: float, mains: MainsFit,
                   half_width_bins: int | None = None) -> np.ndarray:
    """DFT of the hum model on the given bins: sum_m (a_m P_mk + b_m Q_mk), c_m = a_m - i b_m.

    half_width_bins limits each harmonic to bins within that distance of it (its leakage
    tail beyond, about |c_m| N / (2 pi d) at d bins, is left out); None evaluates exactly.
    """
    bins = np.asarray(bins)
    out = np.zeros(bins.size, dtype=complex)
    if mains.harmonics.size == 0:
        return out
    freqs = mains.frequencies_hz()
    a, b = mains.amplitudes.real, -mains.amplitudes.imag
    if half_width_bins is None:
        p, q = line_columns(bins, n_samples, sample_rate_hz, freqs, np.zeros_like(freqs))
        return a @ p + b @ q
    # each harmonic on its own +/-half_width_bins window, scattered onto the requested bins
    centres = np.round(freqs * n_samples / sample_rate_hz).astype(int)
    local = centres[:, None] + np.arange(-half_width_bins, half_width_bins + 1)[None, :]
    p, q = line_columns(local, n_samples, sample_rate_hz, freqs, np.zeros_like(freqs))
    values = a[:, None] * p + b[:, None] * q
    order = np.argsort(bins)
    pos = np.clip(np.searchsorted(bins[order], local), 0, bins.size - 1)
    hit = bins[order][pos] == local
    np.add.at(out, order[pos[hit]], values[hit])
    return out


def subtract_mains(record: np.ndarray, sample_rate_hz: float, mains: MainsFit | None) -> np.ndarray:
    """The record minus the hum model: irfft(X - sum_m (a_m P_m + b_m Q_m)) on every bin (a new array).

    mains must have been fitted to this record's DFT (same length).
    """
    x = np.asarray(record, dtype=float)
    if mains is None or mains.harmonics.size == 0:
        return x.copy()
    spectrum = np.fft.rfft(x)
    return np.fft.irfft(spectrum - mains_spectrum(np.arange(spectrum.size), x.size, sample_rate_hz, mains), x.size)


def estimate_mains(spectrum: np.ndarray, n_samples: int, sample_rate_hz: float, choice: str | float,
                   max_frequency_hz: float, exclude_hz: tuple[tuple[float, float], ...] = ()) -> MainsFit | None:
    """Steps 1-3 of the module docstring: None when the record shows no hum.

    All harmonics m f0 below max_frequency_hz are modelled, significant or not (a weak
    harmonic still biases a line next to it); f0 comes from the most significant ones.
    """
    found = choose_mains(spectrum, n_samples, sample_rate_hz, choice, max_frequency_hz)
    if found is None:
        return None
    nominal, peaks_m, peaks_hz, significance = found
    f0 = initial_fundamental_hz(peaks_m, peaks_hz, sample_rate_hz / n_samples)
    top = min(max_frequency_hz, sample_rate_hz / 2 - 4 * sample_rate_hz / n_samples)
    harmonics = np.arange(1, int(top / f0) + 1)
    strong = peaks_m[np.argsort(-significance)]
    return fit_mains(spectrum, n_samples, sample_rate_hz, f0, harmonics, exclude_hz, strong)


def refit_mains(spectrum: np.ndarray, n_samples: int, sample_rate_hz: float, previous: MainsFit,
                exclude_hz: tuple[tuple[float, float], ...] = (), coupled: bool = False,
                iterations: int = 3) -> MainsFit:
    """fit_mains started from a previous fit (e.g. after the FID model was subtracted)."""
    return fit_mains(spectrum, n_samples, sample_rate_hz, previous.fundamental_hz, previous.harmonics, exclude_hz,
                     previous.strong, coupled, iterations)


def comb_bins(mains: MainsFit, n_samples: int, sample_rate_hz: float) -> np.ndarray:
    """The bins a mains fit looks at (+/-3 around each harmonic), sorted, inside the spectrum."""
    bins = np.unique(_harmonic_bins(mains.harmonics, mains.fundamental_hz, n_samples, sample_rate_hz))
    return bins[(bins > 0) & (bins < n_samples // 2)]


__all__ = ["MainsFit", "hann_smoothed", "find_harmonic_peaks", "initial_fundamental_hz", "choose_mains",
           "fit_fundamental", "fit_amplitudes", "fit_mains", "mains_spectrum", "subtract_mains", "estimate_mains", "refit_mains",
           "comb_bins", "fit_harmonics_on_samples", "harmonics_waveform", "NOMINALS_HZ"]


def fit_harmonics_on_samples(record: np.ndarray, usable: np.ndarray, sample_rate_hz: float, f0: float,
                             harmonics: np.ndarray) -> np.ndarray:
    """c_m of h(t) = sum_m Re(c_m exp(i 2 pi m f0 t)) + offset by least squares on the usable samples only.

    For a record with gaps (pulses), where the DFT line shape of `fit_amplitudes` does not
    hold: columns cos(2 pi m f0 t) and sin(2 pi m f0 t), t = k / fs, so c_m = a_m - i b_m.
    """
    harmonics = np.asarray(harmonics, dtype=int)
    if harmonics.size == 0:
        return np.zeros(0, dtype=complex)
    k = np.flatnonzero(usable)
    rotor = _rotors(k / sample_rate_hz, f0, harmonics)
    columns = np.concatenate([rotor.real, rotor.imag, np.ones((k.size, 1))], axis=1)
    # normal equations: the columns are far from collinear over a record of many periods
    coef = np.linalg.solve(columns.T @ columns, columns.T @ np.asarray(record, dtype=float)[k])
    m = harmonics.size
    return coef[:m] - 1j * coef[m:2 * m]


def harmonics_waveform(t_s: np.ndarray, f0: float, harmonics: np.ndarray, amplitudes: np.ndarray) -> np.ndarray:
    """h(t) = sum_m Re(c_m exp(i 2 pi m f0 t)) at the times t_s."""
    if np.asarray(harmonics).size == 0:
        return np.zeros(np.asarray(t_s).size)
    return np.real(_rotors(np.asarray(t_s, dtype=float), f0, harmonics) @ np.asarray(amplitudes))


def _rotors(t_s: np.ndarray, f0: float, harmonics: np.ndarray) -> np.ndarray:
    """exp(i 2 pi m f0 t) for every t (rows) and m (columns), by products of exp(i 2 pi f0 t) powers."""
    harmonics = np.asarray(harmonics, dtype=int)
    base = np.exp(2j * np.pi * f0 * t_s)
    out = np.empty((t_s.size, harmonics.size), dtype=complex)
    current, power = base ** harmonics[0], harmonics[0]
    for j, m in enumerate(harmonics):
        current = current * base ** (m - power) if m != power else current
        power = m
        out[:, j] = current
    return out
