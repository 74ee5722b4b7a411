"""The reference integrator against invariants and closed-form solutions."""

import numpy as np
import pytest

from forcefit.dynamics.laws import angular_momentum, circular_period, specific_energy
from forcefit.dynamics.propagate import Drag, propagate_batch, propagate_reference
from forcefit.errors import InputError


@pytest.mark.parametrize("exponent", [-2.9, -2.0, -1.0, 0.0, 1.0, 3.0])
def test_energy_and_angular_momentum_conserved_over_ten_orbits(exponent):
    # Conservation of energy and angular momentum in a central field (common practice);
    # tolerance 1e-9 relative over 10 orbits, as asked of the reference integrator. Energy is
    # relative to the largest kinetic energy on the orbit (E itself can be near zero).
    period = float(circular_period(1.0, exponent, 1.0))
    t = np.linspace(0.0, 10.0 * period, 4001)
    states = propagate_reference([1.0, 0.0], [0.0, 0.9], t, exponent=exponent, strength=1.0)
    energy = specific_energy(states.position, states.velocity, exponent, 1.0)
    h = angular_momentum(states.position, states.velocity)
    kinetic = 0.5 * np.max(np.sum(states.velocity**2, axis=1))
    assert np.max(np.abs(energy - energy[0])) <= 1e-9 * kinetic
    assert np.max(np.abs(h / h[0] - 1.0)) <= 1e-9


def _kepler_positions(t, a, e, mu):
    """Focus-centred Kepler ellipse starting at pericentre, by Newton iteration on
    Kepler's equation M = E - e sin E (Murray & Dermott 1999, Solar System Dynamics, §2.4)."""
    mean_anomaly = np.sqrt(mu / a**3) * t
    eccentric = mean_anomaly + e * np.sin(mean_anomaly)
    for _ in range(50):
        eccentric -= (eccentric - e * np.sin(eccentric) - mean_anomaly) / (1 - e * np.cos(eccentric))
    b = a * np.sqrt(1 - e**2)
    return np.column_stack((a * (np.cos(eccentric) - e), b * np.sin(eccentric)))


@pytest.mark.parametrize("eccentricity", [0.1, 0.6, 0.95])
def test_inverse_square_orbit_matches_keplers_equation(eccentricity):
    a, mu = 1.3, 2.959122082855911e-4       # au, au^3/d^2 (Gauss's constant squared)
    periapsis = a * (1 - eccentricity)
    speed = np.sqrt(mu * (1 + eccentricity) / periapsis)       # vis-viva at pericentre
    period = 2 * np.pi * np.sqrt(a**3 / mu)
    t = np.linspace(0.0, 3.0 * period, 1500)
    states = propagate_reference([periapsis, 0.0], [0.0, speed], t, exponent=-2.0, strength=mu)
    error = np.max(np.linalg.norm(states.position - _kepler_positions(t, a, eccentricity, mu), axis=1))
    assert error < 1e-8 * a


def test_hooke_orbit_matches_the_harmonic_oscillator():
    # x = A cos(wt + phi) in each axis with w^2 = k (any mechanics text; common practice).
    k = 4.0
    w = np.sqrt(k)
    t = np.linspace(-3.0, 7.0, 777)
    states = propagate_reference([0.3, 0.0], [0.0, 0.2], t, exponent=1.0, strength=k, epoch=0.0)
    np.testing.assert_allclose(states.position[:, 0], 0.3 * np.cos(w * t), atol=1e-11)
    np.testing.assert_allclose(states.position[:, 1], 0.1 * np.sin(w * t), atol=1e-11)


