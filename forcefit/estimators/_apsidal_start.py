"""A start for the orbit fit read off the path's shape in milliseconds, without trial orbits.

About the force centre the inverse radius u = 1/r of an orbit in a central power law is a
periodic function of the swept angle, its period twice the apsidal angle psi (the orbit
equation d²u/dphi² + u = F(1/u) / (h² u²) has no explicit angle in it). So:

1. the centre is the given one, or the likeliest of `centre_candidates` (steady areal rate);
2. the frequency omega = pi / psi is the one whose sinusoid in the swept angle fits u best
   (a scan over omega of a three-column linear fit, then a refinement with three harmonics);
3. the exponent follows from psi and r_max / r_min (`exponent_from_apsidal_angle`);
4. the angular momentum h is twice the areal rate; with n, r_min and r_max the energy
   equation at the two apsides gives h² = k H(n, r_min, r_max), hence k;
5. the state at the epoch lies on the fitted curve: r = 1/u(phi), radial velocity -h du/dphi,
   transverse velocity h / r;
6. one integration over the whole track compares the angle it sweeps with the samples'; a
   power law's orbit scaled in time by s has k s² and velocities s v, which sets the pace.

It serves only where every step is well posed: one track without drag, rotation or extra
forces, sampled densely enough that the angle unwraps, covering enough radial periods, with
a radial excursion and an apsidal frequency that stand out of the noise. Elsewhere it gives
None and the orbit fit starts from the trial-orbit search (`forcefit.estimators._start`),
which it also falls back on when the fit from this start misses the samples by more than
their noise.

References
----------
H. Goldstein, C. Poole and J. Safko (2002), Classical Mechanics, 3rd ed., chapter 3 (the
orbit equation in u = 1/r, the apsidal angle, the areal rate h / 2).
"""

from __future__ import annotations

import math

import numpy as np

from .._types import FloatArray
from ..dynamics.laws import exponent_from_apsidal_angle, potential
from ._start import StartProblem, _local_state, _vector, centre_candidates, swept_area

HARMONICS = 3
"""Harmonics of the apsidal frequency in the series for u(phi) (an eccentric orbit needs more
than one)."""

MIN_PER_TURN = 30
"""Fewest samples per turn about the centre on average: sparser samples leave the series in
doubt."""

MAX_STEP = math.pi / 4
"""Largest angle (rad) between neighbouring samples about the centre: beyond it the angle's
unwrapping may miss a turn."""

MIN_RADIAL_PERIODS = 1.5
"""Fewest radial periods (pericentre to pericentre) the track must cover."""

SCAN_POINTS = 150
"""Most samples the frequency scan uses (every m-th), at least 24 a turn."""

HIGHEST_FREQUENCY = 6.0
"""Highest apsidal frequency omega = pi / psi scanned (n up to about 30 near a circle)."""

LOWEST_FREQUENCY = 0.15
"""Lowest apsidal frequency scanned (n down to about -2.98 near a circle)."""

SIDE_PEAK = 0.5
"""A second dip of the frequency scan deeper than this fraction of the best one makes the
frequency ambiguous."""

MIN_EXCURSION = 20.0
"""The fundamental's amplitude in u must exceed this many of its standard errors."""


def _design(phi: FloatArray, omega: float) -> FloatArray:
    columns = [np.ones_like(phi)]
    for m in range(1, HARMONICS + 1):
        columns += [np.cos(m * omega * phi), np.sin(m * omega * phi)]
    return np.column_stack(columns)


def _series(phi: FloatArray, u: FloatArray, weight: FloatArray, omega: float) -> tuple[FloatArray, float]:
    """Coefficients of u(phi) in harmonics of omega and their weighted chi-square."""
    design = _design(phi, omega)
    coefficients, *_ = np.linalg.lstsq(design * weight[:, None], u * weight, rcond=None)
    misfit = (u - design @ coefficients) * weight
    return np.asarray(coefficients, dtype=float), float(misfit @ misfit)


