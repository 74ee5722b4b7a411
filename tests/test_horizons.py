"""Vector tables saved from JPL's Horizons ephemeris service, read as they are.

The files are written here in the two layouts Horizons gives a vector table (comma-separated
with a column line, and labelled ``X =... Y =... Z =...`` records between ``$$SOE`` and
``$$EOE``; the layouts as the service writes them, common practice), with positions of Mars
about the Sun from the JPL DE421 ephemeris (W. M. Folkner, J. G. Williams & D. H. Boggs 2009,
IPN Progress Report 42-178) read with jplephem. 1 au = 149 597 870.700 km (IAU 2012
Resolution B2).
"""

from __future__ import annotations

import datetime
import json
import warnings

import numpy as np
import pytest

from forcefit.cli import main
from forcefit.errors import ForcefitWarning, InputError
from forcefit.estimators import fit_orbit
from forcefit.reading.loaders import load_track

de421 = pytest.importorskip("de421")
jplephem = pytest.importorskip("jplephem")

AU_KM = 149_597_870.700
J2000 = 2451545.0
GAUSS_K2 = 2.959122082855911e-4          # au^3/d^2: k_G^2 (Gauss 1809; IAU 1976 system)
MARS_MASS_RATIO = 1 / 3_098_703.59       # Mars / Sun, DE421 constants (from memory)


def _mars(days: float, step: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Julian dates, heliocentric positions and velocities of Mars (km, km/d), from DE421."""
    ephemeris = jplephem.Ephemeris(de421)
    jd = J2000 + np.arange(0.0, days + 1e-9, step)
    position, velocity = ephemeris.position_and_velocity("mars", jd)
    sun_position, sun_velocity = ephemeris.position_and_velocity("sun", jd)
    return jd, (position - sun_position).T, (velocity - sun_velocity).T


def _calendar(jd: float) -> str:
    moment = datetime.datetime(2000, 1, 1, 12) + datetime.timedelta(days=float(jd) - J2000)
    return "A.D. " + moment.strftime("%Y-%b-%d %H:%M:%S.0000")


def horizons_text(layout: str = "comma", units: str = "AU-D", *, days: float = 4 * 365.25,
                  step: float = 5.0, centre: str = "Sun (10)", end: bool = True,
                  julian: bool = True) -> str:
    """Mars in a Horizons vector table's layout (without Julian dates: calendar dates only)."""
    jd, position, velocity = _mars(days, step)
    if units == "AU-D":
        position, velocity = position / AU_KM, velocity / AU_KM
    elif units == "KM-S":
        velocity = velocity / 86400.0
    stars = "*" * 79
    lines = [stars, "Ephemeris / WWW_USER Wed Dec  2 10:00:00 2026 Pasadena, USA      / Horizons", stars,
             "Target body name: Mars (499)                      {source: DE421}",
             f"Center body name: {centre:<32}  {{source: DE421}}",
             "Center-site name: BODY CENTER", stars,
             f"Output units    : {units}",
             "Output type     : GEOMETRIC cartesian states",
             "Output format   : 2 (position and velocity)",
             "Reference frame : ICRF", stars]
    if layout == "comma":
        lines += ["            JDTDB,            Calendar Date (TDB),                      X,"
                  "                      Y,                      Z,                     VX,"
                  "                     VY,                     VZ,", "*" * 120, "$$SOE"]
        if not julian:
            lines[-3] = lines[-3].replace("            JDTDB,", "")
        lines += [(f"{j:.9f}, " if julian else "") + f"{_calendar(j)}, "
                  + ", ".join(f"{c: .15E}" for c in (*p, *v)) + ","
                  for j, p, v in zip(jd, position, velocity)]
    else:
        lines += ["JDTDB", "   X     Y     Z", "   VX    VY    VZ", stars, "$$SOE"]
        for j, p, v in zip(jd, position, velocity):
            lines += [(f"{j:.9f} = " if julian else "") + f"{_calendar(j)} TDB ",
                      " X ={: .15E} Y ={: .15E} Z ={: .15E}".format(*p),
                      " VX={: .15E} VY={: .15E} VZ={: .15E}".format(*v)]
    if end:
        lines += ["$$EOE", stars, "Coordinate system description:", "", "  International Celestial "
                  "Reference Frame", ""]
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize("layout", ["comma", "labelled"])
@pytest.mark.parametrize("units", ["AU-D", "KM-S"])
def test_both_layouts_read_as_the_ephemeris_positions(write, digest, layout, units):
    path = write("mars.txt", horizons_text(layout, units, days=200.0))
    before = digest(path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ForcefitWarning)   # a real orbit is not exactly planar
        track = load_track(path)
    assert digest(path) == before
    jd, position, _ = _mars(200.0, 5.0)
    unit = "au" if units == "AU-D" else "km"
    scale = AU_KM if unit == "au" else 1.0
    assert (track.length_unit, track.time_unit) == (unit, "d")
    np.testing.assert_allclose(track.t, jd, rtol=0, atol=1e-9)
    # the plane projection keeps the distance from the Sun (the origin lies on the plane to
    # within the out-of-plane RMS, ~1e-5 au)
    distance = np.hypot(track.x, track.y) * scale
    np.testing.assert_allclose(distance, np.linalg.norm(position, axis=1), rtol=2e-6)
    assert track.metadata["layout"] == "horizons"
    assert "Mars (499) about Sun (10)" in track.metadata["description"]
    assert list(track.source_rows[:2]) == ([16, 17] if layout == "comma" else [18, 21])


@pytest.mark.parametrize("layout", ["comma", "labelled"])
def test_calendar_dates_alone_read_as_julian_dates(write, layout):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ForcefitWarning)
        track = load_track(write("cal.txt", horizons_text(layout, days=100.0, step=0.25, julian=False)))
    jd, _, _ = _mars(100.0, 0.25)
    np.testing.assert_allclose(track.t, jd, rtol=0, atol=1e-9)