def test_linear_drag_matches_the_damped_oscillator():
    # x'' + c x' + w0^2 x = 0: x = A exp(-ct/2) cos(w1 t), w1^2 = w0^2 - c^2/4, here with
    # x(0) = A, x'(0) = -cA/2 (underdamped oscillator; common practice).
    k, c, amplitude = 4.0, 0.3, 0.5
    w1 = np.sqrt(k - c**2 / 4)
    t = np.linspace(0.0, 10.0, 501)
    states = propagate_reference([amplitude, 0.0], [-c * amplitude / 2, 0.0], t,
                                 exponent=1.0, strength=k, drag=Drag("linear", c))
    expected = amplitude * np.exp(-c * t / 2) * np.cos(w1 * t)
    np.testing.assert_allclose(states.position[:, 0], expected, atol=1e-11)


def test_quadratic_drag_slows_a_straight_coast():
    # v' = -c v^2 with no force worth speaking of: v = v0 / (1 + c v0 t), x = ln(1 + c v0 t)/c.
    # The reference integrator, and the compiled one (also at a round c = 1).
    v0 = 2.0
    t = np.linspace(0.0, 3.0, 31)
    for c in (0.5, 1.0):
        states = propagate_reference([1.0, 0.0], [v0, 0.0], t, exponent=0.0, strength=1e-30,
                                     drag=Drag("quadratic", c))
        np.testing.assert_allclose(states.position[:, 0] - 1.0, np.log1p(c * v0 * t) / c, rtol=1e-10)
        batch = propagate_batch(t, [1.0, 0.0], [v0, 0.0], exponent=0.0, strength=1e-30, epoch=0.0,
                                quadratic_drag=c)
        np.testing.assert_allclose(batch.position[0, :, 0] - 1.0, np.log1p(c * v0 * t) / c, rtol=1e-9)


def test_fall_into_the_centre_is_refused():
    with pytest.raises(InputError, match="reaches the force centre"):
        propagate_reference([1.0, 0.0], [0.0, 0.0], np.linspace(0, 5, 10), exponent=-2.0, strength=1.0)


def test_bad_drag_is_refused():
    with pytest.raises(InputError, match="linear"):
        Drag("cubic", 1.0)  # type: ignore[arg-type]


@pytest.mark.parametrize("exponent", [-2.9, -2.5, -2.0, -1.0, 0.0, 1.0, 2.0, 3.0])
def test_batch_matches_the_reference_over_five_revolutions(exponent):
    period = float(circular_period(1.0, exponent, 1.0))
    t = np.linspace(0.0, 5 * period, 600)
    reference = propagate_reference([1.0, 0.0], [0.0, 0.95], t, exponent=exponent, strength=1.0,
                                    epoch=t[300])
    batch = propagate_batch(t, [1.0, 0.0], [0.0, 0.95], exponent=exponent, strength=1.0, epoch=t[300])
    size = np.abs(reference.position).max()
    assert np.abs(batch.position[0] - reference.position).max() < 1e-9 * size



@pytest.mark.parametrize("eccentricity", [0.5, 0.9, 0.95])
def test_batch_matches_keplers_equation(eccentricity):
    # Kepler's equation solved by Newton iteration, velocity from the eccentric anomaly E:
    # v = n a (-sin E, sqrt(1 - e^2) cos E) / (1 - e cos E) (Murray & Dermott 1999, §2.4).
    # Five revolutions with the epoch in the middle, as the orbit fit uses it.
    a, mu = 1.0, 1.0
    t = np.linspace(0.0, 5 * 2 * np.pi, 700)
    epoch = t[350]
    anomaly = np.sqrt(mu / a**3) * epoch
    for _ in range(60):
        anomaly -= (anomaly - eccentricity * np.sin(anomaly) - np.sqrt(mu / a**3) * epoch) / (
            1 - eccentricity * np.cos(anomaly))
    factor = np.sqrt(mu / a) / (1 - eccentricity * np.cos(anomaly))
    velocity = factor * np.array([-np.sin(anomaly), np.sqrt(1 - eccentricity**2) * np.cos(anomaly)])
    position = _kepler_positions(np.array([epoch]), a, eccentricity, mu)[0]
    batch = propagate_batch(t, position, velocity, exponent=-2.0, strength=mu, epoch=epoch)
    error = np.abs(batch.position[0] - _kepler_positions(t, a, eccentricity, mu)).max()
    assert error < 1e-9 * 2 * a



