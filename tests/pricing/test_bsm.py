"""Black-Scholes-Merton: published values, QuantLib, degenerate cases, input checks."""

import numpy as np
import pytest

from grantval.errors import InputError
from grantval.pricing import bsm_value

from tests.pricing.ql_reference import european


@pytest.mark.parametrize(
    "args, kind, expected, source",
    [
        # Hull, Options, Futures and Other Derivatives, BSM chapter worked example
        # (S=42, K=40, r=10%, sigma=20%, T=0.5): printed 4.76 and 0.81; 4.7594 and 0.8086 to 4 dp.
        ((42, 40, 0.5, 0.10, 0.20, 0.0), "call", 4.7594, "Hull OFOD"),
        ((42, 40, 0.5, 0.10, 0.20, 0.0), "put", 0.8086, "Hull OFOD"),
        # Haug, The Complete Guide to Option Pricing Formulas, as used in QuantLib's
        # test-suite/europeanoption.cpp (testValues).
        ((60, 65, 0.25, 0.08, 0.30, 0.0), "call", 2.1334, "Haug"),
        ((100, 95, 0.5, 0.10, 0.20, 0.05), "put", 2.4648, "Haug"),
        ((42, 40, 0.75, 0.04, 0.35, 0.08), "call", 5.0975, "Haug"),
        # Benninga, Financial Modeling, 3rd ed., section 17.8.4 spreadsheet, "Black-Scholes call"
        ((50, 50, 10, 0.05, 0.35, 0.025), "call", 19.1842, "Benninga"),
    ],
)
def test_published_values(args, kind, expected, source):
    assert bsm_value(*args, kind=kind) == pytest.approx(expected, abs=1e-4), source


def test_matches_quantlib_analytic_engine_on_random_grid():
    # Reference: QuantLib AnalyticEuropeanEngine, 1e-10 relative.
    rng = np.random.default_rng(20261201)
    n = 300
    s = rng.uniform(5, 200, n)
    k = s * rng.uniform(0.5, 1.8, n)
    days = rng.integers(30, 3650, n)
    r = rng.uniform(-0.01, 0.08, n)
    vol = rng.uniform(0.05, 1.0, n)
    q = rng.uniform(0, 0.08, n)
    for kind in ("call", "put"):
        ours = bsm_value(s, k, days / 365.0, r, vol, q, kind=kind)
        ref = np.array([european(*row, kind=kind) for row in zip(s, k, days, r, vol, q)])
        np.testing.assert_allclose(ours, ref, rtol=1e-10, atol=1e-12)


def test_term_zero_is_intrinsic_value():
    # definition of the payoff at expiry
    assert bsm_value(50, 40, 0.0, 0.05, 0.3) == 10.0
    assert bsm_value(30, 40, 0.0, 0.05, 0.3, kind="put") == 10.0
    assert bsm_value(30, 40, 0.0, 0.05, 0.3) == 0.0


def test_zero_volatility_is_discounted_forward_intrinsic():
    s, k, t, r, q = 50.0, 45.0, 2.0, 0.05, 0.01
    expected = s * np.exp(-q * t) - k * np.exp(-r * t)
    assert bsm_value(s, k, t, r, 0.0, q) == pytest.approx(expected, rel=1e-15)
    assert bsm_value(s, k, t, r, 0.0, q, kind="put") == 0.0


def test_zero_share_price():
    assert bsm_value(0.0, 40, 1.0, 0.05, 0.3) == 0.0
    assert bsm_value(0.0, 40, 1.0, 0.05, 0.3, kind="put") == pytest.approx(40 * np.exp(-0.05))


def test_scalar_in_float_out_and_broadcasting():
    assert isinstance(bsm_value(50, 50, 1, 0.05, 0.3), float)
    out = bsm_value(np.array([40.0, 50.0, 60.0]), 50, [[1.0], [2.0]], 0.05, 0.3)
    assert out.shape == (2, 3)
    assert out[1, 2] == bsm_value(60, 50, 2, 0.05, 0.3)


@pytest.mark.parametrize(
    "kwargs, name",
    [
        (dict(share_price=-1), "share_price"),
        (dict(strike=0), "strike"),
        (dict(term=-0.5), "term"),
        (dict(volatility=-0.2), "volatility"),
        (dict(dividend_yield=-0.01), "dividend_yield"),
        (dict(rate=np.nan), "rate"),
        (dict(share_price="abc"), "share_price"),
    ],
)
def test_invalid_inputs_name_the_argument(kwargs, name):
    args = dict(share_price=50, strike=50, term=1, rate=0.05, volatility=0.3)
    args.update(kwargs)
    with pytest.raises(ValueError, match=name) as err:
        bsm_value(**args)
    assert isinstance(err.value, InputError)


def test_invalid_kind():
    with pytest.raises(InputError, match="kind"):
        bsm_value(50, 50, 1, 0.05, 0.3, kind="straddle")
