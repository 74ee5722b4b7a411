"""Read relative positions on the sky: separation and position angle, or offsets in right
ascension and declination, at epochs in Julian or Besselian years or Julian dates.

Recognised headers (case-insensitive; a unit in brackets, ``rho [mas]``, or by ``length_unit``):

============================  =============================================================
epoch                         ``epoch``, ``year``, ``t``: years, Julian unless written with a
                              ``B`` (``B1950.5``, Besselian); ``jd``: Julian dates; ``mjd``
rho, theta                    ``rho`` / ``sep`` / ``separation`` and ``theta`` / ``pa`` /
                              ``position_angle`` (degrees from north through east)
offsets                       ``ddec`` / ``delta_dec`` (north) and ``dra`` / ``dra_cosdec`` /
                              ``delta_ra`` (east, Delta RA times cos dec)
errors                        ``rho_err``, ``theta_err`` (degrees); ``ddec_err``, ``dra_err``
                              and optionally ``corr``; or one ``sigma`` for both coordinates
============================  =============================================================

Epochs become Julian years (``yr``, 365.25 days) on the TT-like scale of the input: a
Besselian year B is JD 2415020.31352 + 365.242198781 (B - 1900) and a Julian year J is
JD 2451545.0 + 365.25 (J - 2000) (J. H. Lieske 1979, A&A 73, 282, eqs. 3 and 5; from memory).
"""

from __future__ import annotations

import os
import re
from collections.abc import Mapping
from pathlib import Path

import numpy as np
import pandas as pd

from .._atomic import write_atomic
from .._types import FloatArray
from ..astrometry import Astrometry, offset_covariance, polar_covariance
from ..errors import InputError
from ..track import Track
from ..units import is_sky_angle, length_factor, parse_length_unit, parse_time_unit
from .columns import Column, normalise
from .tables import RawTable, read_table

BESSELIAN_ZERO, TROPICAL_YEAR = 2415020.31352, 365.242198781
"""JD of B1900.0 and the tropical year in days (Lieske 1979, eq. 3; from memory)."""

J2000, JULIAN_YEAR = 2451545.0, 365.25
"""JD of J2000.0 and the Julian year in days (IAU 1976 system, common practice)."""

MJD_ZERO = 2400000.5
"""JD of MJD 0 (common practice)."""

_ALIASES: Mapping[str, tuple[str, ...]] = {
    "epoch": ("epoch", "year", "t", "time", "date"),
    "jd": ("jd", "julian_date"),
    "mjd": ("mjd",),
    "rho": ("rho", "sep", "separation"),
    "theta": ("theta", "pa", "position_angle"),
    "ddec": ("ddec", "delta_dec", "dec_offset"),
    "dra": ("dra", "dra_cosdec", "delta_ra", "ra_offset"),
    "rho_err": ("rho_err", "sigma_rho", "sep_err", "separation_error"),
    "theta_err": ("theta_err", "sigma_theta", "pa_err", "position_angle_error"),
    "ddec_err": ("ddec_err", "sigma_ddec"),
    "dra_err": ("dra_err", "sigma_dra"),
    "corr": ("corr", "correlation"),
    "sigma": ("sigma", "err", "error"),
}
_ROLE = {alias: role for role, aliases in _ALIASES.items() for alias in aliases}
_UNIT = re.compile(r"^(?P<name>.*?)\s*[\[(](?P<unit>[^\])]*)[\])]\s*$")
_YEAR = re.compile(r"^\s*(?P<scale>[BbJj]?)\s*(?P<value>[-+]?\d+(\.\d*)?([eE][-+]?\d+)?)\s*$")


def julian_year_of(jd: FloatArray) -> FloatArray:
    """Julian years (J2000.0 = 2000.0) of Julian dates.

    Examples
    --------
    >>> float(julian_year_of(np.array([2451545.0 + 365.25]))[0])
    2001.0
    """
    return 2000.0 + (np.asarray(jd, dtype=float) - J2000) / JULIAN_YEAR


def besselian_to_julian_year(besselian: FloatArray) -> FloatArray:
    """Julian years of Besselian years (Lieske 1979, eq. 3; from memory).

    Examples
    --------
    >>> round(float(besselian_to_julian_year(np.array([1950.0]))[0]), 6)   # B1950.0 = JD 2433282.4235
    1949.99979
    """
    jd = BESSELIAN_ZERO + TROPICAL_YEAR * (np.asarray(besselian, dtype=float) - 1900.0)
    return julian_year_of(jd)


def _columns(table: RawTable) -> dict[str, Column]:
    chosen: dict[str, Column] = {}
    for header in map(str, table.frame.columns):
        match = _UNIT.match(header)
        name, unit = (match["name"], match["unit"].strip() or None) if match else (header, None)
        role = _ROLE.get(normalise(name))
        if role is None:
            continue
        if role in chosen:
            raise InputError(f'{table.source}: columns "{chosen[role].header}" and "{header}" both look '
                             f"like {role}; keep one of them (rename or delete the other).")
        chosen[role] = Column(header, role, unit)
    return chosen


