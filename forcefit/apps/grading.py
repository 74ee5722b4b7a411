"""Grading many runs against an expected law: in parallel, resumable, never stopped by one bad run.

Each run is loaded and fitted on its own (by the estimator `forcefit.estimators.fit` picks
for it) in a worker process — local processes, or a dask.distributed cluster —
and graded: it passes when its exponent lies within the tolerance of the expected one, its
strength (when one is expected) within its relative tolerance, it covers enough of the
orbit, and the fit passed its own checks. Every failure says why. The results table is
rewritten whole after each run, so an interrupted batch keeps what finished and a resumed
one skips it.
"""

from __future__ import annotations

import math
import os
import traceback
import warnings
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from concurrent.futures import ProcessPoolExecutor, as_completed
from contextlib import contextmanager
from dataclasses import asdict, dataclass, field
from multiprocessing import get_context
from pathlib import Path
from typing import Any

import pandas as pd

from .._atomic import write_atomic
from ..errors import FitError, ForcefitError, InputError, NotIdentifiable
from ..estimators.result import LawFit
from ..formatting import measurement
from ..track import Track
from ..units import parse_strength_unit, strength_factor, strength_unit, time_factor
from .class_settings import ClassSettings, merged_options
from .class_summary import summarise_class
from .feedback import RunFacts, likely_mistakes
from .run_files import fingerprint, guard_cell, sort_runs, student_of, unguard_cell

RESULTS = "results.csv"
TEXT_COLUMNS = ("run", "file", "reason", "advice", "notes", "method", "run_units", "student", "report")
"""Columns of the results table that hold text (guarded against spreadsheet formulas)."""


@dataclass(frozen=True)
class GradingRule:
    """What a run must show to pass.

    Attributes
    ----------
    expect, tolerance : float
        The expected exponent and the largest |n - expect| that passes.
    strength, strength_tolerance : float, optional
        The expected strength k at the expected exponent, in ``strength_unit``, and the largest
        relative deviation that passes.
    min_turns : float
        The least number of turns about the centre a run must cover.
    load_options : dict
        Passed to `load_tracks` (units, calibration, column names) for every run.
    strength_unit : str, optional
        The unit of ``strength`` and of the class's table, length**(1 - n) time**-2 at the
        expected n (``"s^-2"`` for n = 1, ``"m^3 s^-2"`` for n = -2); default metres and
        seconds. Each run's strength is converted into it before comparing, whatever units
        the run was read in.
    files : tuple of (str, mapping)
        Reading options for the runs whose file name matches a pattern (a class settings file's
        ``[[file]]`` tables), applied over ``load_options`` in order.
    given_options : mapping
        Reading options given on the command line: they win over the others.
    """

    expect: float
    tolerance: float
    strength: float | None = None
    strength_tolerance: float | None = None
    min_turns: float = 1.0
    load_options: dict[str, Any] = field(default_factory=dict)
    strength_unit: str | None = None
    files: tuple[tuple[str, Mapping[str, Any]], ...] = ()
    given_options: Mapping[str, Any] = field(default_factory=dict)

    def exponent_within(self, exponent: float) -> bool:
        """True when |n - expect| <= tolerance: inside the band on either side, its edges included."""
        return abs(exponent - self.expect) <= self.tolerance

    def strength_within(self, strength: float) -> bool:
        """True when no strength is expected, or |k / strength - 1| <= strength_tolerance."""
        if self.strength is None:
            return True
        return abs(strength / self.strength - 1.0) <= (self.strength_tolerance or 0.0)

    def options_for(self, path: str | os.PathLike[str]) -> dict[str, Any]:
        """The `load_tracks` keywords for one run: ``load_options``, then the options of every
        matching ``files`` entry, then ``given_options`` on top."""
        return merged_options(self.load_options, self.files, Path(path), self.given_options)

    def settings_for(self, path: str | os.PathLike[str]) -> dict[str, Any]:
        """Everything one run's grade depends on besides its file: the rule and its reading options."""
        rule = {key: value for key, value in asdict(self).items()
                if key not in ("load_options", "files", "given_options")}
        return {**rule, "reading": self.options_for(path)}

    @property
    def units(self) -> tuple[str | None, str]:
        """The class's (length, time) units: those of ``strength_unit``, else metres and seconds
        (length None at n = 1, where the strength has none)."""
        if self.strength_unit is not None:
            return parse_strength_unit(self.strength_unit, self.expect)
        return (None if abs(self.expect - 1.0) < 1e-12 else "m"), "s"

    @property
    def unit(self) -> str:
        """The unit of the expected strength and of the class table's strength column."""
        length, time = self.units
        return strength_unit(length or "m", time, self.expect)


