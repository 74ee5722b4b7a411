"""Mutation study of the physics core: how many small code changes the default tests catch.

Mutants come from mutmut's mutation engine (operators, numbers, names, keywords, arguments,
and/or, assignments; its ``string`` and ``fstring`` mutations are left out: they touch messages
and labels, which tests/test_bad_input.py checks by pattern, not the physics). The population
is every such mutant of the modules in ``TARGETS`` (only the named functions and classes where
a module lists some); a uniform random sample of it (fixed seed) is run. Each mutant is
written into a scratch copy of the repository, and only the tests of its module run against it
(its tests/test_<module>.py files and the module's doctests, ``-x -q -p no:xdist``), in one
process at low priority. A mutant is killed when those tests fail, error or time out.

Mutants judged equivalent (no observable change: see ``EQUIVALENT`` for each reason) leave the
score; the score is killed / (sampled - equivalent) with its exact (Clopper-Pearson) binomial
95% interval. Target: >= 90%.

Run (about a minute per mutant on one busy core: 150 take 2-3 hours; the compiled kernel
recompiles for each of its mutants)::

    nice -n 10 .venv/bin/python benchmarks/mutation.py --sample 150 --log mutation.jsonl

``--log FILE`` appends each mutant's outcome to FILE, and a rerun with the same FILE resumes
where an interrupted study stopped (the last line of a mutant counts); ``--recheck`` runs the
logged survivors again, after tests were added to kill them. ``--list`` prints the population
per module and exits; ``--only FILE:LINE:INDEX`` runs one mutant (to check that a new test
kills it; with ``--recheck`` a logged survivor's new outcome is logged); ``--baseline`` runs
each module's tests unmutated, which must all pass before the score means anything.
"""

from __future__ import annotations

import argparse
import ast
import json
import os
import random
import resource
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from types import SimpleNamespace

from mutmut import Context, RelativeMutationID, list_mutations, mutate
from scipy.stats import binomtest

ROOT = Path(__file__).resolve().parent.parent

# the propagators' drag is tested in test_propagate.py, their other forces here
CIRCLE_REFUSED = "tests/test_curvature.py::test_a_circular_orbit_is_refused_with_the_noise_in_the_radius[{}]"
EXTRA_FORCES = "tests/test_forces.py::test_the_compiled_propagator_adds_each_force_as_the_reference_does"
YUKAWA_ANY = "tests/test_forces.py::test_a_yukawa_term_of_any_strength_is_added_as_the_reference_adds_it"

# the contract every estimator keeps (tests/test_registry.py), for one estimator: one fit
CONTRACT = ("test_the_result_is_the_registered_type", "test_every_number_is_a_finite_float_of_the_right_sign",
            "test_covariance_matches_the_parameter_names", "test_residuals_are_one_per_value_used",
            "test_units_are_the_tracks", "test_truth_within_the_stated_errors",
            "test_the_derived_numbers_agree_with_each_other", "test_the_checks_say_something",
            "test_the_relation_points_follow_the_law", "test_rows_text_and_dict_show_the_same_fit",
            "test_moving_the_track_and_its_given_centre_together_changes_nothing",
            "test_the_same_track_in_other_units_gives_the_same_law",
            "test_without_timestamps_strength_is_nan_with_the_reason")


def _contract(method: str) -> tuple[str, ...]:
    return tuple(f"tests/test_registry.py::{name}[{method}]" for name in CONTRACT)


# module -> (its tests, the functions/classes mutated (None: the whole module), the CPU seconds
# its tests take unmutated on one core; a mutant's tests get 3x that + 60 s of CPU time, so a
# busy machine does not turn slow mutants into timeouts)
TARGETS: dict[str, tuple[tuple[str, ...], tuple[str, ...] | None, float]] = {
    "forcefit/dynamics/laws.py": (("tests/test_laws.py",), None, 4),
    "forcefit/dynamics/propagate.py": ((EXTRA_FORCES, YUKAWA_ANY, "tests/test_propagate.py"), None, 95),
    "forcefit/dynamics/_kernel.py": ((EXTRA_FORCES, YUKAWA_ANY, "tests/test_propagate.py"), None, 115),
    "forcefit/geometry/curves.py": (("tests/test_curves.py",), None, 4),
    "forcefit/geometry/centre.py": (("tests/test_centre.py",), None, 18),
    "forcefit/geometry/levels.py": ((*_contract("acceleration"), "tests/test_smoothing.py",
                                     "tests/test_flyby.py"), None, 40),
    "forcefit/estimators/orbit.py": ((*_contract("orbit"), "tests/test_orbit.py"), None, 110),
    "forcefit/estimators/shape.py": ((*_contract("shape"), "tests/test_shape.py"), None, 50),
    "forcefit/estimators/curvature.py": ((*_contract("curvature"), "tests/test_curvature.py"), None, 20),
    "forcefit/estimators/acceleration.py": ((*_contract("acceleration"), "tests/test_acceleration.py",
                                             CIRCLE_REFUSED.format("acceleration")), None, 18),
    "forcefit/inference/posterior.py": (("tests/test_posterior.py",), None, 120),
    "forcefit/analysis/duality_check.py": (("tests/test_duality_check.py",), None, 30),
    "forcefit/units.py": (("tests/test_units.py",), None, 10),
    "forcefit/apps/grading.py": (("tests/test_grading.py",), ("GradingRule", "_class_strength"), 60),
}

