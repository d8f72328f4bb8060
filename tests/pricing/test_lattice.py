"""Employee-option lattice against QuantLib, closed forms and a published example."""

import numpy as np
import pytest
from scipy.integrate import quad

from grantval.errors import InputError
from grantval.pricing import bsm_value, lattice_value

from tests.pricing.ql_reference import american_call


def tolerance(value):
    """Accuracy target of the lattice at default steps: max($0.005, 0.02% of value)."""
    return np.maximum(0.005, 2e-4 * np.abs(value))


def _random_cases(seed, n):
    """Seeded cases over the documented range (days on an Actual/365 basis)."""
    rng = np.random.default_rng(seed)
    s = rng.uniform(5, 200, n)
    k = s * rng.uniform(0.5, 1.8, n)
    vol = rng.uniform(0.15, 0.90, n)
    days = rng.integers(365, 3651, n)
    vest_days = np.floor(rng.uniform(0, 1, n) * np.minimum(days, 4 * 365))
    q = rng.uniform(0, 0.06, n)
    r = rng.uniform(0.0, 0.06, n)
    return s, k, days, vest_days, r, vol, q


def test_matches_quantlib_fd_american_with_vesting_window():
    # Reference: QuantLib FdBlackScholesVanillaEngine (4000 time steps, 1200 space
    # points) on an AmericanExercise whose window opens at the vesting date.
    s, k, days, vest_days, r, vol, q = _random_cases(7, 24)
    ours = lattice_value(s, k, days / 365, r, vol, q, vesting=vest_days / 365)
    ref = np.array([
        american_call(*row, engine="fd", steps=4000, x_grid=1200)
        for row in zip(s, k, days, r, vol, q, vest_days)
    ])
    assert np.all(np.abs(ours - ref) <= tolerance(ref)), np.max(np.abs(ours - ref) / tolerance(ref))


def test_zero_dividends_equals_european_bsm():
    # American call on a non-dividend share is never exercised early (Merton 1973),
    # so the lattice must return the BSM value.
    s, k, days, vest_days, r, vol, _ = _random_cases(11, 200)
    t = days / 365
    ours = lattice_value(s, k, t, r, vol, 0.0, vesting=vest_days / 365)
    ref = bsm_value(s, k, t, r, vol)
    assert np.all(np.abs(ours - ref) <= tolerance(ref))


@pytest.mark.parametrize(
    "s, k, t, v, r, vol, lam",
    [(50, 50, 10, 3, 0.05, 0.35, 0.10), (30, 40, 7, 1, 0.03, 0.6, 0.25), (100, 60, 5, 2, 0.02, 0.25, 0.05)],
)
def test_exits_match_semi_analytic_value(s, k, t, v, r, vol, lam):
    # No dividends, no multiple: a vested leaver at time u exercises, worth C_BSM(u);
    # value = int_v^T lam e^{-lam (u - v)} C_BSM(u) du + e^{-lam (T - v)} C_BSM(T)
    # (scipy.integrate.quad; the closed form follows Hull and White 2004).
    integrand = lambda u: lam * np.exp(-lam * (u - v)) * bsm_value(s, k, u, r, vol)  # noqa: E731
    integral, _ = quad(integrand, v, t, epsabs=1e-12, epsrel=1e-12)
    expected = integral + np.exp(-lam * (t - v)) * bsm_value(s, k, t, r, vol)
    got = lattice_value(s, k, t, r, vol, vesting=v, exit_rate=lam)
    assert abs(got - expected) <= tolerance(expected)


def test_benninga_employee_option_example():
    # Benninga, Financial Modeling, 3rd ed., section 17.8.4: S=K=50, T=10, vesting 3,
    # r=5%, sigma=35%, q=2.5%, exit rate 10% before and after vesting, multiple 3.
    # Published 13.5753 (100 steps a year) and 13.5810 (200 steps a year), rising
    # towards about 13.58-13.59; the default must land within +/-0.01 of 13.58.
    value = lattice_value(
        50, 50, 10, 0.05, 0.35, 0.025, vesting=3, exercise_multiple=3,
        exit_rate=0.10, pre_vest_exit_rate=0.10,
    )
    assert value == pytest.approx(13.58, abs=0.01)


def test_vesting_at_expiry_is_european_times_survival():
    got = lattice_value(50, 55, 4, 0.04, 0.3, 0.02, vesting=4, pre_vest_exit_rate=0.1)
    assert got == pytest.approx(bsm_value(50, 55, 4, 0.04, 0.3, 0.02) * np.exp(-0.4), rel=1e-14)


def test_immediate_exercise_above_multiple():
    # no vesting and a share price above the multiple: the holder exercises at once
    assert lattice_value(100, 40, 5, 0.04, 0.3, vesting=0, exercise_multiple=2) == pytest.approx(60.0)


def test_term_zero_is_intrinsic():
    assert lattice_value(55, 50, 0, 0.04, 0.3) == pytest.approx(5.0)


def test_mixed_multiples_in_one_batch():
    mult = np.array([np.nan, 2.0, 3.0])
    got = lattice_value(50, 50, 10, 0.04, 0.35, 0.02, vesting=2, exercise_multiple=mult)
    each = [lattice_value(50, 50, 10, 0.04, 0.35, 0.02, vesting=2, exercise_multiple=m)
            for m in (None, 2.0, 3.0)]
    np.testing.assert_allclose(got, each, rtol=1e-12)


def test_steps_converge():
    # common practice: more steps should move the value by less than the tolerance
    a = lattice_value(50, 50, 10, 0.04, 0.35, 0.03, vesting=3)
    b = lattice_value(50, 50, 10, 0.04, 0.35, 0.03, vesting=3, steps=2048)
    assert abs(a - b) <= tolerance(b)


@pytest.mark.parametrize(
    "kwargs, name",
    [
        (dict(share_price=0), "share_price"),
        (dict(strike=-1), "strike"),
        (dict(volatility=0), "volatility"),
        (dict(term=-1), "term"),
        (dict(vesting=-1), "vesting"),
        (dict(vesting=11), "vesting"),
        (dict(exercise_multiple=0.5), "exercise_multiple"),
        (dict(exit_rate=-0.1), "exit_rate"),
        (dict(pre_vest_exit_rate=-0.1), "pre_vest_exit_rate"),
        (dict(steps=2), "steps"),
        (dict(steps=100.5), "steps"),
    ],
)
def test_invalid_inputs_name_the_argument(kwargs, name):
    args = dict(share_price=50, strike=50, term=10, rate=0.04, volatility=0.3)
    args.update(kwargs)
    with pytest.raises(InputError, match=name):
        lattice_value(**args)
