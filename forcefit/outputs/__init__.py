"""Outputs: figures and HTML reports that render what results hold."""

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