TYPES = {"operator", "keyword", "number", "name", "argument", "or_test", "and_test", "lambdef",
         "expr_stmt", "decorator", "annassign"}

# (module, the mutated line stripped, mutmut's index on that line) -> why no test can see it
EQUIVALENT: dict[tuple[str, str, int], str] = {
    ("forcefit/dynamics/_kernel.py", "e5 += E5[j] * k[j][i]", 1):
        "e5 starts at 0 and is used only squared: -= gives exactly -e5, the same (e5 / scale)**2",
    ("forcefit/dynamics/_kernel.py", '@njit(cache=True, inline="always")', 0):
        "cache=False only stops numba keeping the compiled code on disk: the same machine code runs",
    ("forcefit/dynamics/_kernel.py", "@njit(cache=True)", 0):
        "cache=False only stops numba keeping the compiled code on disk: the same machine code runs",
    # The compiled integrator's step-size heuristics: each only changes which steps are tried;
    # every kept step passes the same error test. Measured (propagate_batch, stepping and dense
    # output, n = -2 at e = 0 and 0.9, n = 1, -1, 0.5, linear drag, 400 samples over 23 time
    # units): positions move by at most the figure given, of the orbit's size, against a stated
    # accuracy of 1e-9 (propagate_batch's docstring).
    ("forcefit/dynamics/_kernel.py",
     "return 0.01 * min(radius / max(speed, 1e-300), np.sqrt(radius / max(accel, 1e-300))), radius", 0):
        "the first step's size 101 times larger: the error test cuts it down; positions move by 3e-11",
    ("forcefit/dynamics/_kernel.py",
     "return 0.01 * min(radius / max(speed, 1e-300), np.sqrt(radius / max(accel, 1e-300))), radius", 3):
        "a floor against zero speed only, 1e-300 -> 2e-300; positions identical (0 difference)",
    ("forcefit/dynamics/_kernel.py",
     "return 0.01 * min(radius / max(speed, 1e-300), np.sqrt(radius / max(accel, 1e-300))), radius", 5):
        "a floor against zero acceleration only, 1e-300 -> 2e-300; positions identical (0 difference)",
    ("forcefit/dynamics/_kernel.py",
     "factor = MAX_FACTOR if error == 0.0 else min(MAX_FACTOR, SAFETY * error ** (-1.0 / 8.0))", 7):
        "the step's growth as error^(-1/9) instead of error^(-1/8); positions move by 1.3e-10",
    ("forcefit/dynamics/_kernel.py", "h_abs = abs(h) * max(MIN_FACTOR, SAFETY * error ** (-1.0 / 8.0))", 6):
        "a rejected step shrinks as error^(-1/9) instead of error^(-1/8); positions move by 1e-11",
    ("forcefit/dynamics/_kernel.py", "h_abs = max(h_abs, abs(h) * min(factor, 1.0))", 1):
        "after a step cut short at a sample, the next may grow up to 2x; positions move by 6e-11",
    ("forcefit/dynamics/_kernel.py", "if steps > limit or h_abs < 1e-15 * max(abs(t), 1.0):", 2):
        "the step-size floor 1e-15 -> 2e-15 of t: reached only by an orbit already failing; identical",
    ("forcefit/dynamics/_kernel.py",
     "if abs(target - t) > abs(h) * (1 + 1e-12):   # a full step, not one cut short", 5):
        "the 1e-12 rounding allowance of a step landing on a sample, 2e-12; positions identical",
    ("forcefit/dynamics/_kernel.py", "if error < 1.0:", 0):
        "a step whose scaled error is exactly 1.0 kept (a float equality); positions identical",
    ("forcefit/dynamics/_kernel.py", "if error >= 1.0:", 0):
        "a step whose scaled error is exactly 1.0 kept (a float equality); positions identical",
    ("forcefit/dynamics/_kernel.py",
     "if y[0] * y[0] + y[1] * y[1] < closest2 or not np.isfinite(y[0] + y[1]):", 9):
        "a blown-up state is caught a step later: once x or y is not finite, the next derivative "
        "is nan in every component, the step's error is nan (never < 1), the step shrinks to the "
        "floor and the leg returns FAILED as before (the orbit is marked failed either way)",
    ("forcefit/dynamics/_kernel.py",
     "if y[0] * y[0] + y[1] * y[1] < closest2 or not np.isfinite(y[0] + y[1]):", 10):
        "a blown-up state is caught a step later: once x or y is not finite, the next derivative "
        "is nan in every component, the step's error is nan (never < 1), the step shrinks to the "
        "floor and the leg returns FAILED as before (the orbit is marked failed either way)",
    ("forcefit/dynamics/_kernel.py",
     "if y[0] * y[0] + y[1] * y[1] < closest2 or not np.isfinite(y[0] + y[1]):", 11):
        "a blown-up state is caught a step later: once x or y is not finite, the next derivative "
        "is nan in every component, the step's error is nan (never < 1), the step shrinks to the "
        "floor and the leg returns FAILED as before (the orbit is marked failed either way)",
    ("forcefit/estimators/curvature.py", "starts = None", 0):
        "'' and None are both false, and find_centre reads starts only by its truth: the same branch",
    ("forcefit/inference/posterior.py", "FIRST_GUESS = 2000", 0):
        "the progress bar's first guess of the chain's length, shown until the first check (250 "
        "steps) replaces it with the estimate from tau; no sample, verdict or result depends on it",
    ("forcefit/inference/posterior.py", "scale = np.sqrt(np.clip(np.diag(covariance), 1e-300, None))", 0):
        "a floor against a zero variance only: a variance below 2e-300 in a fitted parameter does "
        "not occur, and at exactly 0 the correlation's column is 0 under either floor",
    ("forcefit/geometry/curves.py", "MIN_COS_GAMMA = 1e-6", 0):
        "a floor against division by zero where the motion is radial: a point with cos(gamma) below "
        "2e-6 has a relation error ~3 tan(gamma) sigma_gamma > 1e6 sigma_gamma, so its weight in "
        "any fit is ~1e-12 of the others' under either floor",
    ("forcefit/estimators/curvature.py",
     "log_r = np.log(np.hypot(value[:, 0] - cx, value[:, 1] - cy) / reference)", 4):
        "ln(r r_ref) = ln(r / r_ref) + 2 ln r_ref: b (ln(r/r_ref) + c)^2 differs from b ln(r/r_ref)^2 by "
        "a term linear in ln r and a constant, which n and ln f_ref absorb; only b and its error are "
        "used (the power-law check), and a linear reparametrisation leaves both unchanged",
    ("forcefit/dynamics/propagate.py", "before = times < t0", 0):
        "a sample at exactly the epoch goes to the backward leg instead of the forward one; either "
        "leg returns the start state there (solve_ivp's first output at t_eval = t0 is y0)",
    ("forcefit/geometry/curves.py", "return 1.0 if angle[-1] >= angle[0] else -1.0", 3):
        "differs only when the tangent's unwrapped angle ends exactly where it began (net turning "
        "exactly 0): a path with no sense of turning, which the estimators refuse as straight first",
    ("forcefit/inference/posterior.py", "if length > TAU_FACTOR and change < TAU_SETTLED:", 0):
        "differs only when the chain is exactly 50.0 autocorrelation times long: a ratio of "
        "continuous estimates that never lands on the boundary",
    ("forcefit/inference/posterior.py", "if length > TAU_FACTOR and change < TAU_SETTLED:", 1):
        "differs only when tau changed by exactly 5% between checks: a continuous estimate that "
        "never lands on the boundary",
    ("forcefit/dynamics/_kernel.py",
     "factor = MAX_FACTOR if error == 0.0 else min(MAX_FACTOR, SAFETY * error ** (-1.0 / 8.0))", 1):
        "error == 1.0 never holds on an accepted step (error < 1), and at error exactly 0 the other "
        "branch gives min(MAX_FACTOR, SAFETY * inf) = MAX_FACTOR too (numba's pow: 0 ** -0.125 is inf)",
    ("forcefit/dynamics/_kernel.py", "if final and position == order.size - 1 or target == t_new:", 5):
        "at the final step t_new is the last sample's time, so the first clause implies the second; "
        "a sample exactly at a step's end then comes from the next step's dense output at x = 0, "
        "which is y[i] + 0: the same state",
    ("forcefit/dynamics/_kernel.py", "if steps > limit or h_abs < 1e-15 * max(abs(t), 1.0):", 3):
        "the floor on a collapsing step: with / instead of * a step that collapses (a collision) "
        "still ends in FAILED, through the step limit instead of the floor",
    ("forcefit/geometry/curves.py", "signed = np.maximum(sense * kappa[used], 1e-300)", 1):
        "a clip against log(0) that only points bending significantly towards the centre pass: "
        "their curvature is many orders above 1e-300 or 2e-300",
    ("forcefit/estimators/shape.py", "if misfit <= AREAL_TOLERANCE * min(misfits) + 1e-300]", 0):
        "< and <= differ only when a candidate's misfit is exactly AREAL_TOLERANCE times the best "
        "plus 1e-300 (the best itself passes both: AREAL_TOLERANCE > 1, or 0 < 1e-300)",
    ("forcefit/estimators/shape.py", "if solution.chi2 > AMBIGUITY_FACTOR * solutions[0].chi2:", 0):
        "differs only when another centre's chi-square is exactly AMBIGUITY_FACTOR times the best "
        "one: two continuous fit results that never land on that ratio",
    ("forcefit/geometry/curves.py",
     "return interior(curve) & (turning_sense(curve) * kappa > 2.0 * kappa_stderr)", 2):
        "> and >= differ only for a sample whose signed curvature is exactly twice its standard "
        "error: two continuous estimates that never land on that ratio",
    ("forcefit/inference/posterior.py",
     "model: OrbitModel = replace(fit.model, rtol=SAMPLING_RTOL, dense=True, parallel=True)", 1):
        "parallel=False runs the walkers' orbits one after another instead of on numba's threads: "
        "each walker's orbit is integrated alone either way, so the same numbers come out, slower",
    ("forcefit/geometry/centre.py",
     "if np.mean(magnitude > MIN_SIGNAL * accel_sd) < MIN_SIGNIFICANT_FRACTION:", 0):
        "> and >= differ only for a sample whose acceleration is exactly MIN_SIGNAL times its "
        "standard deviation: continuous estimates that never land on that ratio",
    ("forcefit/dynamics/propagate.py", "BATCH_RTOL = 3e-13", 0):
        "the batch propagator's tolerance doubled: on benchmarks/orbit_fit.py's 32 rosettes (5 turns, "
        "n = -1.5) the largest position error against rtol = 1e-14 goes from 7.9e-12 to 8.4e-12 of the "
        "orbit's size (the same at 1e-12 and 1e-11: a floor of the step control), against the 1e-9 "
        "the propagator states",
    ("forcefit/dynamics/propagate.py",
     "t_eval=times, rtol=rtol, atol=rtol * np.maximum(scale, 1e-300), events=collision,", 1):
        "the reference integrator's absolute-tolerance floor for a start at rest or at the centre, "
        "1e-300 -> 2e-300 of rtol: both far below any representable step error",
    ("forcefit/dynamics/_kernel.py", "accel = np.sqrt(derivative[2] ** 2 + derivative[3] ** 2)", 3):
        "the first step's acceleration scale from a_x^2 - a_y^2 (nan or too small when |a_y| is the "
        "larger): the first step is then set by the speed, and the error test cuts it; Kepler "
        "orbits started at 1 rad (|a_y| > |a_x|), e = 0, 0.5, 0.9, 0.95, stepping and dense: "
        "positions identical to every printed digit (errors 1.3e-13 to 2.2e-9 either way)",
    ("forcefit/dynamics/_kernel.py",
     "if abs(target - t) > abs(h) * (1 + 1e-12):   # a full step, not one cut short", 1):
        "> -> >= on a float landing exactly on 1 + 1e-12 step lengths from a sample: never met",
    ("forcefit/dynamics/_kernel.py", "if steps > limit or h_abs < 1e-15 * max(abs(t), 1.0):", 0):
        "> -> >= on the step budget (50 000 + 500 per sample): an orbit that needs the last step of "
        "the budget fails one step sooner; every orbit the tests and fits integrate ends far below it",
    ("forcefit/estimators/shape.py",
     "else np.full(track.n_points, max(noise, 1e-12 * size, 1e-300)))", 0):
        "the floor under the samples' sigma when none is given, 1e-12 -> 2e-12 of the track's size: "
        "it binds only on noise-free tracks, and without a given sigma the covariance and the noise "
        "level are scaled by the reduced chi-square, which cancels the factor",
    ("forcefit/analysis/duality_check.py",
     "step = 1e-3 * math.sqrt(max(fit.covariance[i, i], 0.0)) or 1e-8 * max(abs(point[name]), 1.0)", 3):
        "the difference step used only where a parameter's variance is 0: its row and column of the "
        "(positive semi-definite) covariance are then 0, so its gradient entry adds nothing",
    ("forcefit/units.py", "if abs(power) > 1e-12:", 1):
        "the tolerance for n = 1 (no length unit in k) 1e-12 -> 2e-12: only exponents within "
        "1e-12-2e-12 of 1 differ, where the length factor**power it skips is 1 to within 1e-11",
    ("forcefit/dynamics/_kernel.py",
     "if abs(target - t) > abs(h) * (1 + 1e-12):   # a full step, not one cut short", 0):
        "target - t -> target + t in the test whether a kept step was cut short at a sample: it only "
        "sets how much the next step may grow, and every step still passes the error test (as the "
        "line's other mutants, measured above)",
    ("forcefit/dynamics/_kernel.py", "accel = np.sqrt(derivative[2] ** 2 + derivative[3] ** 2)", 6):
        "the first step's acceleration scale with a_y^3 for a_y^2: it sizes only the first trial "
        "step, which the error test cuts (as this line's index 3, measured above)",
    ("forcefit/estimators/acceleration.py", 'sense_text = "against" if mean < 0 else "along"', 1):
        "< -> <= on the mean torque's sign: this line runs only when |mean| > 3 errors, so mean is "
        "never 0",
    ("forcefit/inference/posterior.py", "min_steps: int = 0,", 0):
        "run_ensemble's least number of steps 0 -> 1: convergence is checked only every CHECK_EVERY "
        "(250) steps, so a floor of one step never binds",
    ("forcefit/inference/posterior.py", "tau = sampler.get_autocorr_time(tol=0)", 0):
        "emcee raises only on chains shorter than tol autocorrelation times; its windowed estimate "
        "(c = 5) stays below a fifth of the chain, so tol = 1 never raises either (measured: tau 0.35, "
        "0.96 and 2.0 steps on chains of 5, 10 and 20 steps)",
    ("forcefit/units.py", "if abs(exponent - 1.0) < 1e-12:", 2):
        "< -> <= at an exponent exactly 1e-12 from 1 (a float equality): never met",
    ("forcefit/inference/posterior.py", "max_steps: int = 20_000,", 0):
        "run_ensemble's default cap 20 000 -> 20 001 steps: reached only by a chain that never "
        "converges, whose reason and length are reported either way",
    ("forcefit/dynamics/laws.py",
     "return float(brentq(mismatch, low, high, xtol=1e-14, rtol=1e-15, maxiter=200))", 0):
        "the root's absolute tolerance 1e-14 -> 2e-14 on an exponent of order 1: the exponent "
        "moves by at most 2e-14, far below any test's or user's resolution",
    ("forcefit/dynamics/_kernel.py", "CLOSEST = 1e-6", 0):
        "the collision threshold 1e-6 -> 2e-6 of the start radius: only an orbit diving to within "
        "1e-6-2e-6 of its start radius of the centre (an eccentricity beyond 0.999998) fails "
        "sooner; such a trial orbit is lost either way",
    ("forcefit/estimators/curvature.py",
     "variance = unit[:, 0] ** 2 * curve.value_var[keep, 0] + unit[:, 1] ** 2 * curve.value_var[keep, 1]", 4):
        "x's variance read from y's column: the smoother gives both coordinates the same pointwise "
        "variance (pspline.py repeats one column), so the columns are equal",
    ("forcefit/estimators/shape.py",
     "variance = float(misfit @ misfit) / max(t.size - 3, 1) * autocorrelation_time(misfit)", 3):
        "a floor of 1 -> 2 on the swept area's degrees of freedom: binds only below 5 samples, and "
        "the shape fit needs MIN_SAMPLES = 12",
    ("forcefit/units.py", "time: str | None = None", 0):
        "an annotation (| -> &): never evaluated, the module imports annotations lazily",
    ("forcefit/dynamics/laws.py", "if mismatch(low) * mismatch(high) > 0:", 0):
        "* -> / in a test of equal signs: a quotient has the product's sign (mismatch(high) at "
        "n = 30 is never 0)",
    ("forcefit/geometry/centre.py", "return found.centre[0], found.stderr[0], found.influence[0]", 1):
        "the standard error the centre's level search records for x (read from y's): settle judges "
        "agreement from the influences, and settled_centre keeps only the result, not the record",
    ("forcefit/dynamics/propagate.py", "np.sqrt(np.abs(k) * radius ** (n + 1.0)))", 2):
        "the velocity's tolerance scale sqrt(k r^(n-1)) for the circular speed sqrt(k r^(n+1)): "
        "the positions' error control binds; measured on orbits of n = -2, -1, 1 in length units "
        "from 1e-6 to 1e6: positions move by at most 1.1e-11 of the orbit's size (stated 1e-9)",
    ("forcefit/geometry/levels.py", "if _worst(levels, i) < SETTLED_Z:", 0):
        "< -> <= at a disagreement of exactly 2.0 standard errors (a continuous statistic): never met",
    ("forcefit/dynamics/propagate.py", "column.flags.writeable = False", 1):
        "numpy takes the flag's truth: writeable = None makes the array read-only as False does",
    ("forcefit/estimators/shape.py",
     "if problem.centre is None and max(centre_se) > 0.05 * float(np.ptp(evaluation.radius)", 1):
        "> -> >= at a centre error of exactly 5% of the largest radius (a float equality): never met",
    ("forcefit/dynamics/_kernel.py", "BASE_STEPS, STEPS_PER_SAMPLE = 50_000, 500", 1):
        "the step budget per sample 500 -> 501: only an orbit needing exactly the last steps of the "
        "budget is affected; every orbit the tests and fits integrate ends far below it",
    ("forcefit/estimators/shape.py", "dof = max(track.n_points - n_params, 1)", 1):
        "a floor of 1 -> 2 on the degrees of freedom: a shape fit needs MIN_SAMPLES = 12 samples "
        "for at most 6 parameters, so n_points - n_params is at least 6 and the floor never binds",
    ("forcefit/dynamics/propagate.py", "table_t, table_xy = np.zeros(0), np.zeros((0, 2))", 0):
        "the perturber's time table when there is no perturber, empty -> one zero: the kernel reads "
        "the table only when the perturber's GM is non-zero, which is set together with a real table",
    ("forcefit/estimators/orbit.py",
     'scale = {"exponent": 1.0, "log_force": 1.0, "drag": 1.0 / duration, "rotation_rate": 1.0 / duration,',
     5):
        "the drag's central-difference step doubled (1e-6 of 2/duration): on test_orbit's linear-drag "
        "track n moves by 4e-10 (2e-6 of its error), the errors of n and of the drag by 2e-10 of "
        "themselves: a difference step's size changes the derivative only in its rounding",
    ("forcefit/estimators/orbit.py", "return np.full(track.n_points, max(noise, 1e-12 * size, 1e-300))", 1):
        "the floor under the samples' sigma when none is given, 1e-12 of the track's size -> 1e-12 / "
        "size: it binds only when the differences show no noise (noise-free or whole-pixel tracks, "
        "measured 1.5e-15 px); sigma is then fitted from the residuals and the covariance scaled by "
        "the reduced chi-square, so a uniform sigma's size cancels (a noise-free orbit of size 1 and "
        "1.5e11: n, its error and the checks identical; of size 1e-6, where the mutant's floor is "
        "the size itself: n the same to 6e-16, its error within 0.3%)",
    ("forcefit/dynamics/propagate.py", "np.sqrt(np.abs(k) * radius ** (n + 1.0)))", 3):
        "the velocity's tolerance scale sqrt(k r^(n+2)) for sqrt(k r^(n+1)) (the circular speed "
        "times sqrt(r)): the positions' error control binds; test_propagate's orbits in length units "
        "1e-6 to 1e6 stay within 1e-9 of their size under it",
    ("forcefit/dynamics/propagate.py",
     "speed = max(float(np.hypot(*state[2:])), float(np.sqrt(abs(strength) * r0 ** (exponent + 1))))", 3):
        "the reference integrator's velocity scale sqrt(k r^(n-1)) for the circular speed: as the "
        "batch propagator's, the positions' error control binds (its orbits agree with the batch "
        "and with Kepler's equation within the stated 1e-9)",
    ("forcefit/estimators/curvature.py", "if not (abs(log_level) < 700 and abs(log_force) < 700):", 1):
        "< -> <= at |ln F| exactly 700 (a continuous fitted value; exp overflows only near 709): "
        "never met",
    ("forcefit/estimators/acceleration.py", "if abs(z) > BEND_Z:", 0):
        "> -> >= at a bend of exactly BEND_Z standard errors (a continuous statistic): never met",
    ("forcefit/units.py", "return (None if abs(1.0 - exponent) < 1e-12 else length), time", 2):
        "< -> <= at |1 - n| exactly 1e-12: never met (n = 1 is given as 1.0)",
    ("forcefit/estimators/shape.py", "@dataclass(frozen=True)", 0):
        "a private record of one start's solution, frozen only as a guard: no code assigns to it",
    ("forcefit/estimators/orbit.py", "max_evaluations: int = 200,", 0):
        "the default budget one larger: a fit that needs it fails its convergence check at 200 or "
        "201 alike (only the count it reports differs by one); every test of the budget passes its own",
    ("forcefit/dynamics/propagate.py", "table_t, table_xy = np.zeros(0), np.zeros((0, 2))", 1):
        "the perturber's position table when there is none: the kernel reads it only for an orbit "
        "with a perturber (PERTURBER_MU != 0), and one row of zeros has the same compiled type",
    ("forcefit/dynamics/_kernel.py", "if steps > limit or h_abs < 1e-15 * max(abs(t), 1.0):", 4):
        "the step-size floor's time scale 1 -> 2 (|t| < 2): as 1e-15 -> 2e-15, reached only by an "
        "orbit already failing",
    ("forcefit/inference/posterior.py", "scale = math.log(max(math.sqrt(fit.reduced_chi2), 1e-6))", 0):
        "a floor against log(0) for the noise scale's start: binds only where the residuals are a "
        "millionth of the stated sigma (reduced chi-square below 1e-12), which no fit reaches",
    ("forcefit/apps/grading.py", "given_options: Mapping[str, Any] = field(default_factory=dict)", 0):
        "no options given as None instead of {}: merged_options reads `given or {}`, and the rule's "
        "saved form leaves given_options out",
    ("forcefit/estimators/shape.py", "dof = max(track.n_points - solution.problem.n_parameters, 1)", 1):
        "the degrees-of-freedom floor 1 -> 2: the shape fit takes at least 12 samples for at most 6 "
        "numbers, so dof >= 6 and the floor never binds",
    ("forcefit/units.py",
     "if time is None or abs(time_power + 2.0) > 1e-9 or abs(length_power - (1.0 - exponent)) > 1e-9:", 4):
        "the tolerance on a unit's time power 1e-9 -> 2e-9: the powers are sums of the written "
        "exponents (integers and simple fractions), off by 0 or by at least 1/2, never near 1e-9",
    ("forcefit/estimators/curvature.py",
     "return float(level.law.parameters[0]), float(level.law.stderr[0]), level.law.influence[0]", 1):
        "the exponent's error the level search records per level (LevelStep.stderr): settle judges "
        "agreement from the influences, and nothing reads the recorded error (as the centre's)",
    ("forcefit/inference/posterior.py", "return digest.hexdigest()[:32]", 0):
        "the chain's fingerprint 33 hex digits instead of 32: written into a saved chain and compared "
        "on resuming by the same function, so a chain matches its problem either way",
    ("forcefit/inference/posterior.py", "Prior = tuple[str, float, float]", 0):
        "a type alias read only by annotations (postponed: never evaluated at run time)",
    ("forcefit/dynamics/_kernel.py", "SAFETY, MIN_FACTOR, MAX_FACTOR = 0.9, 0.2, 10.0", 2):
        "the step's largest growth 10x -> 11x: stepping onto samples the positions are identical "
        "(the growth never reaches the cap); with dense output the largest error against Kepler's "
        "equation over 5 turns at e = 0.5, 0.9, 0.95 is 4.5e-11, 1.2e-10, 6.0e-11 of 2a (was 4.5e-11, "
        "1.1e-10, 1.9e-10; stated 1e-9)",
    ("forcefit/geometry/centre.py", "_, _, axes = np.linalg.svd(points - centroid, full_matrices=False)", 1):
        "full_matrices changes only U (N x N instead of N x 2); the axes (V^T, 2 x 2) are the same",
    ("forcefit/estimators/acceleration.py", "sigma[inward] / -radial[inward])", 1):
        "the start line's errors with their sign flipped: fit_line weighs by 1/sigma^2 and squares "
        "the residuals, so the start is the same to the bit",
    ("forcefit/dynamics/propagate.py", "column.flags.writeable = False", 0):
        "the per-orbit columns left writable: numba then types some batches' arrays differently and "
        "loads a second compiled signature (about 0.3 s once per process), with the same results",
    ("forcefit/estimators/orbit.py", "if lag_one > 0.5:", 0):
        "> -> >= at a lag-one autocorrelation of exactly 0.5 (a continuous statistic): never met",
}

