"""The forecast uses the estimates in force at the through date; cents are rounded half up on decimals."""

import numpy as np
import pytest

from grantval import api
from grantval.attribution.periods import to_cents
from tests.factory import write_ledger


def _ledger(folder, fraction="0.75"):
    # invented: 1,000 options at a supplied 120 each (3-year cliff), 75% expected to vest
    grants = [{"grant_id": "F", "holder_id": "h", "group": "", "award_type": "option", "grant_date": "2027-01-01",
               "quantity": "1000", "exercise_price": "10", "expiration_date": "2037-01-01", "vest_start_date": "",
               "vest_months": "36", "vest_every_months": "36", "cliff_months": "0", "assumption_set": "s"}]
    assumptions = [{"assumption_set": "s", "grant_date": "", "share_price": "10", "volatility": "",
                    "risk_free_rate": "", "dividend_yield": "", "expected_term_years": "", "model": "bsm",
                    "exercise_multiple": "", "post_vest_exit_rate": "", "fair_value": "120"}]
    estimates = [{"applies_to": "*", "effective_date": "2027-01-01", "annual_forfeiture_rate": "",
                  "expected_vest_fraction": fraction}]
    return write_ledger(folder, {"grants": grants, "assumptions": assumptions, "estimates": estimates})


@pytest.mark.parametrize("attribution", ["straight-line", "graded"])
def test_forecast_to_the_end_of_vesting_equals_the_unrecognised_cost(tmp_path, attribution):
    # ASC 718-10-35-3 / IFRS 2.20: the estimates in force at the through date apply to the forecast;
    # no true-up to 100% at vesting is assumed (the new user's case: unrecognised 60,000, forecast 90,000)
    run = api.expense(_ledger(tmp_path / "l"), through="2027-12-31", forecast_through="2030-12-31",
                      forfeitures="estimate", attribution=attribution)
    s = run.schedule
    unrec_cents = int(np.maximum(to_cents(s.at_through.expected_total) - s.cumulative_cents[:, -1], 0).sum())
    assert unrec_cents == 90_000 * 100 - s.cumulative_cents[0, -1]   # 1,000 x 75% x 120 = 90,000 in all
    assert int(s.forecast_cents.sum()) == unrec_cents


def test_half_up_on_the_decimal_amount():
    # the documented rule (docs/expense-rules.md): 2.01 x 365 / 730 = 1.005 exactly -> 1.01
    assert to_cents(np.array([2.01 * 365 / 730]))[0] == 101
    assert to_cents(np.array([1.004999, 1.0049, 0.125, 2.675]))[0:4].tolist() == [100, 100, 13, 268]


def test_cents_arithmetic_refuses_to_wrap():
    from grantval.errors import GrantvalError

    with pytest.raises(GrantvalError, match="cents arithmetic"):
        to_cents(np.array([1e17]))
    with pytest.raises(GrantvalError):
        to_cents(np.array([np.inf]))