def _scan(phi: FloatArray, u: FloatArray, weight: FloatArray, omegas: FloatArray) -> FloatArray:
    """Weighted chi-square of u ≈ a + b cos(omega phi) + c sin(omega phi) at every omega, from
    the 3 x 3 normal equations of all frequencies at once."""
    angle = np.multiply.outer(omegas, phi)
    cosine, sine = np.cos(angle), np.sin(angle)
    w2 = weight * weight
    wu = w2 * u
    normal = np.empty((omegas.size, 3, 3))
    right = np.empty((omegas.size, 3))
    normal[:, 0, 0], right[:, 0] = w2.sum(), wu.sum()
    normal[:, 0, 1] = normal[:, 1, 0] = cosine @ w2
    normal[:, 0, 2] = normal[:, 2, 0] = sine @ w2
    right[:, 1], right[:, 2] = cosine @ wu, sine @ wu
    normal[:, 1, 2] = normal[:, 2, 1] = (cosine * sine) @ w2
    normal[:, 1, 1] = (cosine * cosine) @ w2
    normal[:, 2, 2] = normal[:, 0, 0] - normal[:, 1, 1]
    with np.errstate(all="ignore"):
        try:
            solution = np.linalg.solve(normal, right[..., None])[..., 0]
        except np.linalg.LinAlgError:
            return np.full(omegas.size, np.inf)
    return float(wu @ u) - np.sum(solution * right, axis=1)


def _refine(phi: FloatArray, u: FloatArray, weight: FloatArray, low: float, high: float,
            tolerance: float) -> float:
    """The frequency in [low, high] whose harmonic series fits u best (golden-section search)."""
    ratio = (math.sqrt(5.0) - 1.0) / 2.0
    a, b = low, high
    c, d = b - ratio * (b - a), a + ratio * (b - a)
    fc, fd = _series(phi, u, weight, c)[1], _series(phi, u, weight, d)[1]
    while b - a > tolerance:
        if fc < fd:
            b, d, fd = d, c, fc
            c = b - ratio * (b - a)
            fc = _series(phi, u, weight, c)[1]
        else:
            a, c, fc = c, d, fd
            d = a + ratio * (b - a)
            fd = _series(phi, u, weight, d)[1]
    return 0.5 * (a + b)


def _frequency(phi: FloatArray, u: FloatArray, weight: FloatArray) -> float | None:
    """The apsidal frequency omega = pi / psi of u(phi), or None when the scan does not single
    one out (no dip, a rival dip, or fewer than MIN_RADIAL_PERIODS in the span)."""
    span = float(phi[-1] - phi[0])
    turns = span / (2 * math.pi)
    step = max(1, math.ceil(phi.size / max(SCAN_POINTS, 24 * turns)))
    spacing = 0.4 / span
    omegas = np.arange(LOWEST_FREQUENCY, HIGHEST_FREQUENCY, spacing)
    # The scan weighs u evenly: weights that follow the noise of u (r²) make the normal
    # equations of an eccentric orbit too ill-conditioned to single out the frequency.
    thinned = u[::step]
    chi = _scan(phi[::step], thinned, np.ones_like(thinned), omegas)
    if not np.all(np.isfinite(chi)):
        return None
    best = int(np.argmin(chi))
    level = float(np.sum((thinned - thinned.mean()) ** 2))          # the constant's misfit
    depth = level - float(chi[best])
    if not depth > 0 or best in (0, omegas.size - 1):
        return None
    width = 3 * math.pi / span                                     # the dip's own half-width
    away = np.all([np.abs(omegas - m * omegas[best]) > width for m in range(1, HARMONICS + 1)],
                  axis=0)                                           # nor a harmonic's dip
    interior = np.r_[False, (chi[1:-1] < chi[:-2]) & (chi[1:-1] <= chi[2:]), False]
    rivals = chi[away & interior]
    if rivals.size and level - float(rivals.min()) > SIDE_PEAK * depth:
        return None
    omega = _refine(phi, u, weight, float(omegas[max(best - 3, 0)]),
                    float(omegas[min(best + 3, omegas.size - 1)]), 0.02 / span)
    if omega * span < MIN_RADIAL_PERIODS * 2 * math.pi:
        return None
    return omega


