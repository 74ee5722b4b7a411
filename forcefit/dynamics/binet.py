"""Binet's equation for a power law, integrated in the polar angle with its sensitivities.

About the force centre, u = 1/r obeys u'' + u = c u**(-n-2) (primes: d/dtheta) for the
force F = k r**n per unit mass, with c = k/h**2 (h the specific angular momentum). The
solution from u and u' at a reference angle is integrated on compiled code (DOP853, the
tableau of `forcefit.dynamics._kernel`) with the variational equations of its four
parameters, so that one integration gives the path and its exact Jacobian, and with
g = integral of r**2 dtheta, which is 2 x the area swept (h times the time elapsed).

References
----------
J. P. M. Binet (1841), Comptes Rendus 13; H. Goldstein, C. Poole and J. Safko (2002),
Classical Mechanics, 3rd ed., section 3.7, equation (3.34); E. Hairer, S. P. Norsett and
G. Wanner (1993), Solving Ordinary Differential Equations I, section I.14 (variational
equations) and II.10 (DOP853).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numba import njit

from .._types import FloatArray
from ._kernel import FAILED, MAX_FACTOR, MIN_FACTOR, OK, SAFETY, STAGES, A, B, step_error

BINET_PARAMETERS = ("exponent", "log_ratio", "log_radius", "slope")
"""The parameters of a solution: n, ln(k/h**2), ln r and d ln r/dtheta at the reference angle."""

STATE = 11
"""u, u', du/dp and du'/dp for the four parameters p, and g = integral of r**2 dtheta."""

STEPS_PER_TURN = 1_000
"""Steps one leg may take per turn of polar angle it covers (plus as many again, and one per
requested angle): several times what a pendulum ellipse with b/a = 0.01 needs at rtol 1e-10.
A solution that needs more (a stiff law an optimiser strayed to) has failed."""

ESCAPE = 1e9
"""A solution whose u leaves [u0 / ESCAPE, u0 * ESCAPE] (escapes, or falls into the centre)
has failed."""


@njit(cache=True, inline="always")
def _derivative(state, out, exponent, ratio):  # type: ignore[no-untyped-def]
    u = state[0]
    power = ratio * u ** (-exponent - 2.0)
    out[0] = state[1]
    out[1] = power - u
    slope = -1.0 - (exponent + 2.0) * power / u
    for j in range(4):
        out[2 + j] = state[6 + j]
        out[6 + j] = slope * state[2 + j]
    out[6] -= power * np.log(u)
    out[7] += power
    out[10] = 1.0 / (u * u)


@njit(cache=True)
def _leg(angles, order, start, y0, exponent, ratio, rtol, atol, limit, out):  # type: ignore[no-untyped-def]
    """Integrate from ``start`` (state y0) through angles[order], one direction, stepping onto
    each; returns (OK or FAILED, steps taken). Error control on u and u' only."""
    k = np.empty((STAGES + 1, STATE))
    y = y0.copy()
    y_new = np.empty(STATE)
    stage = np.empty(STATE)
    low, high = y0[0] / ESCAPE, y0[0] * ESCAPE
    tolerances = np.full(2, atol)                 # error control on u and u' only
    t = start
    _derivative(y, k[0], exponent, ratio)
    h_abs = 0.01
    steps = 0
    for index in order:
        target = angles[index]
        while t != target:
            direction = 1.0 if target > t else -1.0
            accepted = False
            while not accepted:
                steps += 1
                if steps > limit or h_abs < 1e-15 * max(abs(t), 1.0):
                    return FAILED, steps
                h = min(h_abs, abs(target - t)) * direction
                for s in range(1, STAGES):
                    for i in range(STATE):
                        acc = 0.0
                        for j in range(s):
                            acc += A[s, j] * k[j][i]
                        stage[i] = y[i] + h * acc
                    _derivative(stage, k[s], exponent, ratio)
                for i in range(STATE):
                    acc = 0.0
                    for j in range(STAGES):
                        acc += B[j] * k[j][i]
                    y_new[i] = y[i] + h * acc
                _derivative(y_new, k[STAGES], exponent, ratio)
                error = step_error(y, y_new, k, tolerances, rtol, h, 2)
                if not np.isfinite(error) or not low < y_new[0] < high:
                    error = 1e10                       # a stage left the domain: shorten the step
                if error < 1.0:
                    factor = MAX_FACTOR if error == 0.0 else min(MAX_FACTOR, SAFETY * error ** (-1.0 / 8.0))
                    accepted = True
                    full = abs(target - t) > abs(h) * (1 + 1e-12)
                    h_abs = abs(h) * factor if full else max(h_abs, abs(h) * min(factor, 1.0))
                    t = t + h if full else target
                    for i in range(STATE):
                        y[i] = y_new[i]
                        k[0][i] = k[STAGES][i]
                else:
                    h_abs = abs(h) * max(MIN_FACTOR, SAFETY * error ** (-1.0 / 8.0))
        for i in range(STATE):
            out[index, i] = y[i]
    return OK, steps


