"""Spin dynamics for the simulator: Bloch rotation through the switch-off, and isochromats.

Conventions: lab frame, Earth's field along +z, coil axis n = (sin a, 0, cos a).
Precession obeys dM/dt = gamma M x B, i.e. a rotation about B by the angle -gamma |B| dt
(Rodrigues' formula, exact for a field constant over the step).  The transverse
magnetisation m = Mx + i My then evolves as m(t) = m(0) exp(-i omega0 t).

The rotating frame turns with the spins at omega0; an isochromat k of offset d_omega_k sees
the effective field (b1x, b1y, d_omega_k / gamma), where b1 = b1x + i b1y is the slowly
varying part of Bx(t) exp(+i omega0 t) (the co-rotating half of a linear B1).
"""

from __future__ import annotations

import math

import numpy as np

MAX_DIRECTION_STEP_RAD = 2e-3
ENVELOPE_ROWS = 512  # time steps of the envelope recurrence held at once


def rotate(vectors: np.ndarray, axes: np.ndarray, angles: np.ndarray) -> np.ndarray:
    """Rotate vectors (..., 3) about unit axes (..., 3) by angles (...) (Rodrigues, right-handed)."""
    c = np.cos(angles)[..., None]
    s = np.sin(angles)[..., None]
    dot = np.sum(axes * vectors, axis=-1, keepdims=True)
    return vectors * c + np.cross(axes, vectors) * s + axes * dot * (1.0 - c)


def rotation_matrices(axes: np.ndarray, angles: np.ndarray) -> np.ndarray:
    """Rotation matrices (N, 3, 3) about unit axes (N, 3) by angles (N,) (Rodrigues, right-handed)."""
    x, y, z = axes[:, 0], axes[:, 1], axes[:, 2]
    c, s = np.cos(angles), np.sin(angles)
    C = 1.0 - c
    return np.stack([
        np.stack([c + x * x * C, x * y * C - z * s, x * z * C + y * s], axis=1),
        np.stack([y * x * C + z * s, c + y * y * C, y * z * C - x * s], axis=1),
        np.stack([z * x * C - y * s, z * y * C + x * s, c + z * z * C], axis=1),
    ], axis=1)


def compose(matrices: np.ndarray) -> np.ndarray:
    """Product R_N ... R_2 R_1 of rotations (N, ..., 3, 3) applied in order R_1 first, by pairwise reduction.

    Extra axes between the first and the last two are batch axes (one product each).
    """
    r = matrices
    while r.shape[0] > 1:
        if r.shape[0] % 2:
            r = np.concatenate([r, np.broadcast_to(np.eye(3), r.shape[1:])[None]], axis=0)
        r = np.matmul(r[1::2], r[0::2])
    return r[0]


def _rotation_y(theta: float) -> np.ndarray:
    c, s = math.cos(theta), math.sin(theta)
    return np.array([[c, 0.0, s], [0.0, 1.0, 0.0], [-s, 0.0, c]])


