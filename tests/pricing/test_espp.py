"""ESPP purchase rights: ASC 718-50-55 components against QuantLib and against the plan's own mechanics."""

import numpy as np
import pytest
import QuantLib as ql

from grantval.errors import InputError
from grantval.pricing.espp import espp_value


def ql_black(kind, s, k, t, r, vol, q):
    """QuantLib blackFormula on the forward S e^{(r-q)T}, discounted at e^{-rT}."""
    kind = ql.Option.Call if kind == "call" else ql.Option.Put
    return ql.blackFormula(kind, k, s * np.exp((r - q) * t), vol * np.sqrt(t), np.exp(-r * t))


CASES = [
    # share price, term, rate, volatility, dividend yield, discount
    (50.0, 0.5, 0.045, 0.30, 0.0, 0.15),
    (50.0, 1.0, 0.065, 0.30, 0.025, 0.15),
    (12.0, 2.0, 0.01, 0.80, 0.0, 0.10),
    (140.0, 0.25, 0.05, 0.20, 0.03, 0.05),
]


@pytest.mark.parametrize("s, t, r, vol, q, d", CASES)
def test_fixed_shares_is_discounted_share_plus_call(s, t, r, vol, q, d):
    # ASC 718-50-55-2 Type A (maximum number of shares), Example 1 Case A (718-50-55-10):
    # d of a share plus a call on (1 - d) of a share struck at the offering-date price.
    # Reference: QuantLib blackFormula.
    ref = d * s * np.exp(-q * t) + (1 - d) * ql_black("call", s, s, t, r, vol, q)
    assert espp_value(s, t, r, vol, q, d) == pytest.approx(ref, rel=1e-10)


@pytest.mark.parametrize("s, t, r, vol, q, d", CASES)
def test_fixed_withholding_adds_a_put_on_the_discount(s, t, r, vol, q, d):
    # ASC 718-50-55-2 Type B (variable number of shares): plus a put on d of a share at the start price.
    # Reference: QuantLib blackFormula.
    ref = (
        d * s * np.exp(-q * t)
        + (1 - d) * ql_black("call", s, s, t, r, vol, q)
        + d * ql_black("put", s, s, t, r, vol, q)
    )
    assert espp_value(s, t, r, vol, q, d, basis="fixed_withholding") == pytest.approx(ref, rel=1e-10)


def test_two_purchase_offering_is_two_options():
    # A 2-year offering with purchases at 1 and 2 years, each looking back to the offering start
    # (ASC 718-50-55, multiple purchase periods valued as separate options; from memory).
    # Reference: QuantLib blackFormula for each purchase date.
    s, r, vol, q, d = 30.0, 0.04, 0.45, 0.01, 0.15
    got = espp_value(s, np.array([1.0, 2.0]), r, vol, q, d)
    ref = [d * s * np.exp(-q * t) + (1 - d) * ql_black("call", s, s, t, r, vol, q) for t in (1.0, 2.0)]
    np.testing.assert_allclose(got, ref, rtol=1e-10)
    assert got[1] > got[0]


@pytest.mark.parametrize("basis, expected", [("fixed_shares", "q"), ("fixed_withholding", "r")])
def test_no_look_back_is_only_the_discount(basis, expected):
    # Purchase at (1 - d) S_T: fixed shares earn d S_T (worth d S e^{-qT}); fixed withholdings
    # earn d/(1-d) of the withholdings in cash at T (worth d S e^{-rT} per share at the start price).
    # Reference: docs/purchase-plans.md derivation (common practice).
    s, t, r, vol, q, d = 40.0, 0.5, 0.05, 0.35, 0.02, 0.15
    rate = q if expected == "q" else r
    got = espp_value(s, t, r, vol, q, d, lookback=False, basis=basis)
    assert got == pytest.approx(d * s * np.exp(-rate * t), rel=1e-12)


