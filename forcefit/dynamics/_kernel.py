"""Compiled (numba) DOP853 integration of many power-law orbits at once.

Each orbit of the batch is integrated on its own with step-size control, from the
epoch forwards and backwards, stepping exactly onto every requested time (so no
interpolation error is added). The Butcher tableau and the error estimate are those
of DOP853 (Hairer, Norsett & Wanner 1993, section II.10); forcefit reads the coefficient
tables from the public `scipy.integrate.DOP853` solver class (its ``A``, ``B``, ``C``, ``E3``
and ``E5``, already cut to its ``n_stages``) rather than retyping them.

On request (``dense``) an orbit instead takes the steps its error control wants and reads
the sample times off DOP853's seventh-order continuous extension (Hairer, Norsett & Wanner
1993, section II.6 and II.10; the class's ``A_EXTRA``, ``C_EXTRA`` and ``D``, evaluated as
scipy's ``Dop853DenseOutput`` does): far cheaper when the samples are much closer than the
steps (a pendulum filmed at 30 frames per second), at an interpolation error of the order
of the step tolerance. ``integrate_batch_parallel`` spreads the orbits of a batch over the
processor's cores.
"""

from __future__ import annotations

import os

import numpy as np
from numba import njit, prange

# The parallel kernel's threads wait for work asleep, not spinning: on a machine whose cores are
# shared (another process, a second test worker) spinning threads took twice the time of one
# thread (tests/test_cli.py's sampling, measured). Read when numba first loads OpenMP; a value
# the user set is kept.
os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")
from scipy.integrate import DOP853

STAGES = int(DOP853.n_stages)
A = np.ascontiguousarray(DOP853.A, dtype=np.float64)
B = np.ascontiguousarray(DOP853.B, dtype=np.float64)
C = np.ascontiguousarray(DOP853.C, dtype=np.float64)
E3 = np.ascontiguousarray(DOP853.E3, dtype=np.float64)
E5 = np.ascontiguousarray(DOP853.E5, dtype=np.float64)
A_EXTRA = np.ascontiguousarray(DOP853.A_EXTRA, dtype=np.float64)
C_EXTRA = np.ascontiguousarray(DOP853.C_EXTRA, dtype=np.float64)
D = np.ascontiguousarray(DOP853.D, dtype=np.float64)
EXTENDED = STAGES + 1 + C_EXTRA.size
"""Stages of a step with its continuous extension: the step's, the derivative at its end and
the extension's own."""
POWER = 3 + D.shape[0]
"""Terms of the continuous extension's polynomial in the step fraction."""

SAFETY, MIN_FACTOR, MAX_FACTOR = 0.9, 0.2, 10.0
BASE_STEPS, STEPS_PER_SAMPLE = 50_000, 500
"""Steps allowed per leg: BASE_STEPS + STEPS_PER_SAMPLE per requested time; beyond, the orbit
is given up as failed (an optimiser's trial orbit that dives at the centre, say)."""

CLOSEST = 1e-6
"""An orbit that comes nearer the centre than this fraction of its start radius has failed."""

OK, FAILED = 0, 1

(LINEAR, QUADRATIC, GR_MU, GR_INV_C2, YUKAWA_ALPHA, YUKAWA_INV_LENGTH, PERTURBER_MU,
 CENTRE_X, CENTRE_Y) = range(9)
N_FORCES = 9
"""Columns of the per-orbit ``forces`` array: drag coefficients, the first post-Newtonian
term's GM and 1/c², the Yukawa term's strength and 1/range, a perturbing body's GM, and the
centre (where the perturber's table is measured from)."""


@njit(cache=True, inline="always")
def _perturber_at(t, table_t, table_xy):  # type: ignore[no-untyped-def]
    """The perturber's position at t: 4-point Lagrange interpolation in its table."""
    m = table_t.size
    i = np.searchsorted(table_t, t) - 2
    i = min(max(i, 0), m - 4)
    px = 0.0
    py = 0.0
    for a in range(i, i + 4):
        weight = 1.0
        for b in range(i, i + 4):
            if b != a:
                weight *= (t - table_t[b]) / (table_t[a] - table_t[b])
        px += weight * table_xy[a, 0]
        py += weight * table_xy[a, 1]
    return px, py