def find_runs(source: str | os.PathLike[str] | Sequence[str | os.PathLike[str]]) -> list[Path]:
    """The run files of a folder, a glob pattern, or a list of paths, sorted by name (files that
    are not runs left out; `sort_runs` says why)."""
    return list(sort_runs(source).runs)


def rule_with_settings(settings: ClassSettings | None, *, rule: Mapping[str, Any],
                       options: Mapping[str, Any]) -> GradingRule:
    """The grading rule of a class settings file (or none) with the command line's rule values
    (``rule``) and reading options (``options``) on top of the file's."""
    values = {**(settings.rule if settings is not None else {}), **rule}
    for key in ("expect", "tolerance"):
        if key not in values:
            where = f"{settings.source}: [rule] has no {key}" if settings else f"no {key} given"
            raise InputError(f"{where}; give --{key} or write {key} = ... under [rule] in the settings.")
    if values.get("strength") is not None:
        values.setdefault("strength_tolerance", 0.05)
    return GradingRule(**values, load_options=dict(settings.reading) if settings else {},
                       files=settings.files if settings else (), given_options=dict(options))


def _row(path: Path, name: str, **values: Any) -> dict[str, Any]:
    base = {"run": name, "file": str(path), "passed": False, "reason": "", "exponent": math.nan,
            "exponent_stderr": math.nan, "strength_at_expected": math.nan,
            "strength_at_expected_stderr": math.nan, "strength_unit": "", "duration": math.nan,
            "time_unit": "", "turns": math.nan, "reduced_chi2": math.nan, "n_points": 0,
            "method": "", "run_units": "", "advice": "", "notes": "", "fingerprint": "",
            "student": student_of(name), "report": ""}
    base.update(values)
    return base


def grade_run(path: str | os.PathLike[str], rule: GradingRule, out_dir: str | None = None) -> dict[str, Any]:
    """Load, fit and grade one run file; never raises (a failure is a failing row) and never
    prints: warnings go into the row's notes.

    Returns
    -------
    dict
        One row of the results table, with the likely mistake behind a failure (``advice``) and
        the fingerprint of the file and the rule it was graded with.
    """
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        row = _grade(Path(path), rule, out_dir)
    notes = dict.fromkeys(str(warning.message) for warning in caught)          # once each, in order
    row["notes"] = "; ".join(notes)
    try:
        row["fingerprint"] = fingerprint(path, rule.settings_for(path))
    except OSError:
        row["fingerprint"] = ""
    return row


def _grade(path: Path, rule: GradingRule, out_dir: str | None) -> dict[str, Any]:
    from ..estimators import OrbitFit, registry
    from ..outputs.report import Verdict, write_report
    from ..reading.loaders import load_tracks

    name = path.stem
    try:
        tracks = load_tracks(path, **rule.options_for(path))
        if len(tracks) != 1:
            return _row(path, name, reason=f"load error: the file holds {len(tracks)} tracks; grade "
                                           "one run per file.")
        track = tracks[0]
        fit = registry.fit(track)
    except NotIdentifiable as exc:
        return _row(path, name, reason=f"not identifiable: {exc}")
    except InputError as exc:
        return _row(path, name, reason=f"load error: {exc}",
                    advice=" ".join(likely_mistakes(_facts(rule, load_error=str(exc)))))
    except (FitError, ForcefitError) as exc:
        return _row(path, name, reason=f"fit failed: {exc}")
    except Exception as exc:  # one bad run never stops a batch
        last = traceback.extract_tb(exc.__traceback__)[-1]
        return _row(path, name, reason=f"internal error: {type(exc).__name__}: {exc} "
                                       f"({Path(last.filename).name}:{last.lineno})")
    reasons = []
    failed = [check for check, result in fit.diagnostics.items() if result.passed is False]
    if failed:
        reasons.append(f"poor fit: {', '.join(failed)} check failed")
    turns = fit.turns if isinstance(fit, OrbitFit) else math.nan
    if math.isfinite(turns) and turns < rule.min_turns:
        reasons.append(f"too short: covers {turns:.2f} turns, at least {rule.min_turns:g} needed")
    if not rule.exponent_within(fit.exponent):
        reasons.append(f"exponent outside tolerance: n = "
                       f"{measurement(fit.exponent, fit.exponent_stderr)}, expected "
                       f"{rule.expect:g} ± {rule.tolerance:g}")
    k, k_error, problem = _class_strength(fit, track, rule)
    if rule.strength is not None:
        unit = rule.unit
        if problem:
            reasons.append(f"strength not checked: {problem}")
        elif not rule.strength_within(k):
            reasons.append(f"strength outside tolerance: k = {measurement(k, k_error, unit)}, "
                           f"expected {rule.strength:.6g} {unit} ± {100 * (rule.strength_tolerance or 0):g}%")
    advice = " ".join(likely_mistakes(_facts(
        rule, track=track, fit=fit, turns=turns, fit_checks_passed=not failed,
        strength_ratio=k / rule.strength if rule.strength and not problem else math.nan))) if reasons else ""
    duration = track.duration * time_factor(track.time_unit, rule.units[1]) if track.has_times else math.nan
    row = _row(path, name, passed=not reasons, reason="; ".join(reasons), exponent=fit.exponent,
               exponent_stderr=fit.exponent_stderr, strength_at_expected=k,
               strength_at_expected_stderr=k_error, strength_unit=rule.unit, duration=duration,
               time_unit=rule.units[1], turns=turns, reduced_chi2=fit.reduced_chi2,
               n_points=track.n_points, method=fit.method, advice=advice,
               run_units=f"{track.length_unit}, {track.time_unit if track.has_times else 'no times'}")
    if out_dir is not None:
        folder = Path(out_dir) / "runs"
        shown = tuple(reasons) + ((f"likely cause: {advice}",) if advice else ())
        verdict = Verdict("PASS" if not reasons else "FAIL", not reasons, shown)
        page = write_report(fit, folder, track=track, verdict=verdict,   # named by safe_name
                            options=rule.settings_for(path))
        row["report"] = f"runs/{page.name}"
    return row


