"""Limits on valuation inputs, applied wherever a value enters: the ledger, ``assumptions``,
``price-option`` and what-if shifts.

A value outside its *limit* cannot be right and is refused; a value inside the
limit but beyond the *usual* range is accepted with a warning that says why it
is unusual.  Rates, yields and volatility are decimals (0.35 is 35%).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from grantval.errors import UsageError

#: largest share price, exercise price or per-unit fair value accepted (currency per share);
#: keeps the cents arithmetic (int64) far from overflow for any quantity the ledger allows
MAX_PRICE = 1e7


@dataclass(frozen=True)
class Limit:
    """Accepted range ``[low, high]`` (``low`` excluded when ``low_open``) and the usual range."""

    low: float
    high: float
    low_open: bool
    usual_low: float
    usual_high: float
    words: str
    unusual: str

    def bad(self, x: np.ndarray) -> np.ndarray:
        """True where a value cannot be right (NaN means 'not given' and is never bad)."""
        x = np.asarray(x, dtype=float)
        low = (x <= self.low) if self.low_open else (x < self.low)
        return ~np.isnan(x) & (low | (x > self.high) | np.isinf(x))

    def odd(self, x: np.ndarray) -> np.ndarray:
        """True where a value is accepted but unusual."""
        x = np.asarray(x, dtype=float)
        return ~np.isnan(x) & ~self.bad(x) & ((x < self.usual_low) | (x > self.usual_high))


LIMITS = {
    "share_price": Limit(0.0, MAX_PRICE, True, 0.0, MAX_PRICE, f"must be greater than zero and at most {MAX_PRICE:g}",
                         ""),
    "exercise_price": Limit(0.0, MAX_PRICE, True, 0.0, MAX_PRICE,
                            f"must be greater than zero and at most {MAX_PRICE:g}", ""),
    "volatility": Limit(0.0, 5.0, True, 0.0, 1.5, "must be greater than 0 and at most 5 (a decimal: 0.35 is 35%)",
                        "is over 1.5 (150%), unusual for a share's volatility: check it is a decimal"),
    "risk_free_rate": Limit(-0.05, 0.5, False, -0.01, 0.15, "must be between -0.05 and 0.5 (a decimal: 0.04 is 4%)",
                            "is outside -0.01 to 0.15, unusual for a risk-free rate: check it is a decimal"),
    "dividend_yield": Limit(0.0, 1.0, False, 0.0, 0.2,
                            "must be zero or more and below 1 (a decimal: 0.015 is 1.5%)",
                            "is over 0.2 (20%), unusual for a dividend yield: check it is a decimal"),
    "expected_term_years": Limit(0.0, 50.0, True, 0.0, 15.0, "must be greater than zero and at most 50 years",
                                 "is over 15 years, unusual for an expected term"),
    "fair_value": Limit(0.0, MAX_PRICE, False, 0.0, MAX_PRICE, f"must be zero or more and at most {MAX_PRICE:g}", ""),
}
# the upper bound of a dividend yield is exclusive: a yield of 100% or more cannot be right
_DIV = LIMITS["dividend_yield"]


def bad(name: str, values) -> np.ndarray:
    """True where ``values`` of input ``name`` cannot be right."""
    x = np.asarray(values, dtype=float)
    out = LIMITS[name].bad(x)
    if name == "dividend_yield":
        out |= ~np.isnan(x) & (x >= 1.0)
    return out


def odd(name: str, values) -> np.ndarray:
    """True where ``values`` of input ``name`` are accepted but unusual."""
    return LIMITS[name].odd(values) & ~bad(name, values)


def check_assumption_values(**named: float) -> list[str]:
    """Refuse values that cannot be right (UsageError naming them); return warnings for unusual ones.

    Keyword names are keys of :data:`LIMITS` (``share_price=50, volatility=0.35, ...``).
    """
    warnings = []
    for name, value in named.items():
        if value is None:
            continue
        if bool(bad(name, value)):
            raise UsageError(f"{{{name}}} {value:g} {LIMITS[name].words}", (name,))
        if bool(odd(name, value)):
            warnings.append(f"{name} {value:g} {LIMITS[name].unusual}")
    return warnings