@njit(cache=True, inline="always")
def _derivative(state, t, out, exponent, strength, forces, table_t, table_xy):  # type: ignore[no-untyped-def]
    x, y, vx, vy = state[0], state[1], state[2], state[3]
    r2 = x * x + y * y
    factor = -strength * r2 ** (0.5 * (exponent - 1.0))
    if forces[YUKAWA_ALPHA] != 0.0:
        scaled = np.sqrt(r2) * forces[YUKAWA_INV_LENGTH]
        factor *= 1.0 + forces[YUKAWA_ALPHA] * (1.0 + scaled) * np.exp(-scaled)
    drag = forces[LINEAR]
    if forces[QUADRATIC] != 0.0:
        drag += forces[QUADRATIC] * np.sqrt(vx * vx + vy * vy)
    ax = factor * x - drag * vx
    ay = factor * y - drag * vy
    if forces[GR_MU] != 0.0:
        mu = forces[GR_MU]
        r = np.sqrt(r2)
        scale = mu * forces[GR_INV_C2] / (r2 * r)
        radial = 4.0 * mu / r - (vx * vx + vy * vy)
        along = 4.0 * (x * vx + y * vy)
        ax += scale * (radial * x + along * vx)
        ay += scale * (radial * y + along * vy)
    if forces[PERTURBER_MU] != 0.0:
        px, py = _perturber_at(t, table_t, table_xy)
        px -= forces[CENTRE_X]
        py -= forces[CENTRE_Y]
        dx, dy = x - px, y - py
        d3 = (dx * dx + dy * dy) ** 1.5
        p3 = (px * px + py * py) ** 1.5
        ax -= forces[PERTURBER_MU] * (dx / d3 + px / p3)
        ay -= forces[PERTURBER_MU] * (dy / d3 + py / p3)
    out[0] = vx
    out[1] = vy
    out[2] = ax
    out[3] = ay


@njit(cache=True, inline="always")
def _derivative_plain(state, t, out, exponent, strength, forces, table_t, table_xy):  # type: ignore[no-untyped-def]
    """`_derivative` of an orbit under the power law and linear drag alone, with the same
    arithmetic (so the same bits). Its small body lets the compiler unroll a step's stages with
    DOP853's coefficients as constants: a step costs about 0.4 of the general one."""
    x, y, vx, vy = state[0], state[1], state[2], state[3]
    r2 = x * x + y * y
    factor = -strength * r2 ** (0.5 * (exponent - 1.0))
    drag = forces[LINEAR]
    out[0] = vx
    out[1] = vy
    out[2] = factor * x - drag * vx
    out[3] = factor * y - drag * vy


@njit(cache=True, inline="always")
def _is_plain(forces):  # type: ignore[no-untyped-def]
    """Whether an orbit feels nothing beyond the power law and linear drag."""
    return (forces[QUADRATIC] == 0.0 and forces[YUKAWA_ALPHA] == 0.0 and forces[GR_MU] == 0.0
            and forces[PERTURBER_MU] == 0.0)


@njit(cache=True, inline="always")
def step_error(y, y_new, k, atol, rtol, h, n_state):  # type: ignore[no-untyped-def]
    """DOP853's scaled error of one step (Hairer, Norsett & Wanner 1993, section II.10; as
    scipy's DOP853): the 5th- and 3rd-order estimates combined; below 1 the step is kept."""
    err5 = 0.0
    err3 = 0.0
    for i in range(n_state):
        scale = atol[i] + max(abs(y[i]), abs(y_new[i])) * rtol
        e5 = 0.0
        e3 = 0.0
        for j in range(STAGES + 1):
            e5 += E5[j] * k[j][i]
            e3 += E3[j] * k[j][i]
        err5 += (e5 / scale) ** 2
        err3 += (e3 / scale) ** 2
    if err5 == 0.0 and err3 == 0.0:
        return 0.0
    return abs(h) * err5 / np.sqrt((err5 + 0.01 * err3) * n_state)