@pytest.mark.parametrize("basis", ["fixed_shares", "fixed_withholding"])
def test_components_match_the_plan_mechanics_by_simulation(basis):
    # Independent of the decomposition: simulate S_T (exact lognormal), buy shares as the plan does
    # with withholdings W = (1 - d) S_0, value the gain at T and discount. 3 standard errors (common practice).
    s, t, r, vol, q, d = 25.0, 1.0, 0.04, 0.5, 0.015, 0.15
    z = np.random.default_rng(11).standard_normal(500_000)
    z = np.concatenate([z, -z])
    st = s * np.exp((r - q - 0.5 * vol**2) * t + vol * np.sqrt(t) * z)
    price = (1 - d) * np.minimum(s, st)
    withheld = (1 - d) * s
    shares = 1.0 if basis == "fixed_shares" else withheld / price
    gain = np.exp(-r * t) * shares * (st - price)  # a share bought at T is worth S_T
    pairs = gain.reshape(2, -1).mean(axis=0)
    se = pairs.std(ddof=1) / np.sqrt(pairs.size)
    assert abs(pairs.mean() - espp_value(s, t, r, vol, q, d, basis=basis)) <= 3 * se


def test_vectorised_and_scalar():
    got = espp_value(np.array([10.0, 20.0]), 1.0, 0.03, 0.3, 0.0, 0.15)
    assert got.shape == (2,)
    assert got[1] == pytest.approx(2 * got[0])  # homogeneous of degree one in the price
    assert isinstance(espp_value(10.0, 1.0, 0.03, 0.3), float)
    assert espp_value(0.0, 1.0, 0.03, 0.3) == 0.0
    # term 0: only the discount on today's share
    assert espp_value(10.0, 0.0, 0.03, 0.3, 0.0, 0.15) == pytest.approx(1.5)


@pytest.mark.parametrize(
    "kwargs, words",
    [
        ({"discount": 1.0}, "discount"),
        ({"discount": -0.1}, "discount"),
        ({"basis": "shares"}, "basis"),
        ({"lookback": "yes"}, "lookback"),
        ({"volatility": -0.2}, "volatility"),
        ({"term": np.nan}, "term"),
    ],
)
def test_bad_inputs_are_named(kwargs, words):
    args = {"share_price": 10.0, "term": 1.0, "rate": 0.03, "volatility": 0.3}
    args.update(kwargs)
    with pytest.raises(InputError, match=words):
        espp_value(**args)


from hypothesis import given, settings, strategies as st  # noqa: E402


@settings(max_examples=100, deadline=None)
@given(
    st.floats(1, 500), st.floats(0.01, 3), st.floats(-0.01, 0.08), st.floats(0.01, 1.5),
    st.floats(0, 0.06), st.floats(0, 0.3),
)
def test_orderings(s, t, r, vol, q, d):
    # Properties (common practice): the look-back adds value; fixed withholding adds a put;
    # the call is worth at most the share delivered, so fixed withholding is at most S e^{-qT} + d S e^{-rT}.
    plain = espp_value(s, t, r, vol, q, d, lookback=False)
    fixed = espp_value(s, t, r, vol, q, d)
    varying = espp_value(s, t, r, vol, q, d, basis="fixed_withholding")
    assert plain <= fixed + 1e-9 * s
    assert fixed <= varying + 1e-9 * s
    assert varying <= s * (np.exp(-q * t) + d * np.exp(-r * t)) * (1 + 1e-9)
    assert espp_value(s, t, r, vol * 1.1, q, d) >= fixed - 1e-9 * s


# Resets of the look-back's reference price (a modification of each purchase right, ASC 718-20-35-3):
# share price on the reset date, offering-start price, years to the purchase date, rate, volatility,
# dividend yield, discount
RESETS = [
    (20.0, 25.0, 0.5, 0.04, 0.40, 0.0, 0.15),
    (31.0, 48.0, 1.5, 0.02, 0.65, 0.01, 0.15),
    (9.5, 10.0, 0.25, 0.05, 0.30, 0.03, 0.10),
]


