"""JCAMP-DX export of an FID and its spectrum (one compound file, two NTUPLES blocks).

Follows JCAMP-DX 5.01 (McDonald & Wilks, Appl. Spectrosc. 42:151, 1988), its NMR
extension (Davies & Lampen, Appl. Spectrosc. 47:1093, 1993) and the IUPAC recommendations
for NMR (Pure Appl. Chem. 71:1549, 1999): a LINK block holding an `NMR FID` block and an
`NMR SPECTRUM` block, each `##DATA CLASS= NTUPLES` with a real and an imaginary page written
as `(X++(R..R)), XYDATA` and `(X++(I..I)), XYDATA` tables in AFFN (plain decimal) form,
`##.OBSERVE FREQUENCY=` in MHz, every line at most 80 characters.

Values are written as integers y_int = round(y / FACTOR) with FACTOR = max|y| / 2e9, so
the round trip loses at most FACTOR / 2 (5 parts in 1e10 of full scale).  Abscissae on the
data lines are x / FACTOR(x): the sample index for the FID (FACTOR = 1 / sample rate) and
the bin index for the spectrum (FACTOR = bin width).

What the pages hold (an Earth's-field FID is recorded directly at audio frequency, on one
channel): the FID's real page is the recorded signal in volts at the converter, from the
first acquired sample (its time after the end of the switch-off or pulse is ##FIRST); the
imaginary page is its Hilbert transform (the quadrature of the analytic signal).  The
spectrum is X_k = sum_n x_n exp(-2 pi i k n / N) of the real FID (numpy.fft.rfft: no window,
no zero filling) at k * fs / N Hz.  The observe frequency is the fitted Larmor frequency.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
from scipy.signal import hilbert

MAX_LINE = 80
INTEGER_FULL_SCALE = 2e9


@dataclass(frozen=True)
class FidForExport:
    title: str
    signal_v: np.ndarray  # real FID, volts at the converter
    sample_rate_hz: float
    first_time_s: float  # time of the first sample after the FID's time zero
    observe_frequency_hz: float
    averages: int
    origin: str
    owner: str
    instrument: str
    started_at_s: float
    run_id: str


def _ldr(label: str, value: object) -> str:
    line = f"##{label}= {value}"
    if len(line) > MAX_LINE:
        raise ValueError(f"JCAMP-DX record longer than {MAX_LINE} characters: {line[:40]}...")
    return line


def _factor(values: np.ndarray) -> float:
    peak = float(np.max(np.abs(values))) if values.size else 0.0
    return peak / INTEGER_FULL_SCALE if peak > 0 else 1.0


def affn_table(x_first_index: int, y: np.ndarray, y_factor: float) -> list[str]:
    """Data lines `X y1 y2 ...` (X = abscissa index of y1), as many values as fit in 80 characters."""
    ints = np.rint(np.asarray(y) / y_factor).astype(np.int64)
    lines, i, n = [], 0, ints.size
    while i < n:
        line = str(x_first_index + i)
        start = i
        while i < n:
            token = f" {ints[i]}"
            if len(line) + len(token) > MAX_LINE:
                break
            line += token
            i += 1
        if i == start:
            raise ValueError("a JCAMP-DX data value does not fit on one line")
        lines.append(line)
    return lines


def _ntuples_block(kind: str, x_name: str, x_unit: str, y_name: str, y_unit: str, x_first: float, x_step: float,
                   x_first_index: int, real: np.ndarray, imag: np.ndarray, head: list[str], block_id: int) -> list[str]:
    n = real.size
    x_last = x_first + (n - 1) * x_step
    fr, fi = _factor(real), _factor(imag)
    lines = head + [
        _ldr("DATA CLASS", "NTUPLES"), _ldr("BLOCK_ID", block_id), _ldr("NTUPLES", kind),
        _ldr("VAR_NAME", f"{x_name}, {y_name}/REAL, {y_name}/IMAG, PAGE NUMBER"),
        _ldr("SYMBOL", "X, R, I, N"),
        _ldr("VAR_TYPE", "INDEPENDENT, DEPENDENT, DEPENDENT, PAGE"),
        _ldr("VAR_FORM", "AFFN, AFFN, AFFN, AFFN"),
        _ldr("VAR_DIM", f"{n}, {n}, {n}, 2"),
        _ldr("UNITS", f"{x_unit}, {y_unit}, {y_unit},"),
        _ldr("FIRST", f"{x_first:.10g}, {real[0]:.10g}, {imag[0]:.10g}, 1"),
        _ldr("LAST", f"{x_last:.10g}, {real[-1]:.10g}, {imag[-1]:.10g}, 2"),
        _ldr("MIN", f"{x_first:.10g}, {real.min():.10g}, {imag.min():.10g}, 1"),
        _ldr("MAX", f"{x_last:.10g}, {real.max():.10g}, {imag.max():.10g}, 2"),
        _ldr("FACTOR", f"{x_step:.12g}, {fr:.10g}, {fi:.10g}, 1"),
    ]
    for page, (symbol, values, factor) in enumerate((("R", real, fr), ("I", imag, fi)), start=1):
        lines += [_ldr("PAGE", f"N={page}"), _ldr("NPOINTS", n),
                  _ldr("DATA TABLE", f"(X++({symbol}..{symbol})), XYDATA")]
        lines += affn_table(x_first_index, values, factor)
    lines += [_ldr("END NTUPLES", kind), "##END="]
    return lines


def _common_head(fid: FidForExport, title: str, data_type: str) -> list[str]:
    return [_ldr("TITLE", title[:70]), _ldr("JCAMP-DX", "5.01"), _ldr("DATA TYPE", data_type),
            _ldr("ORIGIN", fid.origin[:60]), _ldr("OWNER", fid.owner[:60]),
            _ldr("LONG DATE", time.strftime("%Y/%m/%d %H:%M:%S", time.gmtime(fid.started_at_s))),
            _ldr("SPECTROMETER/DATA SYSTEM", fid.instrument[:50]),
            _ldr(".OBSERVE FREQUENCY", f"{fid.observe_frequency_hz / 1e6:.12f}"),
            _ldr(".OBSERVE NUCLEUS", "^1H"), _ldr(".AVERAGES", fid.averages),
            _ldr("$RUN ID", fid.run_id)]


def jcampdx_lines(fid: FidForExport) -> list[str]:
    """The whole compound file as lines (each <= 80 characters)."""
    real = np.asarray(fid.signal_v, dtype=float)
    if real.size < 2:
        raise ValueError("an FID needs at least two samples")
    imag = np.imag(hilbert(real))
    fs = fid.sample_rate_hz
    first_index = int(round(fid.first_time_s * fs))
    _, spectrum = spectrum_of(real, fs)
    bin_hz = fs / real.size
    lines = [_ldr("TITLE", fid.title[:70]), _ldr("JCAMP-DX", "5.01"), _ldr("DATA TYPE", "LINK"), _ldr("BLOCKS", 2),
             "$$ FID: real page = recorded signal (V at the converter),",
             "$$      imaginary page = its Hilbert transform (analytic signal).",
             "$$ Spectrum: rfft of the real FID, no window, no zero filling."]
    lines += _ntuples_block("NMR FID", "TIME", "SECONDS", "FID", "VOLTS", first_index / fs, 1.0 / fs, first_index,
                            real, imag, _common_head(fid, f"{fid.title}: FID", "NMR FID"), 1)
    lines += _ntuples_block("NMR SPECTRUM", "FREQUENCY", "HZ", "SPECTRUM", "ARBITRARY UNITS", 0.0, bin_hz, 0,
                            spectrum.real, spectrum.imag, _common_head(fid, f"{fid.title}: spectrum", "NMR SPECTRUM"), 2)
    lines.append("##END=")
    too_long = [line for line in lines if len(line) > MAX_LINE]
    if too_long:
        raise AssertionError(f"JCAMP-DX line longer than {MAX_LINE}: {too_long[0][:40]}...")
    return lines


def spectrum_of(signal_v: np.ndarray, sample_rate_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """(frequency_hz, complex spectrum) exactly as written: numpy.fft.rfft of the real FID."""
    x = np.asarray(signal_v, dtype=float)
    return np.fft.rfftfreq(x.size, 1.0 / sample_rate_hz), np.fft.rfft(x)

