"""Known extra forces: the compiled propagator against the reference integrator, and fits
whose exponent measures only what the known forces leave unexplained."""

import math

import numpy as np
import pytest

from forcefit.cli import main
from forcefit.dynamics.forces import ExtraForces, Perturber, Relativity, Yukawa
from forcefit.dynamics.propagate import propagate_batch, propagate_reference
from forcefit.errors import InputError
from forcefit.estimators import fit_orbit
from forcefit.track import Track

GAUSS_K2 = 2.959122082855911e-4                 # au^3/d^2: Gauss (1809), IAU 1976 system
LIGHT = 299_792_458.0 * 86_400 / 149_597_870_700.0   # au/d: c exact (CGPM 1983), au (IAU 2012 B2)
ARCSEC = 180 * 3600 / math.pi


def _every_force():
    times = np.linspace(-1.0, 31.0, 200)
    table = np.column_stack((5 * np.cos(0.1 * times), 5 * np.sin(0.1 * times)))
    return ExtraForces(relativity=Relativity(gm=1.0, speed_of_light=20.0),
                       yukawa=Yukawa(length=2.0, alpha=0.05),
                       perturber=Perturber(times=times, positions=table, gm=0.01))


def test_the_compiled_propagator_adds_each_force_as_the_reference_does():
    # Two independent implementations: numpy terms under scipy's DOP853 (rtol 1e-13) and the
    # compiled kernel's own, stepping onto each sample and by its continuous extension (the
    # sampler's path, whose extra stages meet the time-tabled perturber at their own times);
    # they must agree far below any noise a fit would meet.
    t = np.linspace(0.0, 30.0, 301)
    extra = _every_force()
    reference = propagate_reference([1.0, 0.0], [0.0, 0.9], t, exponent=-2.0, strength=1.0, epoch=10.0,
                                    extra=extra, centre=(0.1, 0.0))
    batch = propagate_batch(t, [1.0, 0.0], [0.0, 0.9], exponent=-2.0, strength=1.0, epoch=10.0, extra=extra,
                            yukawa_alpha=0.05, centre=(0.1, 0.0))
    plain = propagate_batch(t, [1.0, 0.0], [0.0, 0.9], exponent=-2.0, strength=1.0, epoch=10.0)
    dense = propagate_batch(t, [1.0, 0.0], [0.0, 0.9], exponent=-2.0, strength=1.0, epoch=10.0, extra=extra,
                            yukawa_alpha=0.05, centre=(0.1, 0.0), dense=True)
    assert batch.ok[0] and dense.ok[0]
    assert np.abs(batch.position[0] - reference.position).max() < 1e-9
    assert np.abs(dense.position[0] - reference.position).max() < 1e-9
    assert np.abs(plain.position[0] - reference.position).max() > 0.1    # the forces do matter


def _mercury(years: float, extra: ExtraForces | None) -> Track:
    # a, e of Mercury: Standish, JPL approximate elements (CHECKS.md §5).
    a, e = 0.38709927, 0.20563593
    pericentre = a * (1 - e)
    speed = math.sqrt(GAUSS_K2 * (1 + e) / pericentre)                   # vis-viva at pericentre
    t = np.arange(0.0, years * 365.25, 1.0)
    states = propagate_reference([pericentre, 0.0], [0.0, speed], t, exponent=-2.0, strength=GAUSS_K2,
                                 extra=extra)
    noise = 1e-8 * np.random.default_rng(1).standard_normal((t.size, 2))
    return Track(t=t, x=states.position[:, 0] + noise[:, 0], y=states.position[:, 1] + noise[:, 1],
                 length_unit="au", time_unit="d", name="Mercury-like")


def test_the_first_post_newtonian_term_explains_mercurys_relativistic_precession():
    # GR's share of Mercury's perihelion advance: 6 pi GM / (c^2 a (1 - e^2)) per orbit =
    # 42.98"/century (A. M. Nobili & C. M. Will 1986, Nature 320, 39). A Newtonian fit of an
    # orbit made with the 1PN term reads it as an exponent n = -2 - delta, whose precession is
    # 2 pi delta / (1 + sqrt(1 - e^2)) per orbit (CHECKS.md §5, derived).
    relativity = ExtraForces(relativity=Relativity(gm=GAUSS_K2, speed_of_light=LIGHT))
    track = _mercury(10.0, relativity)
    plain = fit_orbit(track, centre=(0.0, 0.0))
    delta = -(plain.exponent + 2.0)
    e, period = 0.20563593, 2 * math.pi * math.sqrt(0.38709927**3 / GAUSS_K2)
    per_century = 2 * math.pi * delta / (1 + math.sqrt(1 - e**2)) * 36525 / period * ARCSEC
    assert per_century == pytest.approx(42.98, rel=0.02)
    explained = fit_orbit(track, centre=(0.0, 0.0), extra=relativity)
    assert abs(explained.exponent + 2.0) < 3 * explained.exponent_stderr
    assert explained.exponent_stderr < 0.01 * delta                  # and the test has teeth