def integrate_switch_off(
    magnetisation: np.ndarray,
    gate: np.ndarray,
    sample_rate_hz: float,
    polarising_field_t: float,
    earth_field_t: float,
    axis_to_field_rad: float,
    gamma_rad_per_s_t: float,
) -> np.ndarray:
    """Carry M (lab frame) through the current ramp given as gate samples (fraction of full current).

    The field B(t) = Be z + Bp g(t) n stays in the x-z plane at angle theta(t) from z, with
    g linear between samples.  The integration runs in the frame F that turns with the
    field about y (angular velocity theta' y), where the Bloch equation
    dM/dt = gamma M x B becomes dM_F/dt = gamma M_F x B_eff with B_eff = |B| z + (theta'/gamma) y
    (Abragam 1961, ch. II, rotating frames).  Steps are cut so theta turns at most 2 mrad each;
    each step is an exact rotation about the mid-step B_eff.  Sudden ramps (theta' >> gamma|B|,
    i.e. dBp/dt >> gamma Be^2) leave M fixed in the lab; slow ones let it follow B to z.
    """
    n_axis = np.array([math.sin(axis_to_field_rad), 0.0, math.cos(axis_to_field_rad)])
    g = np.asarray(gate, dtype=float)
    dt = 1.0 / sample_rate_hz

    def theta_and_mag(gv: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        bx = polarising_field_t * gv * n_axis[0]
        bz = earth_field_t + polarising_field_t * gv * n_axis[2]
        return np.arctan2(bx, bz), np.hypot(bx, bz)

    theta_edges, _ = theta_and_mag(g)
    steps = np.maximum(1, np.ceil(np.abs(np.diff(theta_edges)) / MAX_DIRECTION_STEP_RAD).astype(int))
    interval = np.repeat(np.arange(g.size - 1), steps)
    first = np.repeat(np.cumsum(steps) - steps, steps)
    within = (np.arange(interval.size) - first + 0.5) / steps[interval]
    sub_dt = dt / steps[interval]
    g_lo, g_hi = g[interval], g[interval + 1]
    theta_mid, mag_mid = theta_and_mag(g_lo + (g_hi - g_lo) * within)
    theta_lo, _ = theta_and_mag(g_lo + (g_hi - g_lo) * (within - 0.5 / steps[interval]))
    theta_hi, _ = theta_and_mag(g_lo + (g_hi - g_lo) * (within + 0.5 / steps[interval]))
    theta_rate = (theta_hi - theta_lo) / sub_dt
    b_eff = np.stack([np.zeros_like(mag_mid), theta_rate / gamma_rad_per_s_t, mag_mid], axis=1)
    b_mag = np.linalg.norm(b_eff, axis=1)
    axes = b_eff / b_mag[:, None]
    total = compose(rotation_matrices(axes, -gamma_rad_per_s_t * b_mag * sub_dt)) if axes.size else np.eye(3)
    m_frame = _rotation_y(theta_edges[0]).T @ np.asarray(magnetisation, dtype=float)
    return _rotation_y(theta_edges[-1]) @ (total @ m_frame)


def lorentzian_isochromats(half_width_rad_per_s: float, span_s: float, width_factor: float = 50.0,
                           max_count: int = 4001) -> tuple[np.ndarray, np.ndarray]:
    """Isochromat offsets on a uniform grid with Lorentzian weights (trapezoid rule).

    Offsets d_k = k delta for |d_k| <= W = width_factor * gamma, weights
    w_k = delta * (gamma / pi) / (gamma^2 + d_k^2).  By Poisson summation the weighted sum
    sum_k w_k exp(-i d_k t) equals exp(-gamma |t|) up to aliases exp(-gamma |t - 2 pi n / delta|),
    so delta = 2 pi / (span_s + 10 / gamma) keeps them below e^-10 for |t| <= span_s.  The tails
    beyond W (mass 2/(pi width_factor)) dephase within ~1/W and are left out, not renormalised.
    A zero width gives one isochromat of weight 1.
    """
    if half_width_rad_per_s <= 0.0:
        return np.zeros(1), np.ones(1)
    g = half_width_rad_per_s
    delta = 2.0 * np.pi / (span_s + 10.0 / g)
    half = min((max_count - 1) // 2, int(np.ceil(width_factor * g / delta)))
    offsets = np.arange(-half, half + 1) * delta
    weights = delta * (g / np.pi) / (g**2 + offsets**2)
    return offsets, weights


def pulse_propagators(
    b1_blocks_t: np.ndarray, block_durations_s: np.ndarray, offsets_rad_per_s: np.ndarray, gamma_rad_per_s_t: float,
) -> np.ndarray:
    """Rotation (K, 3, 3) of each isochromat through a pulse given as B1 blocks.

    Block j holds the rotating-frame field b1_j (complex, T) for block_durations_s[j]; an
    isochromat of offset dw_k turns about B_eff = (b1x, b1y, dw_k / gamma) by -gamma |B_eff| dt_j
    (exact for a field constant over the block).  The blocks' rotations are composed in order.
    """
    b1 = np.asarray(b1_blocks_t, dtype=complex)[:, None]
    k = offsets_rad_per_s[None, :]
    w = np.stack(np.broadcast_arrays(gamma_rad_per_s_t * b1.real, gamma_rad_per_s_t * b1.imag, k), axis=-1)
    mag = np.linalg.norm(w, axis=-1)
    axes = w / np.where(mag > 0, mag, 1.0)[..., None]
    axes[mag == 0] = (0.0, 0.0, 1.0)
    angles = -mag * np.asarray(block_durations_s)[:, None]
    rotations = rotation_matrices(axes.reshape(-1, 3), angles.reshape(-1)).reshape(*angles.shape, 3, 3)
    return compose(rotations)


def pulse_rotation(
    vectors: np.ndarray, b1_complex_t: complex, offsets_rad_per_s: np.ndarray, gamma_rad_per_s_t: float,
    duration_s: float,
) -> np.ndarray:
    """Rotate isochromat vectors (K, 3) in the rotating frame under B_eff = (b1x, b1y, d_omega/gamma)."""
    wx = gamma_rad_per_s_t * b1_complex_t.real
    wy = gamma_rad_per_s_t * b1_complex_t.imag
    w = np.stack([np.full_like(offsets_rad_per_s, wx), np.full_like(offsets_rad_per_s, wy), offsets_rad_per_s], axis=1)
    mag = np.linalg.norm(w, axis=1)
    safe = np.where(mag > 0, mag, 1.0)
    return rotate(vectors, w / safe[:, None], -mag * duration_s)


def rotate_about_z(vectors: np.ndarray, angle_rad: float) -> np.ndarray:
    """Turn vectors (K, 3) about z by angle_rad (right-handed): m = Mx + i My -> m exp(i angle)."""
    if angle_rad == 0.0:
        return vectors
    m = (vectors[:, 0] + 1j * vectors[:, 1]) * np.exp(1j * angle_rad)
    return np.stack([m.real, m.imag, vectors[:, 2]], axis=1)


def free_evolution(
    vectors: np.ndarray, offsets_rad_per_s: np.ndarray, duration_s: float, t1_s: float, t2_s: float,
    equilibrium_z: float,
) -> np.ndarray:
    """Free precession in the rotating frame with T2 decay and T1 recovery towards equilibrium_z."""
    m = vectors[:, 0] + 1j * vectors[:, 1]
    m = m * np.exp(-1j * offsets_rad_per_s * duration_s) * math.exp(-duration_s / t2_s)
    e1 = math.exp(-duration_s / t1_s)
    mz = vectors[:, 2] * e1 + equilibrium_z * (1.0 - e1)
    return np.stack([m.real, m.imag, mz], axis=1)


def transverse_envelope(
    vectors: np.ndarray, offsets_rad_per_s: np.ndarray, weights: np.ndarray, times_s: np.ndarray, t2_s: float
) -> np.ndarray:
    """Weighted rotating-frame transverse magnetisation sum_k w_k m_k exp(-i dw_k t) exp(-t/T2) at times_s.

    On a uniform grid t_j = t_0 + j dt the phase factors come from the recurrence
    exp(-i dw t_j) = exp(-i dw t_(j-1)) exp(-i dw dt) (one complex multiplication per entry),
    ENVELOPE_ROWS times at a time so that memory stays bounded.
    """
    m = (vectors[:, 0] + 1j * vectors[:, 1]) * weights
    t = np.asarray(times_s, dtype=float)
    steps = np.diff(t)
    if t.size <= 2 or not np.allclose(steps, steps[0], rtol=1e-9, atol=0.0):
        phase = np.exp(-1j * np.outer(t, offsets_rad_per_s))
        return (phase @ m) * np.exp(-t / t2_s)
    step = np.exp(-1j * offsets_rad_per_s * steps[0])
    current = m * np.exp(-1j * offsets_rad_per_s * t[0])
    out = np.empty(t.size, dtype=complex)
    out[0] = current.sum()
    for start in range(1, t.size, ENVELOPE_ROWS):
        rows = min(ENVELOPE_ROWS, t.size - start)
        factors = np.empty((rows, m.size), dtype=complex)
        factors[:] = step
        factors[0] *= current
        np.cumprod(factors, axis=0, out=factors)
        out[start:start + rows] = factors.sum(axis=1)
        current = factors[-1]
    return out * np.exp(-t / t2_s)