@njit(cache=True, inline="always")
def _take_step(derivative, y, t, h, k, y_new, stage, exponent, strength, forces, table_t, table_xy, rtol,  # type: ignore[no-untyped-def]
               atol):
    """One DOP853 step of size h from (t, y) with k[0] = f(t, y): fills y_new, k[1:STAGES + 1]
    and returns the step's scaled error. ``derivative`` is `_derivative` or, for an orbit that
    `_is_plain`, `_derivative_plain`."""
    n_state = 4
    for s in range(1, STAGES):
        for i in range(n_state):
            acc = 0.0
            for j in range(s):
                acc += A[s, j] * k[j][i]
            stage[i] = y[i] + h * acc
        derivative(stage, t + C[s] * h, k[s], exponent, strength, forces, table_t, table_xy)
    for i in range(n_state):
        acc = 0.0
        for j in range(STAGES):
            acc += B[j] * k[j][i]
        y_new[i] = y[i] + h * acc
    derivative(y_new, t + h, k[STAGES], exponent, strength, forces, table_t, table_xy)
    return step_error(y, y_new, k, atol, rtol, h, n_state)


@njit(cache=True, inline="always")
def _first_step(y, derivative):  # type: ignore[no-untyped-def]
    """The first step's size, a hundredth of the shorter of the time to cross the radius at the
    current speed and under the current acceleration, and the radius itself."""
    speed = np.sqrt(y[2] ** 2 + y[3] ** 2)
    accel = np.sqrt(derivative[2] ** 2 + derivative[3] ** 2)
    radius = np.sqrt(y[0] ** 2 + y[1] ** 2)
    return 0.01 * min(radius / max(speed, 1e-300), np.sqrt(radius / max(accel, 1e-300))), radius


@njit(cache=True)
def _leg(times, order, start, y0, exponent, strength, forces, table_t, table_xy, rtol, atol, out):  # type: ignore[no-untyped-def]
    """Integrate from times[start]'s epoch state y0 through times[order] (one direction)."""
    n_state = 4
    k = np.empty((STAGES + 1, n_state))
    y = y0.copy()
    y_new = np.empty(n_state)
    stage = np.empty(n_state)
    t = start
    _derivative(y, t, k[0], exponent, strength, forces, table_t, table_xy)
    h_abs, radius = _first_step(y, k[0])
    steps = 0
    limit = BASE_STEPS + STEPS_PER_SAMPLE * order.size
    plain = _is_plain(forces)
    closest2 = (CLOSEST * radius) ** 2
    for index in order:
        target = times[index]
        while t != target:
            direction = 1.0 if target > t else -1.0
            accepted = False
            while not accepted:
                steps += 1
                if steps > limit or h_abs < 1e-15 * max(abs(t), 1.0):
                    return FAILED
                h = min(h_abs, abs(target - t)) * direction
                if plain:
                    error = _take_step(_derivative_plain, y, t, h, k, y_new, stage, exponent, strength,
                                       forces, table_t, table_xy, rtol, atol)
                else:
                    error = _take_step(_derivative, y, t, h, k, y_new, stage, exponent, strength, forces,
                                       table_t, table_xy, rtol, atol)
                if error < 1.0:
                    factor = MAX_FACTOR if error == 0.0 else min(MAX_FACTOR, SAFETY * error ** (-1.0 / 8.0))
                    accepted = True
                    if abs(target - t) > abs(h) * (1 + 1e-12):   # a full step, not one cut short
                        h_abs = abs(h) * factor
                    else:
                        h_abs = max(h_abs, abs(h) * min(factor, 1.0))
                    t = target if abs(target - t) <= abs(h) * (1 + 1e-12) else t + h
                    for i in range(n_state):
                        y[i] = y_new[i]
                        k[0][i] = k[STAGES][i]
                    if y[0] * y[0] + y[1] * y[1] < closest2 or not np.isfinite(y[0] + y[1]):
                        return FAILED
                else:
                    h_abs = abs(h) * max(MIN_FACTOR, SAFETY * error ** (-1.0 / 8.0))
        for i in range(n_state):
            out[index, i] = y[i]
    return OK