@njit(cache=True)
def _integrate(angles, reference, y0, exponent, ratio, rtol, atol, per_turn, out):  # type: ignore[no-untyped-def]
    """Fill out[i, :] with the state at angles[i] (any order); returns (status, steps)."""
    order = np.argsort(angles)
    first_after = np.searchsorted(angles[order], reference)
    forward = order[first_after:].copy()
    backward = order[:first_after][::-1].copy()
    total = 0
    for leg in (forward, backward):
        if leg.size == 0:
            continue
        span = abs(angles[leg[-1]] - reference) / (2.0 * np.pi)
        limit = int(per_turn * (1.0 + span)) + leg.size
        code, steps = _leg(angles, leg, reference, y0, exponent, ratio, rtol, atol, limit, out)
        total += steps
        if code != OK:
            return FAILED, total
    return OK, total


@dataclass(frozen=True)
class BinetSolution:
    """u = 1/r along the requested polar angles and its derivatives.

    Attributes
    ----------
    u, slope : ndarray, shape (n_angles,)
        u (1/L) and du/dtheta (1/L) at each angle.
    sensitivity : ndarray, shape (n_angles, 4)
        du/dp for p in `BINET_PARAMETERS` (1/L per unit of p).
    swept : ndarray, shape (n_angles,)
        g = integral of r**2 dtheta from the reference angle (L**2): h times the time elapsed.
    steps : int
        Integration steps taken (accepted and rejected).
    ok : bool
        False when the solution escaped, fell into the centre or ran out of steps; the arrays
        are then nan.
    """

    u: FloatArray
    slope: FloatArray
    sensitivity: FloatArray
    swept: FloatArray
    steps: int
    ok: bool

    @property
    def radius(self) -> FloatArray:
        """r = 1/u (L)."""
        return 1.0 / self.u

    @property
    def cos_gamma(self) -> FloatArray:
        """cos(gamma) = u / sqrt(u**2 + u'**2): the radius's share of the distance to the path."""
        return self.u / np.hypot(self.u, self.slope)


def solve_binet(
    angles: FloatArray, reference: float, parameters: FloatArray, *, rtol: float = 1e-10,
    steps_per_turn: int = STEPS_PER_TURN,
) -> BinetSolution:
    """Integrate Binet's equation from the reference angle to each of ``angles``.

    Parameters
    ----------
    angles : ndarray, shape (n_angles,)
        Polar angles (rad), in any order, on either side of ``reference``.
    reference : float
        The angle (rad) where the solution starts.
    parameters : ndarray, shape (4,)
        n, ln(k/h**2) (k/h**2 in L**(-3-n)), ln r (r in L) and d ln r/dtheta at ``reference``.
    rtol : float
        Relative tolerance of u and u'.
    steps_per_turn : int
        Steps allowed per turn covered (see `STEPS_PER_TURN`).

    Returns
    -------
    BinetSolution

    Examples
    --------
    >>> theta = np.linspace(-3.0, 3.0, 7)      # Kepler: u = (1 + e cos theta)/p, k/h**2 = 1/p
    >>> exact = (1.0 + 0.5 * np.cos(theta)) / 2.0
    >>> solution = solve_binet(theta, 0.0, np.array([-2.0, np.log(0.5), np.log(2.0 / 1.5), 0.0]))
    >>> bool(np.allclose(solution.u, exact, rtol=1e-9))
    True
    """
    exponent, log_ratio, log_radius, slope = (float(value) for value in parameters)
    u0 = math.exp(-log_radius)
    start = np.zeros(STATE)
    start[0], start[1] = u0, -slope * u0                   # u' = -(d ln r/dtheta) / r
    start[4], start[8] = -u0, slope * u0                  # d/d ln r of u0 and u'0
    start[9] = -u0                                         # d u'0 / d slope
    out = np.full((angles.size, STATE), np.nan)
    code, steps = FAILED, 0
    if math.isfinite(exponent) and abs(log_ratio) < 700 and math.isfinite(slope):
        # a writeable copy, whatever the caller's flags: one compiled signature for every call
        code, steps = _integrate(np.array(angles, dtype=np.float64), float(reference), start,
                                 exponent, math.exp(log_ratio), rtol, 1e-12 * u0, steps_per_turn, out)
    ok = code == OK
    if not ok:
        out[:] = np.nan
    return BinetSolution(u=out[:, 0], slope=out[:, 1], sensitivity=out[:, 2:6], swept=out[:, 10],
                         steps=int(steps), ok=ok)
