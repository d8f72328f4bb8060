"""Analytic BSM sensitivities against central finite differences and QuantLib."""

import itertools

import numpy as np
import pytest

from grantval.pricing import bsm_sensitivities, bsm_value
from tests.pricing.ql_reference import DAY_COUNT, TODAY, european_call_greeks


def test_against_central_finite_differences():
    # central difference of the pricing function; 1e-6 relative (the what-if issue's target)
    rng = np.random.default_rng(4)
    n = 200
    s = rng.uniform(5, 200, n)
    k = s * rng.uniform(0.5, 1.8, n)
    t = rng.uniform(0.5, 10, n)
    r = rng.uniform(0.0, 0.06, n)
    v = rng.uniform(0.15, 0.9, n)
    q = rng.uniform(0, 0.05, n)
    g = bsm_sensitivities(s, k, t, r, v, q)
    h = 1e-5
    fd = {
        "delta": (bsm_value(s * (1 + h), k, t, r, v, q) - bsm_value(s * (1 - h), k, t, r, v, q)) / (2 * h * s),
        "vega": (bsm_value(s, k, t, r, v + h, q) - bsm_value(s, k, t, r, v - h, q)) / (2 * h),
        "term": (bsm_value(s, k, t + h, r, v, q) - bsm_value(s, k, t - h, r, v, q)) / (2 * h),
        "rho": (bsm_value(s, k, t, r + h, v, q) - bsm_value(s, k, t, r - h, v, q)) / (2 * h),
        "dividend": (bsm_value(s, k, t, r, v, q + h) - bsm_value(s, k, t, r, v, q - h)) / (2 * h),
    }
    for key in fd:
        big = np.abs(g[key]) > 1e-3 * s  # relative comparison where the sensitivity is material
        assert big.sum() >= 0.9 * n, key  # the comparison covers most of the sample (194 to 200 of 200)
        np.testing.assert_allclose(g[key][big], fd[key][big], rtol=1e-6, err_msg=key)


# Haug, Option Pricing Formulas (McGraw-Hill, 1998), pp. 11-16, generalized BSM Greeks
# examples, as tabulated (with their inputs) in QuantLib's test-suite europeanoption.cpp,
# testGreekValues; the same examples are in Haug's Complete Guide to Option Pricing
# Formulas, 2nd ed., section 2.2 (from memory).  Published to 4 decimals.  grantval
# values calls only, so the put figures are checked through put-call parity,
# C - P = S e^{-qT} - K e^{-rT}, differentiated (closed form).
HAUG_TOL = 0.5e-4  # half a unit in the published fourth decimal


def _put(s, k, t, r, v, q):
    c = bsm_sensitivities(s, k, t, r, v, q)
    fs, pk = s * np.exp(-q * t), k * np.exp(-r * t)
    return {"delta": c["delta"] - np.exp(-q * t), "vega": c["vega"], "term": c["term"] + q * fs - r * pk,
            "rho": c["rho"] - t * pk, "dividend": c["dividend"] + t * fs}


def test_haug_delta_example():
    # S=105, X=100, T=0.5, r=0.10, b=0 (q=0.10), sigma=0.36: call delta 0.5946, put delta -0.3566
    assert bsm_sensitivities(105.0, 100.0, 0.5, 0.10, 0.36, 0.10)["delta"] == pytest.approx(0.5946, abs=HAUG_TOL)
    assert _put(105.0, 100.0, 0.5, 0.10, 0.36, 0.10)["delta"] == pytest.approx(-0.3566, abs=HAUG_TOL)


def test_haug_vega_example():
    # S=55, X=60, T=0.75, r=0.10, q=0, sigma=0.30: vega 18.9358 (per 1.00 of volatility)
    assert bsm_sensitivities(55.0, 60.0, 0.75, 0.10, 0.30, 0.0)["vega"] == pytest.approx(18.9358, abs=HAUG_TOL)


def test_haug_theta_example():
    # put, S=430, X=405, T=1/12, r=0.07, q=0.05, sigma=0.20: theta -31.1924 a year, -0.0855 a day (365)
    term = _put(430.0, 405.0, 1 / 12, 0.07, 0.20, 0.05)["term"]
    assert -term == pytest.approx(-31.1924, abs=HAUG_TOL)
    assert -term / 365 == pytest.approx(-0.0855, abs=HAUG_TOL)


def test_haug_rho_example():
    # call, S=72, X=75, T=1, r=0.09, q=0, sigma=0.19: rho 38.7325
    assert bsm_sensitivities(72.0, 75.0, 1.0, 0.09, 0.19, 0.0)["rho"] == pytest.approx(38.7325, abs=HAUG_TOL)


def test_haug_dividend_rho_example():
    # put, S=500, X=490, T=0.25, r=0.08, q=0.05, sigma=0.15: dV/dq 42.2254
    assert _put(500.0, 490.0, 0.25, 0.08, 0.15, 0.05)["dividend"] == pytest.approx(42.2254, abs=HAUG_TOL)


def test_quantlib_day_count_matches_grantval_year_fractions():
    # the QuantLib references use whole days on Actual/365 (Fixed): T = days / 365 exactly
    for days in (1, 365, 366, 1825, 3650):
        assert DAY_COUNT.yearFraction(TODAY, TODAY + days) == days / 365


def test_against_quantlib_analytic_greeks_on_a_grid():
    # QuantLib AnalyticEuropeanEngine (tests/pricing/ql_reference.py european_call_greeks)
    # on a 405-point grid; QuantLib's vega is per 1.00 of volatility like grantval's, its
    # theta is per year on Actual/365 (Fixed), so grantval's term = -theta
    grid = np.array(list(itertools.product(
        [25.0, 49.5, 50.0, 50.5, 90.0], [365, 1825, 3650], [0.0, 0.01, 0.05], [0.0, 0.02, 0.05], [0.11, 0.5, 1.2])))
    k, days, r, q, v = grid.T
    ref = [european_call_greeks(50.0, *row[:2], row[2], row[4], row[3]) for row in grid]
    g = bsm_sensitivities(50.0, k, days / 365, r, v, q)
    pairs = {"delta": "delta", "vega": "vega", "rho": "rho", "dividend": "dividendRho"}
    for ours, theirs in pairs.items():
        np.testing.assert_allclose(g[ours], [x[theirs] for x in ref], rtol=1e-10, atol=1e-11, err_msg=ours)
    np.testing.assert_allclose(g["term"], [-x["theta"] for x in ref], rtol=1e-10, atol=1e-11, err_msg="term")