@pytest.mark.parametrize("s, s0, t, r, vol, q, d", RESETS)
def test_reset_increment_fixed_shares_against_quantlib(s, s0, t, r, vol, q, d):
    # Fixed shares: the employee pays (1 - d) min(K, S_T) for a share worth S_T, whose value on the reset
    # date is S e^{-qt} - (1 - d) (K e^{-rt} - p(K)); the increment is that at K = S less that at K = S_0
    # (docs/purchase-plans.md). Reference: QuantLib blackFormula puts.
    from grantval.pricing import espp_reset_increment

    owed = lambda k: k * np.exp(-r * t) - ql_black("put", s, k, t, r, vol, q)  # noqa: E731
    ref = (1 - d) * (owed(s0) - owed(s))
    assert espp_reset_increment(s, s0, t, r, vol, q, d) == pytest.approx(ref, rel=1e-10)


@pytest.mark.parametrize("s, s0, t, r, vol, q, d", RESETS)
def test_reset_increment_fixed_withholding_against_quantlib(s, s0, t, r, vol, q, d):
    # Fixed withholding W = (1 - d) S_0 per share counted: the right is worth
    # W/(1 - d) (e^{-rt} + c(K)/K) - W e^{-rt}; increment (S_0/S) c(S) - c(S_0). Reference: QuantLib blackFormula.
    from grantval.pricing import espp_reset_increment

    ref = s0 / s * ql_black("call", s, s, t, r, vol, q) - ql_black("call", s, s0, t, r, vol, q)
    got = espp_reset_increment(s, s0, t, r, vol, q, d, basis="fixed_withholding")
    assert got == pytest.approx(ref, rel=1e-10)


@pytest.mark.parametrize("basis", ["fixed_shares", "fixed_withholding"])
def test_reset_increment_matches_the_plan_mechanics_by_simulation(basis):
    # Independent of the formulas: from the reset date simulate S_T (exact lognormal), buy shares as the plan
    # does with the reference price S (after) and S_0 (before), W = (1 - d) S_0; discounted mean of the
    # difference in the employee's gain within 3 standard errors (common practice).
    from grantval.pricing import espp_reset_increment

    s, s0, t, r, vol, q, d = 20.0, 25.0, 0.5, 0.04, 0.4, 0.01, 0.15
    z = np.random.default_rng(5).standard_normal(400_000)
    z = np.concatenate([z, -z])
    st = s * np.exp((r - q - 0.5 * vol**2) * t + vol * np.sqrt(t) * z)
    withheld = (1 - d) * s0

    def gain(k):
        price = (1 - d) * np.minimum(k, st)
        shares = 1.0 if basis == "fixed_shares" else withheld / price
        return shares * (st - price)

    diff = (np.exp(-r * t) * (gain(s) - gain(s0))).reshape(2, -1).mean(axis=0)
    se = diff.std(ddof=1) / np.sqrt(diff.size)
    assert abs(diff.mean() - espp_reset_increment(s, s0, t, r, vol, q, d, basis=basis)) <= 3 * se


def test_reset_to_the_same_price_or_on_the_purchase_date_adds_nothing():
    from grantval.pricing import espp_reset_increment

    for basis in ("fixed_shares", "fixed_withholding"):
        assert espp_reset_increment(25.0, 25.0, 0.5, 0.04, 0.4, basis=basis) == pytest.approx(0.0, abs=1e-12)
        # on the purchase date the look-back already buys at (1 - d) S
        assert espp_reset_increment(20.0, 25.0, 0.0, 0.04, 0.4, basis=basis) == pytest.approx(0.0, abs=1e-12)
    got = espp_reset_increment(np.array([24.0, 20.0, 15.0]), 25.0, 0.5, 0.04, 0.4)
    assert got.shape == (3,) and np.all(np.diff(got) > 0)  # the lower the new price, the larger the increment


@pytest.mark.parametrize("kwargs, words", [({"share_price": 26.0}, "must not exceed start_price"),
                                           ({"share_price": 0.0}, "share_price"), ({"discount": 1.0}, "discount"),
                                           ({"basis": "shares"}, "basis"), ({"term": -1.0}, "term")])
