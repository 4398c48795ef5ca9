"""Where the proton line sits among the mains harmonics.

Harmonics of a grid at f_m lie at n f_m; the line at f is nearest to n = round(f / f_m) and
lies f - n f_m from it.  A drift d of the fundamental moves the n-th harmonic by n d, so
near 2 kHz a 0.1 Hz drift moves it about 4 Hz [calc; REFERENCE.md "Noise"].
"""

from __future__ import annotations

from dataclasses import dataclass

GRID_FREQUENCIES_HZ: tuple[float, ...] = (50.0, 60.0)


@dataclass(frozen=True)
class HarmonicProximity:
    mains_hz: float
    harmonic: int
    harmonic_hz: float
    offset_hz: float          # line minus harmonic
    other_side_hz: float      # the neighbouring harmonic on the other side of the line

    @property
    def distance_hz(self) -> float:
        return abs(self.offset_hz)

    def shift_hz_per_grid_hz(self) -> float:
        """How far the harmonic moves per hertz of drift of the fundamental: n."""
        return float(self.harmonic)

    def as_dict(self) -> dict[str, float]:
        return {"mains_hz": self.mains_hz, "harmonic": self.harmonic, "harmonic_hz": self.harmonic_hz,
                "offset_hz": self.offset_hz, "distance_hz": self.distance_hz,
                "other_side_hz": self.other_side_hz}


def nearest_harmonic(frequency_hz: float, mains_hz: float) -> HarmonicProximity:
    """The harmonic n f_m nearest to frequency_hz (n >= 1) and the next one on the other side."""
    n = max(1, round(frequency_hz / mains_hz))
    offset = frequency_hz - n * mains_hz
    other = (n + 1 if offset >= 0 else max(1, n - 1)) * mains_hz
    return HarmonicProximity(mains_hz=mains_hz, harmonic=n, harmonic_hz=n * mains_hz, offset_hz=offset,
                             other_side_hz=other)