def _facts(rule: GradingRule, *, track: Track | None = None, fit: LawFit | None = None,
           load_error: str = "", turns: float = math.nan, fit_checks_passed: bool = False,
           strength_ratio: float = math.nan) -> RunFacts:
    """What `likely_mistakes` needs to know of a run."""
    return RunFacts(track=track, load_error=load_error,
                    exponent=math.nan if fit is None else fit.exponent,
                    exponent_stderr=math.nan if fit is None else fit.exponent_stderr,
                    strength_ratio=strength_ratio, expected_exponent=rule.expect, tolerance=rule.tolerance,
                    turns=turns, min_turns=rule.min_turns, fit_checks_passed=fit_checks_passed)


def _class_strength(fit: LawFit, track: Track, rule: GradingRule) -> tuple[float, float, str]:
    """The run's strength at the expected exponent in the class's unit, its error, and why it
    could not be found ("" when it was)."""
    if not track.has_times:
        return math.nan, math.nan, "not determined without timestamps."
    k, k_error = fit.strength_at_exponent(rule.expect)
    try:
        factor = strength_factor((track.length_unit, track.time_unit), rule.units, rule.expect)
    except InputError as exc:
        return math.nan, math.nan, (f"the run is in {track.length_unit} and k at n = {rule.expect:g} depends "
                                    f"on the length scale ({exc}) Give the scale (--scale or a calibration).")
    return k * factor, k_error * factor, ""


def _write_table(rows: Iterable[dict[str, Any]], path: Path, rule: GradingRule) -> pd.DataFrame:
    """Write the results table, one unit per column stated in its header (the class's units)."""
    frame = pd.DataFrame(list(rows)).sort_values("run", kind="stable").reset_index(drop=True)
    strength, time = rule.unit, rule.units[1]
    guarded = frame.copy()
    for column in TEXT_COLUMNS:
        if column in guarded:
            guarded[column] = [guard_cell(str(value)) for value in guarded[column].fillna("")]
    renamed = guarded.drop(columns=["strength_unit", "time_unit"]).rename(columns={
        "strength_at_expected": f"strength_at_expected [{strength}]",
        "strength_at_expected_stderr": f"strength_at_expected_stderr [{strength}]",
        "duration": f"duration [{time}]", "exponent": "exponent [1]",
        "exponent_stderr": "exponent_stderr [1]", "turns": "turns [1]",
    })
    write_atomic(path, renamed.to_csv(index=False, float_format="%.10g", lineterminator="\n"))
    return frame


def read_results(path: str | os.PathLike[str]) -> pd.DataFrame:
    """A results table written by `grade_runs`, with the units taken back out of the headers."""
    frame = pd.read_csv(path, keep_default_na=False, na_values=[""],
                        dtype={column: str for column in TEXT_COLUMNS})
    units = {column.split(" [")[0]: column.split(" [")[1].rstrip("]") for column in frame.columns
             if " [" in column}
    frame.columns = [column.split(" [")[0] for column in frame.columns]
    frame["strength_unit"] = units.get("strength_at_expected", "")
    frame["time_unit"] = units.get("duration", "")
    for column in TEXT_COLUMNS:
        if column in frame:
            frame[column] = [unguard_cell(str(value)) for value in frame[column].astype(object).fillna("")]
    return frame