# the same, for a line whose text recurs in its module: (module, enclosing function, line, index)
EQUIVALENT_IN: dict[tuple[str, str, str, int], str] = {
    ("forcefit/dynamics/propagate.py", "_leg", "centre: tuple[float, float] = (0.0, 0.0),", 0):
        "_leg's default centre: its only callers (both legs of propagate_reference) always pass it",
    ("forcefit/dynamics/propagate.py", "_leg", "centre: tuple[float, float] = (0.0, 0.0),", 1):
        "_leg's default centre: its only callers (both legs of propagate_reference) always pass it",
    ("forcefit/dynamics/_kernel.py", "_leg_dense",
     "h_abs = abs(h) * max(MIN_FACTOR, SAFETY * error ** (-1.0 / 8.0))", 3):
        "the dense leg's rejected step retried at 0.9 error^(+1/8) of itself (at least MIN_FACTOR) "
        "instead of 0.9 error^(-1/8): it shrinks by 10% or less a try, so more tries, the same kept "
        "steps' error test; the largest position error against Kepler's equation over 5 turns at "
        "e = 0.5, 0.9, 0.95: 2.2e-10, 1.0e-9, 2.0e-9 of a before, 2.4e-10, 0.9e-9, 1.7e-9 after (the "
        "stepping leg's same mutant fails at e = 0.9 and is killed)",
    ("forcefit/inference/posterior.py", "_Problem", "@dataclass(frozen=True)", 0):
        "the log-probability's private problem made mutable: it is built once per run and nothing "
        "assigns to it, so every number is the same (the public Posterior and IntervalRow stay "
        "frozen and are tested so)",
    ("forcefit/dynamics/_kernel.py", "_leg_dense",
     "factor = MAX_FACTOR if error == 0.0 else min(MAX_FACTOR, SAFETY * error ** (-1.0 / 8.0))", 5):
        "the dense leg's step grows as error^(-1/4) instead of error^(-1/8): bolder steps, more of "
        "them rejected, the same error test on those kept; the largest position error against "
        "Kepler's equation over 5 turns at e = 0.5, 0.9, 0.95: 4.5e-11, 1.1e-10, 1.9e-10 of 2a "
        "before, 6.1e-11, 2.5e-11, 1.4e-10 after (stated 1e-9)",
}


