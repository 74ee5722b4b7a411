"""Applications built on the library: grading a class's runs, the bundled demo."""

from __future__ import annotations

from typing import TYPE_CHECKING

from .._lazy import lazy_exports

if TYPE_CHECKING:
    from .demo import DemoDataset, demo_datasets, demo_folder
    from .grading import GradingRule, find_runs, grade_run, grade_runs, read_results

__getattr__, __dir__ = lazy_exports(__name__, {
    "DemoDataset": ".demo",
    "demo_datasets": ".demo",
    "demo_folder": ".demo",
    "GradingRule": ".grading",
    "find_runs": ".grading",
    "grade_run": ".grading",
    "grade_runs": ".grading",
    "read_results": ".grading",
})

__all__ = [
    "DemoDataset",
    "GradingRule",
    "demo_datasets",
    "demo_folder",
    "find_runs",
    "grade_run",
    "grade_runs",
    "read_results",
]
