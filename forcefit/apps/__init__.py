"""Applications built on the library: grading a class's runs, the bundled demo."""

from .demo import DemoDataset, demo_datasets, demo_folder
from .grading import GradingRule, find_runs, grade_run, grade_runs, read_results

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
