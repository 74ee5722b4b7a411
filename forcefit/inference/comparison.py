"""Comparing force laws: each nominal law held fixed against the free orbit fit.

Chi-square, AIC, BIC and the p-value of the nested test say whether the data reject
Hooke's n = 1 or Newton's n = -2 in favour of the fitted exponent.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import pandas as pd
from scipy import stats

from .._json import json_safe
from ..estimators.orbit import fit_orbit
from ..formatting import measurement, p_value
from ..track import Track

HEADINGS = ("law", "exponent n", "chi2", "reduced chi2", "AIC", "BIC", "delta BIC", "p-value")
"""The columns the text shows."""


@dataclass(frozen=True)
class LawComparison:
    """Fixed laws against the free orbit fit.

    Attributes
    ----------
    table : DataFrame
        One row per law, indexed by ``law`` (``free`` first): ``exponent``,
        ``exponent_stderr``, ``chi2``, ``reduced_chi2``, ``n_parameters``, ``aic``, ``bic``,
        ``p_value`` and ``delta_bic``.
    """

    table: pd.DataFrame

    def rows(self) -> list[tuple[str, ...]]:
        """Each law as text: n to its error's digits (a fixed law's n as given), chi-square and the
        information criteria to a tenth, the p-value in two digits ("—" for the free fit itself)."""
        rows: list[tuple[str, ...]] = []
        for law, record in self.table.iterrows():
            free = law == "free"
            exponent = (measurement(record["exponent"], record["exponent_stderr"]) if free
                        else f"{record['exponent']:g} (held)")
            rows.append((str(law), exponent, f"{record['chi2']:.1f}", f"{record['reduced_chi2']:.3g}",
                         f"{record['aic']:.1f}", f"{record['bic']:.1f}", f"{record['delta_bic']:.1f}",
                         "—" if free else p_value(float(record["p_value"]))))
        return rows

    def to_text(self) -> str:
        """The table in aligned columns, every number to the digits it supports."""
        table: list[tuple[str, ...]] = [HEADINGS, *self.rows()]
        widths = [max(len(row[i]) for row in table) for i in range(len(HEADINGS))]
        return "\n".join("  ".join(cell.ljust(width) if i == 0 else cell.rjust(width)
                                    for i, (cell, width) in enumerate(zip(row, widths))).rstrip()
                         for row in table)

    def to_dict(self) -> list[dict[str, Any]]:
        """JSON-safe form: one record per law."""
        return json_safe(self.table.reset_index().to_dict("records"))


def compare_laws(
    track_or_tracks: Track | Sequence[Track],
    exponents: Sequence[float] = (1.0, -2.0),
    **options: object,
) -> LawComparison:
    """Each fixed law against the free fit: chi-square, AIC, BIC, p-value.

    Every figure uses one noise model, the free fit's: its sigma (given, or the fitted
    noise level) and the correlation time tau of its residuals. Correlated residuals carry
    about 1/tau as much information as independent ones, so chi-square differences count
    1/tau as much and the sample size is 2N/tau.

    Parameters
    ----------
    track_or_tracks : Track or sequence of Track
        Timestamped tracks.
    exponents : sequence of float
        The nominal exponents to test (default Hooke's 1 and Newton's -2).
    **options
        Passed to `fit_orbit` (drag, centre, rotation_rate, ...).

    Returns
    -------
    LawComparison
        Its ``table`` has one row per law (``free`` first), with ``exponent``, ``chi2`` (in the free fit's
        noise units), ``reduced_chi2``, ``n_parameters``, ``aic``, ``bic``, ``delta_bic``
        and ``p_value`` of the nested test (the fixed law against the free one: a chi-square
        test with one degree of freedom when sigma is known, an F test when the noise is
        fitted). A small p-value rejects the fixed law.

    References
    ----------
    H. Akaike (1974), IEEE Trans. Autom. Control 19, 716; G. Schwarz (1978), Ann. Stat. 6, 461.
    """
    free = fit_orbit(track_or_tracks, **options)  # type: ignore[arg-type]
    rows = [("free", free)]
    for value in exponents:
        rows.append((f"n = {value:g}", fit_orbit(track_or_tracks, exponent=float(value), **options)))  # type: ignore[arg-type]
    tau = free.correlation_time
    effective = 2 * free.n_points / tau
    dof = max(2 * free.n_points - len(free.parameter_names), 1)
    sigma_known = free.sigma_known
    table = []
    for label, fit in rows:
        parameters = len(fit.parameter_names)
        chi2 = fit.chi2 * (fit.noise / free.noise) ** 2   # in the free fit's noise units
        delta = max(chi2 - free.chi2, 0.0) / tau
        if label == "free":
            p_value = 1.0
        elif sigma_known:
            p_value = float(stats.chi2.sf(delta, df=1))
        else:
            p_value = float(stats.f.sf(delta / (free.chi2 / dof), 1, max(dof / tau, 1.0)))
        table.append({
            "law": label, "exponent": fit.exponent, "exponent_stderr": fit.exponent_stderr,
            "chi2": chi2, "reduced_chi2": chi2 / dof, "n_parameters": parameters,
            "aic": chi2 / tau + 2 * parameters, "bic": chi2 / tau + parameters * math.log(effective),
            "p_value": p_value,
        })
    frame = pd.DataFrame(table).set_index("law")
    frame["delta_bic"] = frame["bic"] - frame["bic"].min()
    return LawComparison(table=frame)