def test_reset_bad_inputs_are_named(kwargs, words):
    from grantval.pricing import espp_reset_increment

    args = {"share_price": 20.0, "start_price": 25.0, "term": 0.5, "rate": 0.04, "volatility": 0.4, **kwargs}
    with pytest.raises(InputError, match=words):
        espp_reset_increment(**args)


IN_PROGRESS = [
    # share price today, reference (start) price, years left, rate, volatility, dividend yield, discount
    (15.0, 20.0, 0.5, 0.04, 0.35, 0.0, 0.15),
    (26.0, 20.0, 1.5, 0.03, 0.25, 0.02, 0.15),
    (9.5, 10.0, 0.25, 0.05, 0.30, 0.03, 0.10),
]


@pytest.mark.parametrize("basis", ["fixed_shares", "fixed_withholding"])
@pytest.mark.parametrize("s, k, t, r, vol, q, d", IN_PROGRESS)
def test_value_during_the_offering_against_quantlib(s, k, t, r, vol, q, d, basis):
    # Per share counted at the start purchase price (1 - d) K. Fixed shares: the employee pays
    # (1 - d) min(K, S_T) for S_T: d S e^{-qt} + (1 - d) c(K). Fixed withholding W = (1 - d) K: payoff
    # d K + max(S_T - K, 0): d K e^{-rt} + c(K) (docs/purchase-plans.md). Reference: QuantLib blackFormula.
    from grantval.pricing import espp_remaining_value

    c = ql_black("call", s, k, t, r, vol, q)
    ref = d * s * np.exp(-q * t) + (1 - d) * c if basis == "fixed_shares" else d * k * np.exp(-r * t) + c
    assert espp_remaining_value(s, k, t, r, vol, q, d, basis=basis) == pytest.approx(ref, rel=1e-10)


@pytest.mark.parametrize("basis", ["fixed_shares", "fixed_withholding"])
def test_value_during_the_offering_matches_the_plan_mechanics_by_simulation(basis):
    # Independent of the formulas: from today simulate S_T, buy as the plan does with reference K and
    # W = (1 - d) K; the discounted mean gain within 3 standard errors (common practice)
    from grantval.pricing import espp_remaining_value

    s, k, t, r, vol, q, d = 16.0, 20.0, 0.75, 0.04, 0.4, 0.01, 0.15
    z = np.random.default_rng(11).standard_normal(400_000)
    st = s * np.exp((r - q - 0.5 * vol**2) * t + vol * np.sqrt(t) * np.concatenate([z, -z]))
    price = (1 - d) * np.minimum(k, st)
    shares = 1.0 if basis == "fixed_shares" else (1 - d) * k / price
    gain = (np.exp(-r * t) * shares * (st - price)).reshape(2, -1).mean(axis=0)
    se = gain.std(ddof=1) / np.sqrt(gain.size)
    assert abs(gain.mean() - espp_remaining_value(s, k, t, r, vol, q, d, basis=basis)) <= 3 * se


def test_value_during_the_offering_at_the_reference_price_is_a_new_offering():
    # at S = K the right is the one a new offering at K would grant (espp_value); its difference to the
    # right referenced to a higher K is the reset increment (espp_reset_increment, fixed shares)
    from grantval.pricing import espp_remaining_value, espp_reset_increment

    for lookback in (True, False):
        for basis in ("fixed_shares", "fixed_withholding"):
            assert espp_remaining_value(18.0, 18.0, 0.5, 0.04, 0.3, 0.01, 0.15, lookback, basis) == pytest.approx(
                espp_value(18.0, 0.5, 0.04, 0.3, 0.01, 0.15, lookback, basis), rel=1e-13)
    new, old = (espp_remaining_value(15.0, k, 0.5, 0.04, 0.3, 0.01, 0.15) for k in (15.0, 20.0))
    assert new - old == pytest.approx(espp_reset_increment(15.0, 20.0, 0.5, 0.04, 0.3, 0.01, 0.15), rel=1e-12)
    with pytest.raises(InputError, match="reference_price"):
        espp_remaining_value(15.0, 0.0, 0.5, 0.04, 0.3)
