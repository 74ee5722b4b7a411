"""The force law without assuming a power law: F (or F/h**2) in bins of radius.

Each point of the path gives F/h**2 = kappa / (r**2 cos(gamma)**3) (and F itself when
timestamps give h). Averaged in bins of r, these trace the force law; the local
exponent d ln F / d ln r between neighbouring bins shows whether it is a power law
(a constant local exponent) or not (one that drifts with r).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from .._json import json_safe
from .._regression import autocorrelation_time
from ..errors import NotIdentifiable
from ..geometry.curves import attractive_points, curvature_relation
from ..geometry.path import PathGeometry, describe_path
from ..geometry.smoothing import Smoothing
from ..track import Track
from ._checks import angular_momentum, require_orbit


@dataclass(frozen=True)
class ForceProfile:
    """F(r) in radius bins, with the local exponent between bins.

    Attributes
    ----------
    table : DataFrame
        One row per bin: ``radius`` (L, the bin's weighted mean), ``radius_low``,
        ``radius_high``, ``n_points``, ``force`` and ``force_stderr`` (L T**-2, or
        F/h**2 in L**-3 when the track has no timestamps), ``local_exponent`` and
        ``local_exponent_stderr`` (d ln F / d ln r from the neighbouring bins) and
        ``exponent_radius`` (L), the radius that local exponent describes.
    force_is_per_h2 : bool
        True when ``force`` is F/h**2 (a shape-only track).
    length_unit, force_unit : str
        Units of the radius and of the force column.
    """

    table: pd.DataFrame
    force_is_per_h2: bool
    length_unit: str
    force_unit: str

    def to_text(self) -> str:
        """The table with units in its header."""
        label = "F/h^2" if self.force_is_per_h2 else "F"
        frame = self.table.rename(columns={
            "radius": f"r [{self.length_unit}]", "force": f"{label} [{self.force_unit}]",
            "force_stderr": "± (1 sd)", "local_exponent": "local n",
            "local_exponent_stderr": "± (n)"})
        frame[f"at r [{self.length_unit}]"] = frame.pop("exponent_radius")
        columns = [f"r [{self.length_unit}]", "n_points", f"{label} [{self.force_unit}]",
                   "± (1 sd)", "local n", "± (n)", f"at r [{self.length_unit}]"]
        return frame[columns].to_string(index=False, float_format=lambda v: f"{v:.5g}")

    def to_dict(self) -> dict[str, Any]:
        """JSON-safe form: one list per column of ``table`` (nan as None)."""
        return json_safe(self.table.to_dict("list"))


def force_profile(
    track: Track,
    *,
    bins: int = 8,
    centre: tuple[float, float] | None = None,
    smoothing: Smoothing = "auto",
    path: PathGeometry | None = None,
) -> ForceProfile:
    """Measure F(r) in ``bins`` radius bins (equal widths in log r) without a model.

    Bins holding fewer than max(10, 2% of the points) are left out.

    Parameters
    ----------
    track : Track
        Positions (L), with times (T) when known.
    bins : int
        Number of radius bins (at least 3).
    centre : (float, float), optional
        The force centre (L); found from the data when not given.
    smoothing : {"auto", "spline", "savgol"}
        How to smooth before differentiating.
    path : PathGeometry, optional
        The track's geometry, if already described.

    Returns
    -------
    ForceProfile

    Examples
    --------
    >>> t = np.linspace(0.0, 10.0, 2001)
    >>> profile = force_profile(Track(t=t, x=0.3 * np.cos(2 * t), y=0.1 * np.sin(2 * t)),
    ...                         centre=(0.0, 0.0), bins=4)
    >>> bool(np.allclose(profile.table["local_exponent"], 1.0, atol=1e-3))
    True
    """
    path = path if path is not None else describe_path(track, centre=centre, smoothing=smoothing)
    require_orbit(path)
    bins = max(int(bins), 3)
    used = attractive_points(path.smoothing, path.curvature, path.curvature_stderr)
    points = curvature_relation(path.smoothing, path.curvature, path.curvature_stderr,
                                np.asarray(path.centre), used)
    h, h_se, _ = angular_momentum(path)
    per_h2 = not math.isfinite(h)
    log_scale = 0.0 if per_h2 else 2.0 * math.log(abs(h))
    edges = np.linspace(points.log_radius.min(), points.log_radius.max(), bins + 1)
    label = np.clip(np.searchsorted(edges, points.log_radius, side="right") - 1, 0, bins - 1)
    smallest = max(10, int(0.02 * label.size))
    groups = [np.flatnonzero(label == b) for b in range(bins) if np.sum(label == b) >= smallest]
    if len(groups) < 3:
        raise NotIdentifiable(f"{track.label}: too few points spread over too small a range "
                              "of radius for a force profile; use fewer bins or a longer track.")
    rows = []
    for group in groups:
        x, y, sigma = points.log_radius[group], points.log_force_per_h2[group], points.sigma[group]
        weight = 1.0 / sigma**2
        mean_x = float(np.sum(weight * x) / np.sum(weight))
        mean_y = float(np.sum(weight * y) / np.sum(weight))
        scatter = float(np.sum(weight * (y - mean_y) ** 2) / max(y.size - 1, 1))
        tau = autocorrelation_time((y - mean_y)[np.argsort(group)])
        se_y = math.sqrt(max(scatter, 1.0) * tau / float(np.sum(weight)))
        low, high = float(np.exp(x.min())), float(np.exp(x.max()))
        rows.append((mean_x, mean_y + log_scale, se_y, low, high, y.size))
    log_r = np.array([row[0] for row in rows])
    log_f = np.array([row[1] for row in rows])
    se = np.array([row[2] for row in rows])
    local, local_se, where = _local_exponent(log_r, log_f, se)
    force = np.exp(log_f)
    table = pd.DataFrame({
        "radius": np.exp(log_r), "radius_low": [row[3] for row in rows],
        "radius_high": [row[4] for row in rows], "n_points": [row[5] for row in rows],
        "force": force, "force_stderr": force * se,
        "local_exponent": local, "local_exponent_stderr": local_se, "exponent_radius": where,
    })
    unit = (f"{track.length_unit}^-3" if per_h2 else f"{track.length_unit} {track.time_unit}^-2")
    return ForceProfile(table=table, force_is_per_h2=per_h2, length_unit=track.length_unit,
                        force_unit=unit)


def _local_exponent(
    log_r: np.ndarray, log_f: np.ndarray, se: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """d ln F / d ln r at each bin (central differences inside, one-sided at the ends), its
    error, and the radius it belongs to: the logarithmic mean (r2 - r1) / ln(r2 / r1) of the
    two bins differenced, where a chord slope equals the local exponent exactly when that
    exponent changes linearly with r."""
    count = log_r.size
    lower = np.clip(np.arange(count) - 1, 0, count - 1)
    upper = np.clip(np.arange(count) + 1, 0, count - 1)
    span = log_r[upper] - log_r[lower]
    slope = (log_f[upper] - log_f[lower]) / span
    slope_se = np.hypot(se[upper], se[lower]) / np.abs(span)
    where = (np.exp(log_r[upper]) - np.exp(log_r[lower])) / span
    return slope, slope_se, where
