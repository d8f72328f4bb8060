"""Property-based checks (hypothesis) of the pricing functions.

Each property is a textbook no-arbitrage or monotonicity result (Merton 1973,
"Theory of rational option pricing"; Hull, Options, Futures and Other
Derivatives, chapter on properties of stock options), or follows from the
employee-option model's definition (Hull and White 2004).
"""

import numpy as np
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from grantval.pricing import bsm_value, lattice_value

price = st.floats(5, 200)
moneyness = st.floats(0.5, 1.8)
term = st.floats(0.05, 10)
rate = st.floats(-0.01, 0.08)
vol = st.floats(0.05, 1.0)
div = st.floats(0.0, 0.08)


@given(price, moneyness, term, rate, vol, div)
def test_put_call_parity(s, m, t, r, sigma, q):
    k = s * m
    c = bsm_value(s, k, t, r, sigma, q)
    p = bsm_value(s, k, t, r, sigma, q, kind="put")
    assert np.isclose(c - p, s * np.exp(-q * t) - k * np.exp(-r * t), rtol=1e-10, atol=1e-10)


@given(price, moneyness, term, rate, vol, div)
def test_no_arbitrage_bounds(s, m, t, r, sigma, q):
    k = s * m
    c = bsm_value(s, k, t, r, sigma, q)
    p = bsm_value(s, k, t, r, sigma, q, kind="put")
    fs, fk = s * np.exp(-q * t), k * np.exp(-r * t)
    eps = 1e-10 * s
    assert max(fs - fk, 0) - eps <= c <= fs + eps
    assert max(fk - fs, 0) - eps <= p <= fk + eps


@given(price, moneyness, term, rate, vol, div, st.floats(0.01, 0.5))
def test_bsm_monotone_in_volatility_and_share_price(s, m, t, r, sigma, q, bump):
    k = s * m
    base = bsm_value(s, k, t, r, sigma, q)
    assert bsm_value(s, k, t, r, sigma + bump, q) >= base - 1e-12
    assert bsm_value(s * (1 + bump), k, t, r, sigma, q) >= base - 1e-12


lat_term = st.floats(1.0, 10.0)
lat_vol = st.floats(0.15, 0.9)
lat_rate = st.floats(0.0, 0.06)
lat_div = st.floats(0.0, 0.06)
vest_share = st.floats(0.0, 0.6)


@settings(max_examples=40, deadline=None)
@given(price, moneyness, lat_term, lat_rate, lat_vol, lat_div, vest_share)
def test_lattice_at_least_european(s, m, t, r, sigma, q, vs):
    # an exercise right can only add value: American (no exits, no multiple) >= European, within the
    # lattice's accuracy target; vesting periods of 0.4 to 7 days miss the target (known, pinned in
    # test_short_vesting_band_error_is_bounded below), so they are not drawn here
    assume(vs * t == 0 or vs * t >= SHORT_VESTING_BAND[1])
    k = s * m
    lat = lattice_value(s, k, t, r, sigma, q, vesting=vs * t)
    eur = bsm_value(s, k, t, r, sigma, q)
    assert lat >= eur - np.maximum(0.005, 2e-4 * eur)


@settings(max_examples=30, deadline=None)
@given(price, moneyness, lat_term, lat_rate, lat_vol, lat_div, vest_share)
def test_lattice_monotone_in_volatility_and_share_price(s, m, t, r, sigma, q, vs):
    k = s * m
    base = lattice_value(s, k, t, r, sigma, q, vesting=vs * t)
    assert lattice_value(s, k, t, r, sigma + 0.05, q, vesting=vs * t) >= base - 1e-9
    assert lattice_value(s * 1.05, k, t, r, sigma, q, vesting=vs * t) >= base - 1e-9


@settings(max_examples=30, deadline=None)
@given(price, moneyness, lat_term, lat_rate, lat_vol, lat_div, vest_share, st.floats(0.0, 0.3))
def test_lattice_falls_as_exit_rate_rises(s, m, t, r, sigma, q, vs, lam):
    k = s * m
    low = lattice_value(s, k, t, r, sigma, q, vesting=vs * t, exit_rate=lam)
    high = lattice_value(s, k, t, r, sigma, q, vesting=vs * t, exit_rate=lam + 0.1)
    assert high <= low + 1e-9