@njit(cache=True, inline="always")
def _extension(derivative, y, y_new, t, h, k, stage, poly, exponent, strength, forces, table_t, table_xy):  # type: ignore[no-untyped-def]
    """DOP853's continuous extension of the step from (t, y) to y_new: the extra stages into
    k[STAGES + 1:] and the polynomial's coefficients into poly (as scipy's DOP853)."""
    n_state = 4
    for e in range(C_EXTRA.size):
        s = STAGES + 1 + e
        for i in range(n_state):
            acc = 0.0
            for j in range(s):
                acc += A_EXTRA[e, j] * k[j][i]
            stage[i] = y[i] + h * acc
        derivative(stage, t + C_EXTRA[e] * h, k[s], exponent, strength, forces, table_t, table_xy)
    for i in range(n_state):
        delta = y_new[i] - y[i]
        poly[0, i] = delta
        poly[1, i] = h * k[0][i] - delta
        poly[2, i] = 2.0 * delta - h * (k[STAGES][i] + k[0][i])
        for m in range(D.shape[0]):
            acc = 0.0
            for j in range(EXTENDED):
                acc += D[m, j] * k[j][i]
            poly[3 + m, i] = h * acc


@njit(cache=True)
def _leg_dense(times, order, start, y0, exponent, strength, forces, table_t, table_xy, rtol, atol, out):  # type: ignore[no-untyped-def]
    """As `_leg`, with free steps and the sample times read off the continuous extension."""
    n_state = 4
    k = np.empty((EXTENDED, n_state))
    poly = np.empty((POWER, n_state))
    y = y0.copy()
    y_new = np.empty(n_state)
    stage = np.empty(n_state)
    t = start
    _derivative(y, t, k[0], exponent, strength, forces, table_t, table_xy)
    h_abs, radius = _first_step(y, k[0])
    steps = 0
    limit = BASE_STEPS + STEPS_PER_SAMPLE * order.size
    plain = _is_plain(forces)
    closest2 = (CLOSEST * radius) ** 2
    position = 0
    while position < order.size and times[order[position]] == t:
        for i in range(n_state):
            out[order[position], i] = y[i]
        position += 1
    if position == order.size:
        return OK
    last = times[order[order.size - 1]]
    direction = 1.0 if last > t else -1.0
    while position < order.size:
        steps += 1
        if steps > limit or h_abs < 1e-15 * max(abs(t), 1.0):
            return FAILED
        final = abs(last - t) <= h_abs * (1 + 1e-12)
        h = (last - t) if final else h_abs * direction
        if plain:
            error = _take_step(_derivative_plain, y, t, h, k, y_new, stage, exponent, strength, forces,
                               table_t, table_xy, rtol, atol)
        else:
            error = _take_step(_derivative, y, t, h, k, y_new, stage, exponent, strength, forces, table_t,
                               table_xy, rtol, atol)
        if error >= 1.0:
            h_abs = abs(h) * max(MIN_FACTOR, SAFETY * error ** (-1.0 / 8.0))
            continue
        factor = MAX_FACTOR if error == 0.0 else min(MAX_FACTOR, SAFETY * error ** (-1.0 / 8.0))
        t_new = last if final else t + h
        extended = False
        while position < order.size:
            index = order[position]
            target = times[index]
            if final and position == order.size - 1 or target == t_new:
                for i in range(n_state):
                    out[index, i] = y_new[i]
            elif (target - t_new) * direction < 0.0:
                if not extended:
                    if plain:
                        _extension(_derivative_plain, y, y_new, t, h, k, stage, poly, exponent, strength,
                                   forces, table_t, table_xy)
                    else:
                        _extension(_derivative, y, y_new, t, h, k, stage, poly, exponent, strength, forces,
                                   table_t, table_xy)
                    extended = True
                x = (target - t) / h
                for i in range(n_state):
                    acc = 0.0
                    for m in range(POWER - 1, -1, -1):
                        acc += poly[m, i]
                        acc *= x if (POWER - 1 - m) % 2 == 0 else 1.0 - x
                    out[index, i] = y[i] + acc
            else:
                break
            position += 1
        h_abs = abs(h) * factor
        t = t_new
        for i in range(n_state):
            y[i] = y_new[i]
            k[0][i] = k[STAGES][i]
        if y[0] * y[0] + y[1] * y[1] < closest2 or not np.isfinite(y[0] + y[1]):
            return FAILED
    return OK