def _graded(paths: Sequence[Path], rule: GradingRule, folder: Path, workers: int | None,
            scheduler: str | None) -> Iterator[dict[str, Any]]:
    """Rows as runs finish: here one by one (``workers=1``, on one thread like a worker
    process), or from worker processes or a dask cluster in the order they complete."""
    if workers == 1 and scheduler is None:
        from threadpoolctl import threadpool_limits

        for path in paths:
            with threadpool_limits(limits=1):
                row = grade_run(str(path), rule, str(folder))
            yield row
        return
    executor, close = _executor(workers, scheduler)
    try:
        with _single_threaded():
            futures = [executor.submit(grade_run, str(p), rule, str(folder)) for p in paths]
        for future in _completed(futures, scheduler is not None):
            yield future.result()
    finally:
        close()


def _executor(workers: int | None, scheduler: str | None) -> tuple[Any, Callable[[], None]]:
    if scheduler is not None:
        try:
            from dask.distributed import Client
        except ImportError as exc:
            raise ImportError("grading on a cluster needs dask.distributed: pip install "
                              "'forcefit[cluster]'") from exc
        client = Client(scheduler)
        return client, client.close
    pool = ProcessPoolExecutor(max_workers=workers or os.cpu_count() or 1,
                               mp_context=get_context("spawn"), initializer=_one_thread_each)
    return pool, lambda: pool.shutdown(cancel_futures=True)


THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS")


def _one_thread_each() -> None:
    """Worker start-up: one thread per process, so that workers do not fight over the cores.

    The variables must be set before numpy loads its linear-algebra library; the pool
    passes them to each worker through the environment (see `_single_threaded`).
    """
    for name in THREAD_VARIABLES:
        os.environ.setdefault(name, "1")


def grade_runs(
    source: str | os.PathLike[str] | Sequence[str | os.PathLike[str]],
    rule: GradingRule,
    out_dir: str | os.PathLike[str],
    *,
    workers: int | None = None,
    scheduler: str | None = None,
    resume: bool = False,
    progress: bool = True,
    title: str = "class report",
) -> pd.DataFrame:
    """Grade every run of a folder (or pattern, or list) and write the class report.

    Parameters
    ----------
    source : path, pattern or list of paths
        The run files.
    rule : GradingRule
    out_dir : path
        Where ``results.csv``, ``index.html``, ``exponents.png`` and ``runs/`` go.
    workers : int, optional
        Local worker processes (default: all cores); 1 grades in this process.
    scheduler : str, optional
        Address of a dask.distributed scheduler to run on instead.
    resume : bool
        Keep the rows of an earlier batch in ``out_dir`` whose file, rule and reading options are
        unchanged (the row's fingerprint), and skip those runs; every other run is graded again.
    progress : bool
        Show a progress bar.

    Returns
    -------
    DataFrame
        One row per run, sorted by name.
    """
    from tqdm.auto import tqdm

    from ..outputs.report import write_class_report

    folder = Path(out_dir)
    folder.mkdir(parents=True, exist_ok=True)
    table = folder / RESULTS
    rows: dict[str, dict[str, Any]] = {}
    found = sort_runs(source)
    if resume and table.exists():
        earlier = {row["file"]: row for row in read_results(table).to_dict("records")}
        rows = {str(p): earlier[str(p)] for p in found.runs if str(p) in earlier
                and earlier[str(p)].get("fingerprint") == fingerprint(p, rule.settings_for(p))}
    paths = [p for p in found.runs if str(p) not in rows]
    with tqdm(total=len(paths), disable=not progress, unit="run", desc="grading") as bar:
        for row in _graded(paths, rule, folder, workers, scheduler):
            rows[row["file"]] = row
            _write_table(rows.values(), table, rule)          # whole, after every run
            bar.update(1)
            bar.set_postfix_str(f"{row['run']}: {'pass' if row['passed'] else 'fail'}")
    frame = _write_table(rows.values(), table, rule) if rows else pd.DataFrame()
    write_class_report(frame.to_dict("records"), folder, expect=rule.expect, tolerance=rule.tolerance,
                       strength=rule.strength, strength_tolerance=rule.strength_tolerance,
                       strength_unit=rule.unit, csv_name=RESULTS, title=title,
                       skipped=[(path.name, reason) for path, reason in found.skipped],
                       summary=summarise_class(frame.to_dict("records"), rule.unit).rows() if rows else [])
    return frame


@contextmanager
def _single_threaded() -> Iterator[None]:
    """While worker processes start, tell them to use one thread each (BLAS, OpenMP, numba)."""
    saved = {name: os.environ.get(name) for name in THREAD_VARIABLES}
    os.environ.update({name: "1" for name in THREAD_VARIABLES})
    try:
        yield
    finally:
        for name, value in saved.items():
            if value is None:
                os.environ.pop(name, None)
            else:
                os.environ[name] = value


def _completed(futures: list[Any], on_dask: bool) -> Iterable[Any]:
    if on_dask:
        from dask.distributed import as_completed as dask_completed

        return dask_completed(futures)
    return as_completed(futures)