@settings(max_examples=30, deadline=None)
@given(price, moneyness, lat_term, lat_rate, lat_vol, lat_div, vest_share, st.floats(1.5, 4.0))
def test_lattice_falls_as_multiple_falls(s, m, t, r, sigma, q, vs, mult):
    # Exercising at a multiple is one strategy, so it is never worth more than the
    # optimal one.  Without dividends, exercising earlier only gives up time value,
    # so a lower multiple is worth less; with dividends a lower multiple can be
    # closer to the optimal boundary, so that half is checked with q = 0.
    k = s * m
    tol = lambda v: 1e-3 * v + 1e-6  # noqa: E731  the multiple is a barrier: lattice noise of 0.1%
    args = (s, k, t, r, sigma, q)
    optimal = lattice_value(*args, vesting=vs * t)
    assert lattice_value(*args, vesting=vs * t, exercise_multiple=mult) <= optimal + tol(optimal)
    args0 = (s, k, t, r, sigma, 0.0)
    high = lattice_value(*args0, vesting=vs * t, exercise_multiple=mult + 1.0)
    low = lattice_value(*args0, vesting=vs * t, exercise_multiple=mult)
    assert low <= high + tol(high)


@settings(max_examples=10, deadline=None)
@given(st.lists(st.tuples(price, moneyness, lat_term, lat_vol, lat_div, vest_share), min_size=2, max_size=6))
def test_array_call_equals_loop_of_scalar_calls(rows):
    s, m, t, sigma, q, vs = (np.array(c) for c in zip(*rows))
    batch = lattice_value(s, s * m, t, 0.03, sigma, q, vesting=vs * t, exit_rate=0.05)
    loop = [lattice_value(*x[:6], vesting=x[6], exit_rate=0.05)
            for x in zip(s, s * m, t, np.full(len(s), 0.03), sigma, q, vs * t)]
    np.testing.assert_allclose(batch, loop, rtol=1e-12)
    bb = bsm_value(s, s * m, t, 0.03, sigma, q)
    np.testing.assert_allclose(bb, [bsm_value(*x) for x in zip(s, s * m, t, np.full(len(s), 0.03), sigma, q)], rtol=1e-15)


SHORT_VESTING_BAND = (1e-3, 0.02)  # years: vesting periods of 0.4 to 7 days, narrower than the tree's nodes


def test_short_vesting_band_meets_the_target():
    # A vesting-date law narrower than the node spacing is integrated with a parabola through three nodes
    # (DEVELOPERS.md, "The lattice in brief"); before, linear pieces erred by up to $0.011 on this $4.60
    # option.  Reference: no dividends and no exits, so the American call equals Black-Scholes-Merton
    # (Merton 1973).  Target max($0.005, 0.02% of value); measured below $0.0001.
    eur = bsm_value(10.0, 10.0, 6.0, 0.0, 0.5, 0.0)
    errors = [abs(float(lattice_value(10.0, 10.0, 6.0, 0.0, 0.5, 0.0, vesting=v)) - eur)
              for v in np.linspace(*SHORT_VESTING_BAND, 12)]
    assert max(errors) < 0.0005


def test_short_vesting_with_dividends_matches_quantlib():
    # Early exercise matters with a dividend yield.  Reference: QuantLib FdBlackScholesVanillaEngine
    # (4000 time steps, 1200 space points) on an AmericanExercise opening 1 to 7 days after the grant.
    from tests.pricing.ql_reference import american_call

    for vest_days in (1, 3, 5, 7):
        ref = american_call(10.0, 10.0, 2191, 0.03, 0.45, 0.02, vest_days=vest_days, engine="fd", steps=4000,
                            x_grid=1200)
        ours = float(lattice_value(10.0, 10.0, 2191 / 365, 0.03, 0.45, 0.02, vesting=vest_days / 365))
        assert abs(ours - ref) <= max(0.005, 0.0002 * ref), (vest_days, ours - ref)