@dataclass(frozen=True)
class Mutant:
    module: str
    line_number: int     # 1-based
    index: int
    line: str

    @property
    def key(self) -> str:
        return f"{self.module}:{self.line_number}:{self.index}"


def _enclosing(module: str, line_number: int) -> str:
    """The name of the innermost function or class around a line of ``module`` ("" at top level)."""
    name, span = "", None
    for node in ast.walk(ast.parse((ROOT / module).read_text())):
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
            first = min([node.lineno] + [d.lineno for d in node.decorator_list])
            last = node.end_lineno or node.lineno
            if first <= line_number <= last and (span is None or last - first < span):
                name, span = node.name, last - first
    return name


def _equivalence(mutant: Mutant) -> str | None:
    line = mutant.line.strip()
    return (EQUIVALENT.get((mutant.module, line, mutant.index))
            or EQUIVALENT_IN.get((mutant.module, _enclosing(mutant.module, mutant.line_number), line,
                                  mutant.index)))


def _config() -> SimpleNamespace:
    return SimpleNamespace(mutation_types_to_apply=TYPES, covered_lines_by_filename=None)


def _spans(source: str, names: tuple[str, ...] | None) -> list[tuple[int, int]] | None:
    if names is None:
        return None
    tree = ast.parse(source)
    return [(node.lineno, node.end_lineno or node.lineno) for node in tree.body
            if isinstance(node, (ast.FunctionDef, ast.ClassDef)) and node.name in names]


