"""Comparing fixed laws with the free orbit fit."""

import pytest

from forcefit.dynamics.simulate import simulate_orbit
from forcefit.inference.comparison import compare_laws


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
    assert lines[0].split() == ["exponent", "chi2", "reduced_chi2", "aic", "bic", "delta_bic", "p_value"]
    assert lines[2].startswith("free") and lines[3].startswith("n = 1")
