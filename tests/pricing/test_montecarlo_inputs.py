"""Market-condition Monte Carlo: payout curves and input checks (every bad input names itself)."""

import numpy as np
import pytest

from grantval.errors import InputError
from grantval.pricing.montecarlo import (
    MAX_PATHS,
    PayoutCurve,
    correlation_factor,
    derived_service_period,
    market_award_value,
    parse_payout_curve,
    simulate_market,
)


def test_parse_and_evaluate_curve():
    curve = parse_payout_curve("25:0.5; 50:1 ;75:200%")
    assert curve.x == (25.0, 50.0, 75.0) and curve.payout == (0.5, 1.0, 2.0)
    got = curve(np.array([0, 24.999, 25, 37.5, 50, 62.5, 75, 100]))
    np.testing.assert_allclose(got, [0, 0, 0.5, 0.75, 1.0, 1.5, 2.0, 2.0])
    capped = parse_payout_curve("25:0.5;50:1;75:2", negative_tsr_cap=1.0)
    np.testing.assert_allclose(capped([80, 80, 30], company_tsr=[-0.1, 0.1, -0.1]), [1.0, 2.0, 0.6])


@pytest.mark.parametrize(
    "text, words",
    [
        ("50:1;25:0.5", "strictly increasing"),
        ("25:1;25:2", "strictly increasing"),
        ("25:1;50:0.5", "non-decreasing"),
        ("25:-0.5", "zero or more"),
        ("25-0.5", "x:payout"),
        ("a:1", "two numbers"),
        ("", "text like"),
    ],
)
def test_bad_curves(text, words):
    with pytest.raises(InputError, match=words):
        parse_payout_curve(text)


def test_bad_cap():
    with pytest.raises(InputError, match="negative_tsr_cap"):
        PayoutCurve((1.0,), (1.0,), negative_tsr_cap=-1)


def test_correlation_checks():
    with pytest.raises(InputError, match=r"\[-1, 1\]"):
        correlation_factor([[1, 1.2], [1.2, 1]], 2)
    with pytest.raises(InputError, match="positive semi-definite"):
        correlation_factor([[1, 0.9, -0.9], [0.9, 1, 0.9], [-0.9, 0.9, 1]], 3)
    with pytest.raises(InputError, match="symmetric"):
        correlation_factor([[1, 0.2], [0.3, 1]], 2)
    with pytest.raises(InputError, match="diagonal"):
        correlation_factor([[0.9, 0.2], [0.2, 1]], 2)
    with pytest.raises(InputError, match="2 x 2"):
        correlation_factor(np.eye(3), 2)
    # singular but positive semi-definite (two identical peers) is accepted and exact
    c = np.array([[1, 0.5, 0.5], [0.5, 1, 1.0], [0.5, 1.0, 1]])
    low = correlation_factor(c, 3)
    np.testing.assert_allclose(low @ low.T, c, atol=1e-12)
    np.testing.assert_allclose(correlation_factor(0.3, 3) @ correlation_factor(0.3, 3).T, [[1, .3, .3], [.3, 1, .3], [.3, .3, 1]])


def test_identical_peers_have_identical_returns():
    sim = simulate_market([10.0, 10.0, 10.0], [0.3, 0.2, 0.2], 0.0, 0.02, 1.0,
                          [[1, 0.5, 0.5], [0.5, 1, 1.0], [0.5, 1.0, 1]], paths=1000)
    np.testing.assert_allclose(sim.tsr[:, 1], sim.tsr[:, 2], rtol=1e-6)


BASE = dict(share_price=[10.0, 11.0], volatility=[0.3, 0.2], dividend_yield=0.0, rate=0.03, term=1.0)