def population() -> list[Mutant]:
    mutants = []
    for module, (_, names, _) in TARGETS.items():
        source = (ROOT / module).read_text()
        spans = _spans(source, names)
        ids = list_mutations(Context(source=source, filename=module, config=_config()))
        for mid in ids:
            line_number = mid.line_number + 1
            if spans is not None and not any(a <= line_number <= b for a, b in spans):
                continue
            mutants.append(Mutant(module, line_number, mid.index, mid.line))
    return mutants


def mutated_source(mutant: Mutant, root: Path = ROOT) -> str:
    source = (root / mutant.module).read_text()
    mid = RelativeMutationID(line=mutant.line, index=mutant.index,
                             line_number=mutant.line_number - 1, filename=mutant.module)
    context = Context(source=source, filename=mutant.module, mutation_id=mid, config=_config())
    new, count = mutate(context)
    if count != 1:
        raise RuntimeError(f"{mutant.key}: mutmut applied {count} mutations, expected 1")
    return new


def _changed_line(mutant: Mutant, new: str) -> str:
    return new.split("\n")[mutant.line_number - 1].strip()


def _command(module: str) -> list[str]:
    tests = TARGETS[module][0]
    return [sys.executable, "-m", "pytest", "-x", "-q", "-p", "no:xdist", "-p", "no:cacheprovider",
            *tests, module]