def test_batch_orbits_are_independent_and_drag_matches_the_reference():
    t = np.linspace(-3.0, 6.0, 300)
    drag = Drag("quadratic", 0.2)
    reference = propagate_reference([1.0, 0.2], [0.1, 1.1], t, exponent=-1.5, strength=1.3, epoch=0.0,
                                    drag=drag)
    batch = propagate_batch(t, [[1.0, 0.2], [2.0, 0.0]], [[0.1, 1.1], [0.0, 0.5]], exponent=[-1.5, 1.0],
                            strength=[1.3, 0.5], epoch=0.0, quadratic_drag=[0.2, 0.0])
    np.testing.assert_allclose(batch.position[0], reference.position, atol=1e-9)
    alone = propagate_batch(t, [2.0, 0.0], [0.0, 0.5], exponent=1.0, strength=0.5, epoch=0.0)
    np.testing.assert_array_equal(batch.position[1], alone.position[0])



def test_orbit_into_the_centre_is_marked_failed():
    batch = propagate_batch(np.linspace(0, 5, 50), [1.0, 0.0], [0.0, 0.0], exponent=-2.0, strength=1.0,
                            epoch=0.0)
    assert not batch.ok[0] and np.isnan(batch.position[0]).all()


@pytest.mark.parametrize("eccentricity", [0.5, 0.9])
def test_dense_output_matches_keplers_equation(eccentricity):
    # As test_batch_matches_keplers_equation (Murray & Dermott 1999, §2.4), with samples far
    # denser than the steps, read off the continuous extension: the same bound.
    a, mu = 1.0, 1.0
    t = np.linspace(0.0, 5 * 2 * np.pi, 6000)
    epoch = t[3000]
    anomaly = epoch
    for _ in range(60):
        anomaly -= (anomaly - eccentricity * np.sin(anomaly) - epoch) / (1 - eccentricity * np.cos(anomaly))
    factor = 1.0 / (1 - eccentricity * np.cos(anomaly))
    velocity = factor * np.array([-np.sin(anomaly), np.sqrt(1 - eccentricity**2) * np.cos(anomaly)])
    position = _kepler_positions(np.array([epoch]), a, eccentricity, mu)[0]
    batch = propagate_batch(t, position, velocity, exponent=-2.0, strength=mu, epoch=epoch, dense=True)
    assert batch.ok[0]
    assert np.abs(batch.position[0] - _kepler_positions(t, a, eccentricity, mu)).max() < 1e-9 * 2 * a


def test_dense_output_of_a_densely_filmed_pendulum_matches_the_oscillator():
    # x = A cos(wt), y = B sin(wt) with w^2 = k (common practice): 30 samples per second over
    # 13 periods, at the sampler's tolerance (1e-10), within 1e-8 of the amplitude; positions
    # and velocities, forwards and backwards from an epoch between samples.
    k = 0.89
    w = np.sqrt(k)
    t = np.arange(2631) / 30.0
    epoch = 43.71
    phase = w * epoch
    start = [0.55 * np.cos(phase), 0.2 * np.sin(phase)]
    speed = [-0.55 * w * np.sin(phase), 0.2 * w * np.cos(phase)]
    batch = propagate_batch(t, start, speed, exponent=1.0, strength=k, epoch=epoch, rtol=1e-10,
                            dense=True)
    np.testing.assert_allclose(batch.position[0, :, 0], 0.55 * np.cos(w * t), atol=1e-8 * 0.55)
    np.testing.assert_allclose(batch.position[0, :, 1], 0.2 * np.sin(w * t), atol=1e-8 * 0.55)
    np.testing.assert_allclose(batch.velocity[0, :, 0], -0.55 * w * np.sin(w * t), atol=1e-8 * 0.55)