@pytest.mark.parametrize(
    "change, words",
    [
        ({"paths": MAX_PATHS + 2}, "paths"),
        ({"paths": 1}, "paths"),
        ({"paths": 10.5}, "paths"),
        ({"seed": -1}, "seed"),
        ({"term": 0.001}, "trading day"),
        ({"term": -1}, "term"),
        ({"averaging_days": 300}, "averaging_days"),
        ({"averaging_days": 0}, "averaging_days"),
        ({"volatility": [0.3, -0.1]}, "volatility"),
        ({"volatility": [0.3, 0.2, 0.1]}, "one value per asset"),
        ({"share_price": [10.0, 0.0]}, "share_price"),
        ({"rate": [0.01, 0.02]}, "rate"),
        ({"hurdles": [12.0]}, "daily"),
        ({"start_level": [0.0, 1.0]}, "start_level"),
        ({"correlation": 1.5}, "correlation"),
    ],
)
def test_bad_simulation_inputs(change, words):
    args = dict(BASE, paths=100)
    args.update(change)
    with pytest.raises(InputError, match=words):
        simulate_market(**args)


def test_max_paths_is_accepted_as_a_bound():
    assert MAX_PATHS >= 10_000_000
    sim = simulate_market(**BASE, paths=101)
    assert sim.paths == 102  # rounded up to whole antithetic pairs


@pytest.fixture(scope="module")
def small():
    return simulate_market(**BASE, paths=200)


@pytest.mark.parametrize(
    "kwargs, words",
    [
        ({"metric": "tsr"}, "metric"),
        ({"metric": "index_tsr"}, "index"),
        ({"metric": "index_tsr", "index": 0}, "index"),
        ({"metric": "relative_tsr", "peers": [0]}, "peers"),
        ({"metric": "relative_tsr", "peers": [1, 1]}, "peers"),
        ({"metric": "absolute_tsr", "monitoring": "any_day"}, "share_price metric only"),
        ({"metric": "share_price", "monitoring": "any_day"}, "daily=True"),
        ({"metric": "share_price", "monitoring": "sometimes"}, "monitoring"),
        ({"metric": "absolute_tsr", "kind": "option"}, "strike"),
        ({"metric": "absolute_tsr", "kind": "option", "strike": 10, "expected_term": 0.5}, "expected_term"),
        ({"metric": "absolute_tsr", "kind": "warrant"}, "kind"),
        ({"metric": "absolute_tsr", "strike": 10}, "kind=.option. only"),
        ({"metric": "absolute_tsr", "kind": "option", "strike": 10, "dividend_equivalents": True}, "kind=.unit. only"),
        ({"metric": "absolute_tsr", "curve": 3}, "curve"),
    ],
)
def test_bad_award_inputs(small, kwargs, words):
    args = {"curve": "0:1"}
    args.update(kwargs)
    with pytest.raises(InputError, match=words):
        market_award_value(small, **args)


def test_unrecorded_hurdle_is_refused():
    sim = simulate_market(**BASE, paths=100, daily=True, hurdles=[12.0])
    assert derived_service_period(sim, 12.0).probability > 0
    with pytest.raises(InputError, match="not recorded"):
        derived_service_period(sim, 13.0)


def test_unknown_batch_option_and_text_paths_are_refused(small):
    with pytest.raises(InputError, match="unknown option"):
        from grantval.pricing.montecarlo import market_award_values

        market_award_values(small, ["0:1"], "absolute_tsr", strik=10)
    with pytest.raises(InputError, match="paths"):
        simulate_market(**BASE, paths="many")


from hypothesis import given, settings, strategies as st  # noqa: E402


@settings(max_examples=60, deadline=None)
@given(
    st.lists(st.floats(-50, 150), min_size=1, max_size=6, unique=True),
    st.lists(st.floats(0, 3), min_size=6, max_size=6),
    st.lists(st.floats(-100, 200), min_size=2, max_size=20),
)
def test_payout_is_non_decreasing_and_within_the_points(xs, ys, metric):
    # Property (common practice): a valid curve's payout is non-decreasing in the metric,
    # 0 below the first point and between the first and last payouts from there on.
    xs = sorted(xs)
    ys = sorted(ys[: len(xs)])
    curve = PayoutCurve(tuple(xs), tuple(ys))
    m = np.sort(np.array(metric))
    out = curve(m)
    assert np.all(np.diff(out) >= -1e-12)
    assert np.all(out[m < xs[0]] == 0)
    assert np.all((out[m >= xs[0]] >= ys[0] - 1e-12) & (out[m >= xs[0]] <= ys[-1] + 1e-12))