def _cpu_limit(seconds: float) -> Callable[[], None]:
    def limit() -> None:
        resource.setrlimit(resource.RLIMIT_CPU, (int(seconds), int(seconds) + 5))
    return limit


def _run(scratch: Path, module: str, cpu_seconds: float) -> tuple[str, float]:
    env = dict(os.environ, PYTHONPATH=str(scratch), OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1",
               NUMBA_NUM_THREADS="1", PYTHONDONTWRITEBYTECODE="1", PYTHONHASHSEED="0")
    if "njit" in (scratch / module).read_text():
        # a fresh numba cache: the compiled kernel of another mutant must never be reused
        env["NUMBA_CACHE_DIR"] = tempfile.mkdtemp(prefix="numba-", dir=scratch.parent)
    start = time.perf_counter()
    try:
        done = subprocess.run(_command(module), cwd=scratch, env=env, timeout=20 * cpu_seconds,
                              stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                              preexec_fn=_cpu_limit(cpu_seconds))
        outcome = "survived" if done.returncode == 0 else "killed"
        if done.returncode == -signal.SIGXCPU:
            outcome = "killed (timeout)"
        elif done.returncode not in (0, 1):
            outcome = f"killed (pytest exit {done.returncode})"
    except subprocess.TimeoutExpired:
        outcome = "killed (timeout)"
    finally:
        if "NUMBA_CACHE_DIR" in env:
            shutil.rmtree(env["NUMBA_CACHE_DIR"], ignore_errors=True)
    return outcome, time.perf_counter() - start