def apsidal_start(problem: StartProblem, indices: list[int] | tuple[int, ...],
                  noise: list[float] | tuple[float, ...]) -> FloatArray | None:
    """A parameter vector of ``problem.model`` from the apsidal angle, the radii of the apsides
    and the areal rate, or None where the path does not fix them (see the module's notes).

    Parameters
    ----------
    problem : StartProblem
        The model, a held exponent and a given centre if any, each sample's sigma.
    indices : sequence of int
        The epoch's sample of each track.
    noise : sequence of float
        Each track's noise level (L).
    """
    model = problem.model
    if (len(model.tracks) != 1 or model.drag is not None or model.fit_rotation
            or model.rotation_rate != 0.0 or model.extra is not None):
        return None
    track, index = model.tracks[0], int(indices[0])
    if track.t is None:
        return None
    if problem.centre is not None:
        centre = problem.centre
    else:
        candidates = centre_candidates(track, noise[0])
        if not candidates:
            return None
        centre = candidates[0]
    t = np.asarray(track.t)
    offset = track.positions - np.asarray(centre)
    r = np.hypot(offset[:, 0], offset[:, 1])
    if not np.all(r > 0):
        return None
    theta = np.unwrap(np.arctan2(offset[:, 1], offset[:, 0]))
    steps = np.diff(theta)
    sense = 1.0 if theta[-1] > theta[0] else -1.0
    jitter = 8.0 * noise[0] / np.minimum(r[:-1], r[1:])  # the angle's noise, generously
    if (np.any(sense * steps < -jitter) or np.max(np.abs(steps)) > MAX_STEP
            or theta.size < MIN_PER_TURN * abs(theta[-1] - theta[0]) / (2 * math.pi)):
        return None                                   # turns back, or too sparse to unwrap
    phi = sense * (theta - theta[0])
    u, weight = 1.0 / r, r * r                        # weighted misfit of u ≈ misfit of r
    omega = _frequency(phi, u, weight)
    if omega is None:
        return None
    coefficients, chi2 = _series(phi, u, weight, omega)
    spread = math.sqrt(chi2 / max(phi.size - 2 * HARMONICS - 1, 1))
    amplitudes = np.hypot(coefficients[1::2], coefficients[2::2])
    if np.argmax(amplitudes) != 0:
        return None                                   # a harmonic outweighs the fundamental
    amplitude = float(amplitudes[0] * np.mean(weight))
    if amplitude < MIN_EXCURSION * spread * math.sqrt(2.0 / phi.size):
        return None                                   # the excursion is not resolved
    curve = _design(np.linspace(0.0, 2 * math.pi / omega, 721), omega) @ coefficients
    u_max, u_min = float(curve.max()), float(curve.min())
    if not u_min > 0:
        return None
    if problem.exponent is not None:
        exponent = float(problem.exponent)
    else:
        try:
            exponent = exponent_from_apsidal_angle(math.pi / omega, u_max / u_min)
        except ValueError:
            return None
    # h² = k H: the energy equation h² u² / 2 + V(1/u) = E at both apsides (V for k = 1).
    energy_step = float(potential(1.0 / u_min, exponent, 1.0) - potential(1.0 / u_max, exponent, 1.0))
    per_strength = 2.0 * energy_step / (u_max**2 - u_min**2)
    swept = swept_area(offset)
    h = abs(2.0 * float(np.polyfit(t - t.mean(), swept, 1)[0]))
    if not (per_strength > 0 and h > 0):
        return None
    strength = h * h / per_strength
    # The state at the epoch on the fitted curve.
    local = _local_state(track, index, centre, noise[0])
    angle = math.atan2(local[1], local[0])
    at = sense * (angle - theta[0])
    at += 2 * math.pi * round((phi[index] - at) / (2 * math.pi))
    u_here = float(_design(np.array([at]), omega)[0] @ coefficients)
    slope = sum(m * omega * (coefficients[2 * m] * math.cos(m * omega * at)
                             - coefficients[2 * m - 1] * math.sin(m * omega * at))
                for m in range(1, HARMONICS + 1))
    if not u_here > 0:
        return None
    radial, across = np.array([math.cos(angle), math.sin(angle)]), sense * np.array(
        [-math.sin(angle), math.cos(angle)])
    state = np.concatenate((radial / u_here, -h * slope * radial + h * u_here * across))
    log_force = math.log(strength) + exponent * math.log(model.reference_radius)
    vector = _vector(model, exponent, log_force, centre, [state], 0.0)
    # The pace: scale time until the orbit sweeps the samples' angle.
    first = model.track_columns(0)[2]
    for _ in range(2):
        predictions, ok = model.predict(vector[None, :])
        if not ok[0]:
            return None
        path = predictions[0][0] - np.asarray(centre)
        swept_angle = np.unwrap(np.arctan2(path[:, 1], path[:, 0]))
        scale = float((theta[-1] - theta[0]) / (swept_angle[-1] - swept_angle[0]))
        if not 0.8 < scale < 1.25:
            return None
        vector[1] += 2.0 * math.log(scale)
        vector[first + 2:first + 4] *= scale
    return vector
