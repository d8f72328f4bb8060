"""Analytic BSM sensitivities against central finite differences and QuantLib."""

import numpy as np
import pytest

from grantval.pricing import bsm_sensitivities, bsm_value
from tests.pricing.ql_reference import TODAY


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
        np.testing.assert_allclose(g[key][big], fd[key][big], rtol=1e-6, err_msg=key)


def test_against_quantlib_analytic_greeks():
    # QuantLib AnalyticEuropeanEngine: delta, vega, rho, dividendRho, theta (per year)
    import QuantLib as ql

    from tests.pricing.ql_reference import DAY_COUNT, _process

    s, k, days, r, v, q = 50.0, 55.0, 1825, 0.04, 0.35, 0.015
    option = ql.VanillaOption(ql.PlainVanillaPayoff(ql.Option.Call, k), ql.EuropeanExercise(TODAY + days))
    option.setPricingEngine(ql.AnalyticEuropeanEngine(_process(s, r, q, v)))
    g = bsm_sensitivities(s, k, days / 365, r, v, q)
    assert g["delta"] == pytest.approx(option.delta(), rel=1e-10)
    assert g["vega"] == pytest.approx(option.vega(), rel=1e-10)
    assert g["rho"] == pytest.approx(option.rho(), rel=1e-10)
    assert g["dividend"] == pytest.approx(option.dividendRho(), rel=1e-10)
    assert g["term"] == pytest.approx(-option.theta(), rel=1e-8)
    assert DAY_COUNT.name()
