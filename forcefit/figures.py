"""Figures people would rather look at than read: the posterior's corner and trace plots.

Pure plotting: each function takes a result and returns a matplotlib Figure; `save_figure`
writes one whole or not at all. The palette is colour-blind safe (Okabe & Ito 2008,
"Color universal design").
"""

from __future__ import annotations

import io
import os
from pathlib import Path

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

from ._atomic import write_atomic  # noqa: E402
from .posterior import Posterior  # noqa: E402

PALETTE = {"ink": "#1b2631", "data": "#0072B2", "model": "#D55E00", "accent": "#009E73",
           "muted": "#999999", "band": "#E69F00"}
"""forcefit's colours: Okabe-Ito hues, dark ink for text."""

LABELS = {"exponent": "n", "strength": "k", "log_force": "ln F(r_ref)", "centre_x": "centre x",
          "centre_y": "centre y", "noise_scale": "noise scale", "drag": "drag",
          "rotation_rate": "rotation rate"}


def _label(posterior: Posterior, name: str) -> str:
    unit = posterior.units.get(name, "")
    text = LABELS.get(name, name)
    return f"{text} [{unit}]" if unit else text


def corner_figure(posterior: Posterior, names: list[str] | None = None) -> Figure:
    """Pairwise marginals of the posterior (``corner`` package), law parameters first.

    Parameters
    ----------
    posterior : Posterior
    names : list of str, optional
        Columns to show; default the exponent, the strength and the centre.
    """
    import corner

    names = names or [name for name in ("exponent", "strength", "centre_x", "centre_y", "drag",
                                        "rotation_rate", "noise_scale") if name in posterior.samples]
    values = posterior.samples[names].to_numpy()
    figure = corner.corner(values, labels=[_label(posterior, n) for n in names],
                           quantiles=[0.16, 0.5, 0.84], show_titles=True, title_fmt=".4g",
                           color=PALETTE["data"], hist_kwargs={"color": PALETTE["data"]},
                           label_kwargs={"fontsize": 9}, title_kwargs={"fontsize": 8})
    figure.suptitle("posterior (median and 68% interval in each title)", color=PALETTE["ink"], y=1.03)
    return figure


def trace_figure(posterior: Posterior, names: list[str] | None = None, walkers: int = 12) -> Figure:
    """The chains of a few walkers against step number, burn-in shaded."""
    names = names or [name for name in ("exponent", "log_force", "centre_x", "centre_y")
                      if name in posterior.autocorr_time]
    chain = posterior.sampler.get_chain()
    columns = list(posterior.autocorr_time)
    figure, axes = plt.subplots(len(names), 1, figsize=(7.5, 1.7 * len(names) + 0.6), sharex=True,
                                squeeze=False)
    steps = np.arange(chain.shape[0])
    for axis, name in zip(axes[:, 0], names):
        index = columns.index(name)
        axis.plot(steps, chain[:, :walkers, index], color=PALETTE["data"], alpha=0.35, linewidth=0.6)
        axis.axvspan(0, posterior.burn_in, color=PALETTE["muted"], alpha=0.2, linewidth=0)
        axis.set_ylabel(_label(posterior, name), fontsize=8)
        axis.tick_params(labelsize=7)
    axes[-1, 0].set_xlabel("step (grey: burn-in, discarded)")
    verdict = "converged" if posterior.converged else "NOT converged"
    figure.suptitle(f"chains of {min(walkers, chain.shape[1])} walkers — {verdict}", fontsize=10)
    figure.tight_layout()
    return figure


def save_figure(figure: Figure, path: str | os.PathLike[str], *, dpi: int = 120) -> Path:
    """Write a figure as PNG (or by the path's ending), whole or not at all, and close it."""
    buffer = io.BytesIO()
    target = Path(path)
    figure.savefig(buffer, format=target.suffix.lstrip(".") or "png", dpi=dpi, bbox_inches="tight")
    plt.close(figure)
    return write_atomic(target, buffer.getvalue())
