"""Comparing fixed laws with the free orbit fit."""

import pandas as pd
import pytest

from forcefit.dynamics.simulate import simulate_orbit
from forcefit.inference.comparison import LawComparison, compare_laws


def test_compare_laws_prefers_the_true_law():
    hooke = simulate_orbit(exponent=1.0, noise=0.002, rng=1)
    table = compare_laws(hooke, (1.0, -2.0)).table
    assert table.loc["n = 1", "p_value"] > 0.01 and table.loc["n = -2", "p_value"] < 1e-6
    assert table["bic"].idxmin() == "n = 1"
    kepler = simulate_orbit(exponent=-2.0, noise=0.002, rng=2)
    table = compare_laws(kepler, (1.0, -2.0)).table
    assert table["bic"].idxmin() == "n = -2" and table.loc["n = 1", "p_value"] < 1e-6


def test_the_comparison_as_text_and_json():
    table = compare_laws(simulate_orbit(exponent=1.0, noise=0.002, rng=1), (1.0,))
    records = table.to_dict()
    assert [record["law"] for record in records] == ["free", "n = 1"]
    # AIC = chi2 + 2 p (Akaike 1974, IEEE Trans. Autom. Control 19, 716)
    assert records[1]["aic"] == pytest.approx(records[1]["chi2"] + 2 * records[1]["n_parameters"])
    assert records[0]["p_value"] == 1.0 and min(r["delta_bic"] for r in records) == 0.0
    lines = table.to_text().splitlines()
    assert lines[0].split("  ")[0] == "law" and "p-value" in lines[0]
    assert lines[1].startswith("free") and lines[2].startswith("n = 1")


def test_the_text_never_prints_a_p_value_as_0_or_1_and_shows_n_to_its_error():
    # issue 15: the --compare table printed p-values as 0 and 1 and n to 5 digits
    frame = pd.DataFrame({"law": ["free", "n = 1", "n = -2"], "exponent": [0.990481, 1.0, -2.0],
                          "exponent_stderr": [0.000163, 0.0, 0.0], "chi2": [1800.04, 5322.7, 9.9e6],
                          "reduced_chi2": [1.0, 2.95, 5500.0], "n_parameters": [7, 6, 6],
                          "aic": [1814.0, 5334.7, 9.9e6], "bic": [1850.1, 5365.7, 9.9e6],
                          "p_value": [1.0, 0.0, 0.0], "delta_bic": [0.0, 3515.6, 9.9e6]}).set_index("law")
    lines = LawComparison(table=frame).to_text().splitlines()
    assert "0.99048 ± 0.00016" in lines[1] and lines[1].rstrip().endswith("—")
    assert lines[2].rstrip().endswith("< 1e-300") and "1 (held)" in lines[2]
    assert not any(line.rstrip().endswith((" 0", " 1")) for line in lines)
