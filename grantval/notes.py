"""The statements every output carries: methods, conventions, review."""

from __future__ import annotations

REVIEW = (
    "These results inform accounting judgements; they do not make them. They must be reviewed by "
    "qualified accounting staff and must follow the applicable standards (ASC 718, IFRS 2) and the "
    "company's own accounting policies."
)

VALUATION_METHODS = [
    ("Options, model bsm",
     "Black-Scholes-Merton with a continuous dividend yield (ASC 718-10-55-18; IFRS 2.B5). Expected term as "
     "given in the assumptions, or by the simplified method of SEC SAB Topic 14.D.2: (quantity-weighted "
     "average vesting time + contractual term) / 2."),
    ("Options, model lattice",
     "Binomial lattice for employee options over the contractual term (ASC 718-10-55-18): no exercise "
     "before each tranche vests; after vesting, exercise when optimal or when the share price reaches "
     "exercise_multiple x exercise price; vested holders leave at post_vest_exit_rate a year and exercise "
     "if in the money. Pre-vesting forfeitures are not in the fair value (ASC 718-10-30-11; IFRS 2.19); "
     "they are handled in attribution."),
    ("RSUs",
     "Share price at the grant date less the present value of dividends forgone until each tranche "
     "vests: S x exp(-q t)."),
    ("Supplied values",
     "A fair_value in the assumptions table is used as given and marked as supplied by an outside valuation."),
    ("Conventions",
     "Terms in years as actual days / 365.25. Rates and dividend yields are continuously compounded decimals. "
     "Tranche k vests vest_every_months x k months after vest_start_date (day clamped to month end); "
     "tranche quantities by cumulative rounding, floor(q k / n) - floor(q (k-1) / n)."),
]