def test_the_parallel_batch_is_the_serial_one_and_marks_failures(monkeypatch):
    monkeypatch.setattr("numba.get_num_threads", lambda: 2)     # the parallel kernel, on any machine
    t = np.linspace(-3.0, 6.0, 300)
    starts = np.array([[1.0, 0.2], [2.0, 0.0], [1.0, 0.0]])
    speeds = np.array([[0.1, 1.1], [0.0, 0.5], [0.0, 0.0]])            # the last falls in
    options = {"exponent": [-1.5, 1.0, -2.0], "strength": [1.3, 0.5, 1.0], "epoch": 0.0}
    for dense in (False, True):
        serial = propagate_batch(t, starts, speeds, dense=dense, **options)
        parallel = propagate_batch(t, starts, speeds, dense=dense, parallel=True, **options)
        np.testing.assert_array_equal(parallel.position, serial.position)
        assert list(parallel.ok) == [True, True, False] and np.isnan(parallel.position[2]).all()


@pytest.mark.parametrize("velocity", [(0.0, 0.0), (0.3, -0.2)])
@pytest.mark.parametrize("dense", [False, True])
def test_without_a_force_a_body_rests_or_moves_uniformly(velocity, dense):
    # Newton's first law (common practice): with k = 0 the batch propagator must give
    # r(t) = r0 + v (t - epoch), backwards and forwards from the epoch, also for a body at rest,
    # where every error estimate of the step is exactly zero (it once divided 0 by 0 there).
    t = np.linspace(0.0, 10.0, 11)
    states = propagate_batch(t, (1.0, 0.5), velocity, exponent=-2.0, strength=0.0, epoch=3.0, dense=dense)
    assert states.ok.all()
    expected = np.array([1.0, 0.5]) + np.outer(t - 3.0, velocity)
    np.testing.assert_allclose(states.position[0], expected, rtol=0, atol=1e-12)
    np.testing.assert_allclose(states.velocity[0], np.broadcast_to(velocity, (t.size, 2)), rtol=0, atol=1e-14)


def test_the_batch_has_one_orbit_per_parameter_set_given():
    # propagate_batch's documented shapes: (n_orbits, n_times, 2) with n_orbits the largest
    # leading size of its arguments (a scalar or a single state counts one), whichever carries it
    t = np.linspace(0.0, 2.0, 5)
    one = propagate_batch(t, (1.0, 0.0), (0.0, 1.0), exponent=-2.0, strength=1.0, epoch=0.0,
                          centre=(0.5, -0.5))
    assert one.position.shape == (1, 5, 2) and one.velocity.shape == (1, 5, 2) and one.ok.shape == (1,)
    three = propagate_batch(t, (1.0, 0.0), (0.0, 1.0), exponent=[-2.0, -1.0, 1.0], strength=1.0, epoch=0.0)
    assert three.position.shape == (3, 5, 2)
    centres = propagate_batch(t, (1.0, 0.0), (0.0, 1.0), exponent=-2.0, strength=1.0, epoch=0.0,
                              centre=[(0.0, 0.0), (1.0, 1.0)])
    assert centres.position.shape == (2, 5, 2)


@pytest.mark.parametrize("unit", [1e-3, 1e3])
def test_the_batch_propagator_is_as_accurate_in_any_unit_of_length(unit):
    # Dimensional analysis (common practice): the same orbit in another unit of length (positions
    # and velocities times u, k times u^(1-n)) must come out as the same orbit times u, to the
    # propagator's stated accuracy (1e-9 of the orbit's size): its error control must not depend on
    # the unit. An e = 0.6 Kepler orbit and an n = 1 ellipse over four periods.
    t = np.linspace(0.0, 25.0, 400)
    for exponent, velocity in ((-2.0, (0.0, 1.26)), (1.0, (0.0, 0.4))):
        one = propagate_batch(t, (1.0, 0.0), velocity, exponent=exponent, strength=1.0, epoch=0.0)
        scaled = propagate_batch(t, (unit, 0.0), (0.0, velocity[1] * unit), exponent=exponent,
                                 strength=unit ** (1.0 - exponent), epoch=0.0)
        assert one.ok.all() and scaled.ok.all()
        size = float(np.ptp(one.position[0], axis=0).max())
        assert float(np.max(np.abs(scaled.position[0] / unit - one.position[0]))) < 1e-9 * size