def test_the_api_reply_in_json_reads_alike(write):
    text = horizons_text("labelled", days=100.0)
    path = write("reply.json", json.dumps({"signature": {"version": "1.2"}, "result": text}))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ForcefitWarning)
        from_json = load_track(path)
        from_text = load_track(write("reply.txt", text))
    np.testing.assert_array_equal(from_json.x, from_text.x)
    np.testing.assert_array_equal(from_json.t, from_text.t)


def test_four_years_of_mars_give_inverse_square_and_the_suns_gm(write):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ForcefitWarning)
        comma = fit_orbit(load_track(write("a.txt", horizons_text("comma"))), centre=(0.0, 0.0))
        labelled = fit_orbit(load_track(write("b.txt", horizons_text("labelled"))), centre=(0.0, 0.0))
    assert abs(comma.exponent + 2.0) < 3 * comma.exponent_stderr
    # k = G(M_sun + M_mars) in au^3/d^2; its error is widened for the perturbed residuals
    expected = GAUSS_K2 * (1 + MARS_MASS_RATIO)
    assert abs(comma.strength - expected) < 3 * comma.strength_stderr
    assert comma.strength_stderr < 1e-2 * expected
    # the same numbers (15 significant digits) in either layout give the same fit
    assert labelled.exponent == pytest.approx(comma.exponent, abs=1e-9)
    assert not comma.passed            # perturbed by the other planets: the checks say so
    assert comma.diagnostics["correlation"].passed is False


@pytest.mark.parametrize("layout", ["comma", "labelled"])
def test_a_header_without_its_output_type_line_still_reads(write, layout):
    text = horizons_text(layout, days=50.0).replace("Output type     : GEOMETRIC cartesian states\n", "")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ForcefitWarning)
        assert load_track(write("short_header.txt", text)).n_points == 11


def test_a_table_about_a_barycentre_is_read_with_a_warning(write):
    path = write("bary.txt", horizons_text(days=100.0, centre="Solar System Barycenter (0)"))
    with pytest.warns(ForcefitWarning, match="Solar System Barycenter.*not about a body"):
        load_track(path)


def test_a_table_cut_short_is_refused_with_its_line(write):
    path = write("cut.txt", horizons_text(days=100.0, end=False))
    with pytest.raises(InputError, match=r"cut\.txt: the Horizons table starts at line 15.*cut short"):
        load_track(path)


def test_an_observer_table_is_refused_asking_for_a_vector_table(write):
    text = "\n".join([
        "Target body name: Mars (499)                      {source: DE421}",
        "Center body name: Earth (399)                     {source: DE421}",
        " Date__(UT)__HR:MN     R.A._____(ICRF)_____DEC    APmag   S-brt",
        "$$SOE",
        " 2000-Jan-01 00:00     22 01 05.83 -13 14 07.6    1.078   4.192",
        " 2000-Jan-02 00:00     22 03 57.80 -12 58 39.7    1.082   4.193",
        "$$EOE", ""])
    with pytest.raises(InputError, match="observer.*vector table"):
        load_track(write("obs.txt", text))


def test_the_command_line_names_what_it_read(write, capsys):
    path = write("mars.txt", horizons_text(days=400.0))
    assert main(["inspect", str(path)]) == 0
    out = capsys.readouterr().out
    assert "JPL Horizons vector table of Mars (499) about Sun (10) (ICRF)" in out
    assert "81 epochs as Julian dates (TDB), positions in au" in out