@njit(cache=True, inline="always")
def _orbit(b, times, forward, backward, epoch, states, exponent, strength, forces, table_t, table_xy,  # type: ignore[no-untyped-def]
           rtol, atol, out, status):
    """Orbit b of a batch, stepped onto each sample, forwards and backwards from the epoch."""
    code = _leg(times, forward, epoch, states[b], exponent[b], strength[b], forces[b], table_t,
                table_xy, rtol, atol[b], out[b])
    if code == OK:
        code = _leg(times, backward, epoch, states[b], exponent[b], strength[b], forces[b], table_t,
                    table_xy, rtol, atol[b], out[b])
    status[b] = code
    if code != OK:
        out[b, :, :] = np.nan


@njit(cache=True, inline="always")
def _orbit_dense(b, times, forward, backward, epoch, states, exponent, strength, forces, table_t,  # type: ignore[no-untyped-def]
                 table_xy, rtol, atol, out, status):
    """Orbit b of a batch, its samples read off the continuous extension."""
    code = _leg_dense(times, forward, epoch, states[b], exponent[b], strength[b], forces[b], table_t,
                      table_xy, rtol, atol[b], out[b])
    if code == OK:
        code = _leg_dense(times, backward, epoch, states[b], exponent[b], strength[b], forces[b], table_t,
                          table_xy, rtol, atol[b], out[b])
    status[b] = code
    if code != OK:
        out[b, :, :] = np.nan


@njit(cache=True)
def _split(times, epoch):  # type: ignore[no-untyped-def]
    """The sample indices after the epoch (ascending) and before it (descending)."""
    n_times = times.size
    first_after = 0
    while first_after < n_times and times[first_after] < epoch:
        first_after += 1
    return np.arange(first_after, n_times), np.arange(first_after - 1, -1, -1)


@njit(cache=True)
def integrate_batch(times, epoch, states, exponent, strength, forces, table_t, table_xy, rtol, atol, out,  # type: ignore[no-untyped-def]
                    status):
    """Fill out[b, i, :] with the state of orbit b at times[i]; status[b] = OK or FAILED.

    ``forces[b]`` holds orbit b's extra forces (columns as in N_FORCES); ``table_t`` and
    ``table_xy`` the perturbing body's positions (empty when there is none)."""
    forward, backward = _split(times, epoch)
    for b in range(states.shape[0]):
        _orbit(b, times, forward, backward, epoch, states, exponent, strength, forces, table_t, table_xy,
               rtol, atol, out, status)


@njit(cache=True)
def integrate_batch_dense(times, epoch, states, exponent, strength, forces, table_t, table_xy, rtol,  # type: ignore[no-untyped-def]
                          atol, out, status):
    """`integrate_batch`, the samples read off the continuous extension (compiled on its own, so
    that the fits never wait for it)."""
    forward, backward = _split(times, epoch)
    for b in range(states.shape[0]):
        _orbit_dense(b, times, forward, backward, epoch, states, exponent, strength, forces, table_t,
                     table_xy, rtol, atol, out, status)


@njit(cache=True, parallel=True)
def integrate_batch_parallel(times, epoch, states, exponent, strength, forces, table_t, table_xy, rtol,  # type: ignore[no-untyped-def]
                             atol, out, status, dense):
    """`integrate_batch` (or, with ``dense``, `integrate_batch_dense`) with the orbits spread over
    numba's threads."""
    forward, backward = _split(times, epoch)
    for b in prange(states.shape[0]):
        if dense:
            _orbit_dense(b, times, forward, backward, epoch, states, exponent, strength, forces, table_t,
                         table_xy, rtol, atol, out, status)
        else:
            _orbit(b, times, forward, backward, epoch, states, exponent, strength, forces, table_t,
                   table_xy, rtol, atol, out, status)
