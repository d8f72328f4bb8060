"""Simplified expected term and RSU value."""

import numpy as np
import pytest

from grantval.errors import InputError
from grantval.pricing import rsu_value, simplified_term


def test_graded_four_year_ten_year_term():
    # SEC SAB Topic 14.D.2 simplified-method example (seen in secondary sources):
    # 25% a year over 4 years, 10-year term: ((1+2+3+4)/4 + 10) / 2 = 6.25 years.
    assert simplified_term([1, 2, 3, 4], 10, weights=[0.25] * 4) == pytest.approx(6.25)


def test_cliff_three_year_ten_year_term():
    # SEC SAB Topic 14.D.2 method: (3 + 10) / 2 = 6.5 years.
    assert simplified_term(3, 10) == pytest.approx(6.5)


def test_batch_of_awards_with_tranches_on_last_axis():
    vest = np.array([[1, 2, 3, 4], [3, 3, 3, 3]], dtype=float)
    w = np.ones_like(vest)
    np.testing.assert_allclose(simplified_term(vest, [10, 10], weights=w), [6.25, 6.5])


def test_unequal_tranches_weight_the_vesting_time():
    # weights need not sum to 1: 1 share at 1 year, 3 at 3 years -> average 2.5
    assert simplified_term([1, 3], 7, weights=[1, 3]) == pytest.approx((2.5 + 7) / 2)


def test_vesting_after_contract_is_refused():
    with pytest.raises(InputError, match="vesting_years"):
        simplified_term(11, 10)


def test_rsu_value_without_dividends_is_share_price():
    assert rsu_value(42.5, 3) == 42.5


def test_rsu_value_less_forgone_dividends():
    # common practice: S e^{-qT} for units without dividend equivalents
    assert rsu_value(40, 2, 0.03) == pytest.approx(40 * np.exp(-0.06), rel=1e-15)
    np.testing.assert_allclose(rsu_value([40, 50], [1, 2], 0.02), [40 * np.exp(-0.02), 50 * np.exp(-0.04)])


def test_rsu_invalid_inputs():
    with pytest.raises(InputError, match="term"):
        rsu_value(40, -1)
    with pytest.raises(InputError, match="share_price"):
        rsu_value(-40, 1)
