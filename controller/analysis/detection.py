"""Is there an FID at all?  A generalised likelihood-ratio test against "interference and noise only".

Statistic (from the joint fit): Lambda = (RSS_0 - RSS_1) / s^2, RSS_1 the residual of the
full model, RSS_0 that of the same model without the FID's 2 S linear coefficients (S shots),
s^2 the residual variance per real component.  At a fixed (f, r), Lambda / (2 S) follows an
F(2 S, dof) distribution when there is no FID (Kay, Fundamentals of Statistical Signal
Processing II: Detection Theory, 1998, ch. 9, linear model GLRT).  Searching the band for
the best (f, r) tries about M_eff = TRIALS_PER_BIN x (bins in the band) independent cells,
so the threshold is set for a false-alarm probability P_fa / M_eff per cell (Bonferroni).
TRIALS_PER_BIN = 4 (frequency between bins and the decay rate) is common practice, no
source; the benchmarks measure the false-alarm rate this gives on noise-only records.
"""

from __future__ import annotations

from dataclasses import dataclass

from scipy.stats import f as f_distribution

FALSE_ALARM_PROBABILITY = 1e-3
TRIALS_PER_BIN = 4.0


@dataclass(frozen=True)
class Detection:
    detected: bool
    statistic: float
    threshold: float
    reason: str


def detection_threshold(n_shots: int, degrees_of_freedom: int, band_bins: int,
                        false_alarm_probability: float = FALSE_ALARM_PROBABILITY) -> float:
    """Lambda threshold: 2 S F^-1(1 - P_fa / M_eff; 2 S, dof), M_eff = TRIALS_PER_BIN x band_bins."""
    trials = max(1.0, TRIALS_PER_BIN * band_bins)
    numerator = 2 * n_shots
    return float(numerator * f_distribution.isf(false_alarm_probability / trials, numerator, max(1, degrees_of_freedom)))


def decide(statistic: float, n_shots: int, degrees_of_freedom: int, band_bins: int, rate_per_s: float,
           rate_sd_per_s: float, frequency_hz: float, band_hz: tuple[float, float]) -> Detection:
    """Detected when Lambda exceeds the threshold, the line lies in the band and does not grow.

    A growing fit (r < -3 sd(r)) is not an FID.
    """
    threshold = detection_threshold(n_shots, degrees_of_freedom, band_bins)
    if not band_hz[0] <= frequency_hz <= band_hz[1]:
        return Detection(False, statistic, threshold, "best line lies outside the band")
    if statistic <= threshold:
        return Detection(False, statistic, threshold, "no line above the noise")
    if rate_per_s < -3.0 * rate_sd_per_s:
        return Detection(False, statistic, threshold, "the line grows instead of decaying")
    return Detection(True, statistic, threshold, "line above the detection threshold")
