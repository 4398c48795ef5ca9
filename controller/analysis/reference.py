"""Reference-coil cancellation: a multichannel Wiener filter in the frequency domain.

A reference coil far from the sample (or wound to null the sample's field) picks up the
same interference as the signal coil through a different transfer function.  For bins k
in a block of B neighbouring bins the transfer functions H_j are taken as constant and
estimated by least squares, which is the multichannel Wiener solution on that block
(Walsh, J. Appl. Geophys. 2008; Mueller-Petke & Costabel, Near Surface Geophysics
12:199 (2014)):

    H = (R^H R)^-1 R^H X,   X_clean = X - R H,

R the (B x J) matrix of the references' spectra on the block, X the signal's.  A linear
canceller removes at most -10 log10(1 - coherence) dB (REFERENCE.md [from memory]).

This block-wise canceller cleans a whole band for display and for the line search; the
estimate itself fits the references jointly with the FID in `controller.analysis.linefit`,
so the FID cannot leak into H there.
"""

from __future__ import annotations

import numpy as np

BLOCK_HZ = 20.0


def cancel_references(spectrum: np.ndarray, references: list[np.ndarray] | tuple[np.ndarray, ...], bins: np.ndarray,
                      bin_hz: float, block_hz: float = BLOCK_HZ) -> np.ndarray:
    """Signal spectrum on `bins` with the references' Wiener estimate removed, block by block.

    Blocks hold at least max(4 J, block_hz / bin_hz) bins (J references); fewer bins in all: unchanged.
    """
    bins = np.asarray(bins)
    out = np.array(spectrum[bins], dtype=complex)
    if not references or bins.size == 0:
        return out
    refs = np.stack([np.asarray(r)[bins] for r in references], axis=1)
    width = max(4 * refs.shape[1], int(round(block_hz / bin_hz)))
    if bins.size < width:
        return out
    edges = np.linspace(0, bins.size, bins.size // width + 1).astype(int)
    for lo, hi in zip(edges[:-1], edges[1:]):
        r = refs[lo:hi]
        h, *_ = np.linalg.lstsq(r, out[lo:hi], rcond=None)
        out[lo:hi] = out[lo:hi] - r @ h
    return out
