"""Outputs: figures and HTML reports that render what results hold."""

from __future__ import annotations

from typing import TYPE_CHECKING

from .._lazy import lazy_exports

if TYPE_CHECKING:
    from .figures import (
        apsides_figure,
        corner_figure,
        figure_png,
        grade_histogram,
        path_figure,
        relation_figure,
        residual_figure,
        save_figure,
        trace_figure,
    )
    from .report import Verdict, safe_name, write_class_report, write_report

__getattr__, __dir__ = lazy_exports(__name__, {
    "apsides_figure": ".figures",
    "corner_figure": ".figures",
    "figure_png": ".figures",
    "grade_histogram": ".figures",
    "path_figure": ".figures",
    "relation_figure": ".figures",
    "residual_figure": ".figures",
    "save_figure": ".figures",
    "trace_figure": ".figures",
    "Verdict": ".report",
    "safe_name": ".report",
    "write_class_report": ".report",
    "write_report": ".report",
})

__all__ = [
    "Verdict",
    "apsides_figure",
    "corner_figure",
    "figure_png",
    "grade_histogram",
    "path_figure",
    "relation_figure",
    "residual_figure",
    "safe_name",
    "save_figure",
    "trace_figure",
    "write_class_report",
    "write_report",
]