def _values(table: RawTable, column: Column) -> FloatArray:
    cells = table.frame[column.header]
    text = cells.astype(object).where(cells.notna(), "").astype(str).str.strip()
    values = pd.to_numeric(text.str.replace("\u2212", "-", regex=False), errors="coerce").to_numpy(float)
    bad = ~np.isfinite(values)
    if bad.any():
        index = int(np.argmax(bad))
        raise InputError(f'{table.source}, {table.row_word} {table.rows[index]}, column "{column.header}": '
                         f'found "{text.iloc[index]}", expected a number. Fill it in or delete the '
                         f"{table.row_word}.")
    return values


def _epochs(table: RawTable, chosen: Mapping[str, Column]) -> tuple[FloatArray, str]:
    """Julian years of each row, and how the file gave them."""
    present = [role for role in ("jd", "mjd", "epoch") if role in chosen]
    if len(present) != 1:
        found = ", ".join(chosen[role].header for role in present) or "none"
        raise InputError(f"{table.source}: expected one epoch column (epoch in years, or jd, or mjd); "
                         f"found {found}. Keep exactly one.")
    column = chosen[present[0]]
    if present[0] in ("jd", "mjd"):
        days = _values(table, column) + (MJD_ZERO if present[0] == "mjd" else 0.0)
        return julian_year_of(days), present[0].upper()
    cells = table.frame[column.header].astype(object).where(table.frame[column.header].notna(), "")
    years, besselian = np.empty(len(cells)), np.zeros(len(cells), dtype=bool)
    for index, cell in enumerate(map(str, cells)):
        match = _YEAR.match(cell)
        if match is None:
            raise InputError(f'{table.source}, {table.row_word} {table.rows[index]}, column '
                             f'"{column.header}": found "{cell}", expected a year such as 2012.345 '
                             "(Julian) or B1950.5 (Besselian). Correct it or delete the row.")
        years[index] = float(match["value"])
        besselian[index] = match["scale"].upper() == "B"
    converted = np.where(besselian, besselian_to_julian_year(years), years)
    kind = "Besselian years" if besselian.all() else ("Julian years" if not besselian.any()
                                                      else "Julian and Besselian years")
    return converted, kind


def _unit(table: RawTable, columns: list[Column], given: str | None) -> str:
    units = {parse_length_unit(column.unit) for column in columns if column.unit}
    if given is not None:
        units.add(parse_length_unit(given))
    if len(units) != 1:
        listed = ", ".join(sorted(units)) or "none"
        raise InputError(f"{table.source}: the positions' unit is {'ambiguous' if units else 'not given'} "
                         f"({listed}); write it in the header (e.g. \"rho [mas]\") or give --length-unit "
                         "(arcsec, mas, ...).")
    return units.pop()