def _scratch_copy() -> Path:
    scratch = Path(tempfile.mkdtemp(prefix="forcefit-mutation-")) / "repo"
    listing = ["git", "ls-files", "--cached", "--others", "--exclude-standard"]
    files = subprocess.run(listing, cwd=ROOT, check=True, stdout=subprocess.PIPE, text=True).stdout.split()
    for name in files:
        target = scratch / name
        target.parent.mkdir(parents=True, exist_ok=True)
        shutil.copy2(ROOT / name, target)
    return scratch


def _interval(killed: int, total: int) -> tuple[float, float]:
    ci = binomtest(killed, total).proportion_ci(confidence_level=0.95, method="exact")
    return ci.low, ci.high


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--sample", type=int, default=150, help="mutants run (0: all)")
    parser.add_argument("--seed", type=int, default=20)
    parser.add_argument("--log", type=Path, help="append outcomes here; resume from it")
    parser.add_argument("--list", action="store_true", help="print the population and exit")
    parser.add_argument("--only", help="run the one mutant FILE:LINE:INDEX")
    parser.add_argument("--recheck", action="store_true",
                        help="run the logged survivors again (after new tests) and log the outcome")
    parser.add_argument("--baseline", action="store_true",
                        help="run each module's tests unmutated (they must pass) and exit")
    args = parser.parse_args(argv)

    everyone = population()
    if args.list:
        for module in TARGETS:
            print(f"{sum(m.module == module for m in everyone):5d}  {module}")
        print(f"{len(everyone):5d}  in all")
        return 0
    if args.only:
        chosen = [m for m in everyone if m.key == args.only]
        if not chosen:
            parser.error(f"no mutant {args.only}; see --list")
    elif args.sample and args.sample < len(everyone):
        shuffled = list(everyone)
        random.Random(args.seed).shuffle(shuffled)      # a larger sample extends a smaller one
        chosen = shuffled[:args.sample]
    else:
        chosen = everyone
    print(f"population {len(everyone)} mutants in {len(TARGETS)} modules; running {len(chosen)}"
          f" (seed {args.seed})", flush=True)

    done: dict[str, dict[str, object]] = {}
    if args.log and args.log.exists():
        for line in args.log.read_text().splitlines():
            record = json.loads(line)
            done[record["key"]] = record

    scratch = _scratch_copy()
    if args.baseline:
        for module in TARGETS:
            outcome, seconds = _run(scratch, module, 3 * TARGETS[module][2] + 60)
            print(f"unmutated {module}: {outcome} ({seconds:.0f} s)", flush=True)
        shutil.rmtree(scratch.parent, ignore_errors=True)
        return 0
    try:
        for i, mutant in enumerate(chosen, 1):
            recheck = (args.recheck and mutant.key in done and done[mutant.key]["outcome"] == "survived"
                       and _equivalence(mutant) is None)
            if mutant.key in done and not args.only and not recheck:
                record = done[mutant.key]
            else:
                path = scratch / mutant.module
                original = path.read_text()
                stat = path.stat()
                new = mutated_source(mutant, scratch)          # the snapshot the study began with
                path.write_text(new)
                try:
                    outcome, seconds = _run(scratch, mutant.module,
                                            3 * TARGETS[mutant.module][2] + 60)
                finally:
                    path.write_text(original)
                    os.utime(path, ns=(stat.st_atime_ns, stat.st_mtime_ns))
                record = {"key": mutant.key, "outcome": outcome, "seconds": round(seconds, 1),
                          "was": mutant.line.strip(), "now": _changed_line(mutant, new),
                          "rechecked": bool(recheck)}
                if args.log and (not args.only or recheck):
                    with args.log.open("a") as log:
                        log.write(json.dumps(record) + "\n")
            print(f"[{i}/{len(chosen)}] {record['outcome']:<10s} {record['key']}"
                  f"  {record['was']}  ->  {record['now']}", flush=True)
            done[mutant.key] = record
    finally:
        shutil.rmtree(scratch.parent, ignore_errors=True)

    records = [done[m.key] for m in chosen]
    equivalent = [(m, _equivalence(m)) for m, r in zip(chosen, records)
                  if r["outcome"] == "survived" and _equivalence(m) is not None]
    survived = [r for m, r in zip(chosen, records)
                if r["outcome"] == "survived" and _equivalence(m) is None]
    killed = sum(r["outcome"] != "survived" for r in records)
    later = [r for r in records if r.get("rechecked") and r["outcome"] != "survived"]
    scored = len(records) - len(equivalent)
    low, high = _interval(killed, scored) if scored else (float("nan"), float("nan"))
    print(f"\nkilled {killed}, survived {len(survived)}, equivalent {len(equivalent)}"
          f" of {len(records)} run ({len(everyone)} in the population)")
    if scored:
        print(f"score {killed / scored:.1%} (95% interval {low:.1%} to {high:.1%}); target >= 90%")
    if later:
        print(f"({len(later)} of the killed survived the first run and fell to tests added since:)")
        for record in later:
            print(f"  killed later {record['key']}  {record['was']}  ->  {record['now']}")
    for mutant, why in equivalent:
        print(f"  equivalent {mutant.key}: {why}")
    for record in survived:
        print(f"  survived   {record['key']}  {record['was']}  ->  {record['now']}")
    return 0 if scored and killed / scored >= 0.9 else 1


if __name__ == "__main__":
    sys.exit(main())
