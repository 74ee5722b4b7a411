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
from ..track import Track

COLUMNS = ("exponent", "chi2", "reduced_chi2", "aic", "bic", "delta_bic", "p_value")
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

    def to_text(self) -> str:
        """The table, five significant digits."""
        return self.table[list(COLUMNS)].to_string(float_format=lambda v: f"{v:.5g}")

    def to_dict(self) -> list[dict[str, Any]]:
        """JSON-safe form: one record per law."""
        return json_safe(self.table.reset_index().to_dict("records"))


def compare_laws(
    track_or_tracks: Track | Sequence[Track],
    exponents: Sequence[float] = (1.0, -2.0),
    **options: object,
) -> LawComparison:
    """Each fixed law against the free fit: chi-square, reduced chi-square, AIC, BIC, p-value.

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
        Its ``table`` has one row per law (``free`` first), with ``exponent``, ``chi2``, ``reduced_chi2``,
        ``n_parameters``, ``aic``, ``bic``, ``delta_bic`` and ``p_value`` of the nested test
        (the fixed law against the free one: a chi-square test with one degree of freedom
        when the noise is known, an F test when it is fitted). A small p-value rejects the
        fixed law.

    References
    ----------
    H. Akaike (1974), IEEE Trans. Autom. Control 19, 716; G. Schwarz (1978), Ann. Stat. 6, 461.
    """
    free = fit_orbit(track_or_tracks, **options)  # type: ignore[arg-type]
    rows = [("free", free)]
    for value in exponents:
        rows.append((f"n = {value:g}", fit_orbit(track_or_tracks, exponent=float(value), **options)))  # type: ignore[arg-type]
    n_values = 2 * free.n_points
    sigma_known = free.sigma_known
    table = []
    for label, fit in rows:
        parameters = len(fit.parameter_names)
        chi2 = fit.chi2
        delta = chi2 - free.chi2
        if label == "free":
            p_value = 1.0
        elif sigma_known:
            p_value = float(stats.chi2.sf(max(delta, 0.0), df=1))
        else:
            f_value = max(delta, 0.0) / (free.chi2 / max(n_values - len(free.parameter_names), 1))
            p_value = float(stats.f.sf(f_value, 1, max(n_values - len(free.parameter_names), 1)))
        table.append({
            "law": label, "exponent": fit.exponent, "exponent_stderr": fit.exponent_stderr,
            "chi2": chi2, "reduced_chi2": fit.reduced_chi2, "n_parameters": parameters,
            "aic": chi2 + 2 * parameters, "bic": chi2 + parameters * math.log(n_values),
            "p_value": p_value,
        })
    frame = pd.DataFrame(table).set_index("law")
    frame["delta_bic"] = frame["bic"] - frame["bic"].min()
    return LawComparison(table=frame)