@pytest.mark.parametrize("dense", [False, True])
def test_the_bare_power_laws_fast_path_is_the_general_arithmetic_to_the_bit(dense):
    # An orbit under the power law and linear drag alone takes the kernel's short derivative;
    # a relativity term of GM 1e-200 and c 1e100 (its GM/c^2 underflows to 0) sends the same
    # orbit through the general one, whose extra terms then add exactly 0: the two must agree
    # bit for bit (common practice: an optimisation may not change a result).
    from forcefit.dynamics.forces import ExtraForces, Relativity

    t = np.linspace(0.0, 40.0, 400)
    common = dict(exponent=[-2.1, 1.0, -1.0], strength=0.25, epoch=7.0, dense=dense,
                  linear_drag=[0.0, 0.01, 0.002])
    fast = propagate_batch(t, [[1.5, 0.0]] * 3, [[0.0, 0.28]] * 3, **common)
    general = propagate_batch(t, [[1.5, 0.0]] * 3, [[0.0, 0.28]] * 3, **common,
                              extra=ExtraForces(relativity=Relativity(gm=1e-200, speed_of_light=1e100)))
    assert fast.ok.all() and general.ok.all()
    assert np.array_equal(fast.position, general.position)
    assert np.array_equal(fast.velocity, general.velocity)


@pytest.mark.parametrize("dense", [False, True])
def test_an_orbit_that_would_need_more_steps_than_its_budget_is_marked_failed(dense):
    # The kernel allows BASE_STEPS + STEPS_PER_SAMPLE per sample and then gives an orbit up (a
    # trial orbit that dives at the centre would otherwise run for ever): a circle sampled twice
    # needs tens of steps a turn, so 20 000 turns are far beyond the 51 000 allowed and 200 fit.
    for turns, expected in ((20_000, False), (200, True)):
        t = np.array([0.0, 2 * np.pi * turns])
        batch = propagate_batch(t, (1.0, 0.0), (0.0, 1.0), exponent=-2.0, strength=1.0, epoch=0.0,
                                dense=dense)
        assert bool(batch.ok[0]) is expected


def test_one_compiled_kernel_serves_arrays_of_any_flags_and_the_callers_keep_theirs():
    # numba compiles a kernel afresh for each combination of read-only flags of its arrays
    # (numba documentation, "Compiling Python code with @jit": types include array layout and
    # mutability): the propagator hands every array read-only, so a writeable and a read-only
    # sample-time array, with a perturber's table or without, share one signature each, and the
    # caller's arrays are never made read-only.
    from forcefit.dynamics import _kernel
    from forcefit.dynamics.forces import ExtraForces, Perturber

    times = np.linspace(0.0, 6.0, 40)
    frozen = times.copy()
    frozen.flags.writeable = False
    table_t = np.linspace(-1.0, 7.0, 20)
    table_xy = np.column_stack((30.0 + 0.0 * table_t, 0.1 * table_t))
    perturber = Perturber(times=table_t, positions=table_xy, gm=1e-3)
    for t in (times, frozen):
        for extra in (None, ExtraForces(perturber=perturber)):
            for dense in (False, True):
                batch = propagate_batch(t, (1.0, 0.0), (0.0, 1.0), exponent=-2.0, strength=1.0, epoch=0.0,
                                        extra=extra, dense=dense, linear_drag=np.zeros(1))
                assert batch.ok.all()
    assert len(_kernel.integrate_batch.signatures) == 1
    assert len(_kernel.integrate_batch_dense.signatures) == 1
    assert times.flags.writeable and table_t.flags.writeable and table_xy.flags.writeable