def test_a_yukawa_term_of_given_range_is_fitted_beside_the_law():
    # The potential -(k/r)(1 + alpha e^(-r/lambda)) (Adelberger, Heckel & Nelson 2003, eq. 2).
    truth = ExtraForces(yukawa=Yukawa(length=1.5, alpha=0.02))
    t = np.linspace(0.0, 40.0, 1201)
    states = propagate_reference([1.0, 0.0], [0.0, 0.8], t, exponent=-2.0, strength=1.0, extra=truth)
    noise = 2e-5 * np.random.default_rng(7).standard_normal((t.size, 2))
    track = Track(t=t, x=states.position[:, 0] + noise[:, 0], y=states.position[:, 1] + noise[:, 1])
    fit = fit_orbit(track, centre=(0.0, 0.0), exponent=-2.0, extra=ExtraForces(yukawa=Yukawa(length=1.5)))
    assert abs(fit.yukawa_strength - 0.02) < 3 * fit.yukawa_strength_stderr
    assert fit.yukawa_strength_stderr < 0.002
    assert fit.passed
    newton = fit_orbit(track, centre=(0.0, 0.0), exponent=-2.0)
    assert not newton.passed                                         # without it, Newton misses


def test_a_perturbing_body_is_taken_into_account():
    # A Jupiter-like perturber (GM/GM_sun = 1e-3) on a circular orbit at 5.2 au, an inner planet
    # at 1.5 au over 6 years: without the perturber the law looks bent.
    t = np.arange(0.0, 6 * 365.25, 5.0)
    table_t = np.arange(-30.0, t[-1] + 30.0, 5.0)
    omega = math.sqrt(GAUSS_K2 / 5.2**3)
    table = 5.2 * np.column_stack((np.cos(omega * table_t), np.sin(omega * table_t)))
    jupiter = Perturber(times=table_t, positions=table, gm=1e-3 * GAUSS_K2, name="jupiter")
    extra = ExtraForces(perturber=jupiter)
    speed = 1.05 * math.sqrt(GAUSS_K2 / 1.5)
    states = propagate_reference([1.5, 0.0], [0.0, speed], t, exponent=-2.0, strength=GAUSS_K2, extra=extra)
    noise = 1e-7 * np.random.default_rng(3).standard_normal((t.size, 2))
    track = Track(t=t, x=states.position[:, 0] + noise[:, 0], y=states.position[:, 1] + noise[:, 1],
                  sigma=np.full(t.size, 1e-7), length_unit="au", time_unit="d")
    fit = fit_orbit(track, centre=(0.0, 0.0), extra=extra)
    assert fit.passed and abs(fit.exponent + 2.0) < 3 * fit.exponent_stderr
    alone = fit_orbit(track, centre=(0.0, 0.0))
    assert not alone.passed


def test_a_perturber_must_cover_the_data_and_not_turn_with_the_frame():
    t = np.linspace(0.0, 10.0, 200)
    track = Track(t=t, x=np.cos(t) + 0.2 * np.cos(2 * t), y=np.sin(t))
    short = Perturber(times=np.linspace(0.0, 5.0, 10), positions=np.ones((10, 2)) * 4, gm=0.01, name="moon")
    with pytest.raises(InputError, match="moon: its positions span"):
        fit_orbit(track, extra=ExtraForces(perturber=short))
    full = Perturber(times=np.linspace(-1.0, 11.0, 20), positions=np.ones((20, 2)) * 4, gm=0.01)
    with pytest.raises(InputError, match="rotating frame or a perturber"):
        fit_orbit(track, extra=ExtraForces(perturber=full), rotation_rate=0.01)


def test_the_command_line_adds_the_relativistic_term(tmp_path, capsys):
    track = _mercury(4.0, ExtraForces(relativity=Relativity(gm=GAUSS_K2, speed_of_light=LIGHT)))
    path = tmp_path / "mercury.csv"
    path.write_text("t (d),x (au),y (au)\n" + "\n".join(f"{a:.1f},{b:.12f},{c:.12f}"
                                                       for a, b, c in zip(track.t, track.x, track.y)))
    assert main(["fit", str(path), "--centre", "0,0", "--extra", "relativity", "--json"]) == 0
    report = __import__("json").loads(capsys.readouterr().out)[0]
    assert abs(report["exponent"] + 2.0) < 3 * report["exponent_stderr"]
    assert "post-Newtonian" in report["details"]["extra_forces"]
    assert main(["fit", str(path), "--extra", "gravity-waves"]) == 2
    assert 'unknown force "gravity-waves"' in capsys.readouterr().err


@pytest.mark.parametrize("alpha", [1.0, -0.3])
def test_a_yukawa_term_of_any_strength_is_added_as_the_reference_adds_it(alpha):
    # The compiled kernel adds the Yukawa term whenever its alpha is not zero: at alpha = 1 (a
    # value a switch could mistake for "none") and a negative one, against the numpy terms under
    # scipy's DOP853, as above.
    t = np.linspace(0.0, 20.0, 201)
    extra = ExtraForces(yukawa=Yukawa(length=2.0, alpha=alpha))
    reference = propagate_reference([1.0, 0.0], [0.0, 0.9], t, exponent=-2.0, strength=1.0, epoch=5.0,
                                    extra=extra)
    batch = propagate_batch(t, [1.0, 0.0], [0.0, 0.9], exponent=-2.0, strength=1.0, epoch=5.0, extra=extra,
                            yukawa_alpha=alpha)
    assert batch.ok[0]
    assert np.abs(batch.position[0] - reference.position).max() < 1e-9