def load_astrometry(
    source: str | os.PathLike[str] | pd.DataFrame, *, length_unit: str | None = None, sheet: str | int = 0,
) -> Astrometry:
    """Relative positions on the sky from a table; never modifies the file.

    Parameters
    ----------
    source : path or DataFrame
        Any table forcefit reads (CSV, TSV, Excel, Parquet, JSON).
    length_unit : str, optional
        The unit of the separations or offsets (and their errors) when the headers do not say.
    sheet : str or int
        Excel sheet.

    Returns
    -------
    Astrometry
        x north, y east (`forcefit.astrometry`), epochs in Julian years (``yr``), sorted; with
        the error ellipses when the table gives errors. ``relative`` is True: the positions are
        offsets from the body the force pulls towards.

    Raises
    ------
    InputError
        Naming the file, row and column, for a missing or unreadable value, a missing unit,
        repeated epochs or errors given for only one of a pair.
    """
    table = read_table(source, sheet=sheet)
    chosen = _columns(table)
    t, kind = _epochs(table, chosen)
    polar = "rho" in chosen and "theta" in chosen
    if not polar and not ("ddec" in chosen and "dra" in chosen):
        raise InputError(f"{table.source}: found neither rho and theta nor ddec and dra among: "
                         f"{', '.join(map(str, table.frame.columns))}. Name the columns so (e.g. "
                         "\"rho [arcsec]\", \"theta [deg]\").")
    first, second = ("rho", "theta") if polar else ("ddec", "dra")
    lengths = [chosen[role] for role in (first, "rho_err", "sigma") if role in chosen]
    if not polar:
        lengths += [chosen[role] for role in ("dra", "ddec_err", "dra_err") if role in chosen]
    unit = _unit(table, lengths, length_unit)
    if not is_sky_angle(unit):
        raise InputError(f"{table.source}: {unit} is not an angle on the sky; projected positions are "
                         "offsets in arcsec, mas or similar.")

    def values(role: str) -> FloatArray:
        column = chosen[role]
        angle = role in ("theta", "theta_err", "corr")
        own = parse_length_unit(column.unit) if column.unit and not angle else None
        return _values(table, column) * (length_factor(own, unit) if own else 1.0)

    order = np.argsort(t, kind="stable")
    if (np.diff(t[order]) <= 0).any():
        index = int(order[int(np.argmax(np.diff(t[order]) <= 0)) + 1])
        raise InputError(f"{table.source}, {table.row_word} {table.rows[index]}: epoch {t[index]:.6f} "
                         "repeats an earlier one; merge the measurements of one epoch into one row.")
    covariance = None
    if polar:
        rho, theta = values("rho"), np.radians(values("theta"))
        x, y = rho * np.cos(theta), rho * np.sin(theta)
        pair = [role in chosen for role in ("rho_err", "theta_err")]
        if any(pair) and not all(pair):
            raise InputError(f"{table.source}: give both rho_err and theta_err (degrees), or neither.")
        if all(pair):
            covariance = polar_covariance(rho, theta, values("rho_err"), np.radians(values("theta_err")))
    else:
        x, y = values("ddec"), values("dra")
        pair = [role in chosen for role in ("ddec_err", "dra_err")]
        if any(pair) and not all(pair):
            raise InputError(f"{table.source}: give both ddec_err and dra_err, or neither.")
        if all(pair):
            correlation = values("corr") if "corr" in chosen else 0.0
            covariance = offset_covariance(values("ddec_err"), values("dra_err"), correlation)
    if covariance is None and "sigma" in chosen:
        sigma = values("sigma")
        covariance = (sigma**2)[:, None, None] * np.eye(2)[None]
    name = "<DataFrame>" if isinstance(source, pd.DataFrame) else Path(source).stem
    track = Track(t=t[order], x=x[order], y=y[order], length_unit=unit, time_unit="yr", name=name)
    metadata = {"source": table.source, "epochs": kind, "positions": "rho, theta" if polar else "ddec, dra"}
    return Astrometry(track=track, covariance=None if covariance is None else covariance[order],
                      relative=True, metadata=metadata)


def save_astrometry(data: Astrometry, path: str | os.PathLike[str], *, first_epoch: float = 2000.0) -> Path:
    """Write positions on the sky as CSV that `load_astrometry` reads back, whole or not at all.

    Epochs are written as Julian years, ``first_epoch`` plus the track's times (which must be in
    years); positions as ``rho`` and ``theta`` with ``rho_err`` and ``theta_err`` when each error
    ellipse is aligned with the radius (isotropic errors included), else as ``ddec`` and ``dra``
    with ``ddec_err``, ``dra_err`` and ``corr``. Comment lines carry the name and any truth.
    """
    track = data.track
    if track.t is None or parse_time_unit(track.time_unit or "") != "yr":
        raise InputError(f"{track.label}: epochs are written in Julian years; give the times in yr.")
    unit = track.length_unit
    epoch = first_epoch + np.asarray(track.t)
    rho, theta = data.separation, np.radians(data.position_angle)
    frame = {"epoch [yr]": epoch}
    covariance = data.position_covariance()
    aligned = True
    if covariance is not None:
        radial = np.stack((np.cos(theta), np.sin(theta)), axis=-1)
        across = np.stack((-np.sin(theta), np.cos(theta)), axis=-1)
        along = np.einsum("ni,nij,nj->n", radial, covariance, radial)
        side = np.einsum("ni,nij,nj->n", across, covariance, across)
        cross = np.einsum("ni,nij,nj->n", radial, covariance, across)
        aligned = bool(np.all(np.abs(cross) <= 1e-9 * np.sqrt(along * side)))
    if aligned:
        frame.update({f"rho [{unit}]": rho, "theta [deg]": np.degrees(theta)})
        if covariance is not None:
            frame.update({f"rho_err [{unit}]": np.sqrt(along),
                          "theta_err [deg]": np.degrees(np.sqrt(side) / rho)})
    else:
        assert covariance is not None
        sx, sy = np.sqrt(covariance[:, 0, 0]), np.sqrt(covariance[:, 1, 1])
        frame.update({f"ddec [{unit}]": track.x, f"dra [{unit}]": track.y, f"ddec_err [{unit}]": sx,
                      f"dra_err [{unit}]": sy, "corr": covariance[:, 0, 1] / (sx * sy)})
    lines = [f"# forcefit astrometry: {track.name} (x north, y east; position angles north through east)"]
    if "truth" in data.metadata:
        lines.append(f"# truth: {dict(data.metadata['truth'])}")
    body = pd.DataFrame(frame).to_csv(index=False, float_format="%.12g", lineterminator="\n")
    return write_atomic(path, "\n".join(lines) + "\n" + body)
