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
    ("Market conditions",
     "Units and options whose condition_set names a market condition (relative, index or absolute TSR, share-price "
     "hurdle): Monte Carlo of the company and its peers as correlated geometric Brownian motions under the "
     "risk-neutral measure, from the grant date to the period end in whole trading days (252 a year), with "
     "antithetic pairs and the discounted share price as control variate; policy mc_paths paths and seed mc_seed, "
     "so reruns are identical; std_error is the standard error of each value. Units settle in shares at the period "
     "end (dividends only with dividend_equivalents = yes). Options are exercisable only if the condition is met and "
     "are valued as European calls at their expected term on the simulated paths. The cost is recognised whether or "
     "not the condition is met (ASC 718-10-30-14; IFRS 2.21). Without a vesting schedule (vest_months 0) units "
     "vest on the period end and the requisite service is the derived service period (derived_service_years: the "
     "median time the condition is first met on the paths that meet it; ASC 718-10-55-71 to 55-72, from memory)."),
    ("Purchase-plan rights",
     "Each purchase period of an ESPP enrollment is its own option from the offering start to its purchase "
     "date, valued by the ASC 718-50-55 components (d S e^(-q T) + (1 - d) x call struck at S, plus d x put "
     "for a fixed withholding; d S e^(-q T) or d S e^(-r T) without a look-back); the same value under "
     "IFRS 2. Every period keeps its own value whatever the valuation_unit policy; a per-enrollment figure "
     "is the share-weighted mean of its periods."),
    ("Supplied values",
     "A fair_value in the assumptions table is used as given and marked as supplied by an outside valuation."),
    ("Conventions",
     "Terms in years as actual days / 365.25. Rates and dividend yields are continuously compounded decimals. "
     "Tranche k vests vest_every_months x k months after vest_start_date (day clamped to month end); "
     "tranche quantities by cumulative rounding, floor(q k / n) - floor(q (k-1) / n)."),
]

EXPENSE_RULES = {
    "straight-line": (
        "Straight-line over the award's requisite service period (grant date to the last tranche's vest date), "
        "never less than the grant-date fair value of the tranches vested (ASC 718-10-35-8)."),
    "graded": (
        "Graded: each tranche recognised over its own service period, from the grant date to its vest date "
        "(ASC 718-10-35-8, accelerated method; IFRS 2.IG11)."),
    "as-occur": (
        "Forfeitures accounted for when they occur: the cost of forfeited unvested awards is reversed in the "
        "period of the forfeiture (ASC 718-10-35-3 policy election)."),
    "estimate": (
        "Forfeitures estimated: unvested tranches count at the expected-to-vest quantity from the estimates "
        "table in force at each date (annual rate over the time to vest, or a fraction of the grant), trued up "
        "to the actual quantity at vesting; a change of estimate is a cumulative catch-up (ASC 718-10-35-3; "
        "IFRS 2.20)."),
    "service": (
        "Service through a date counts that day in full: elapsed = (date + 1 day - grant date) / "
        "(vest date - grant date), capped at 1; a tranche vesting on or before its grant date is expensed on "
        "the grant date."),
    "cancel": (
        "Cancellation of unvested awards without a replacement: the unrecognised cost is recognised at the "
        "cancel date (ASC 718-20-35-9; IFRS 2.28(a)). Exercises and expirations of vested awards change no cost."),
    "rounding": (
        "Each grant's cumulative cost is rounded to cents (half up on the decimal amount) at every period end "
        "and period expense is the difference, so each grant's periods sum exactly to its rounded total."),
    "forecast": (
        "The forecast assumes no events after the through date and keeps the estimates in force at the through "
        "date (units expected to vest, performance payouts; ASC 718-10-35-3, IFRS 2.20), with no true-up at "
        "vesting: a forecast to the end of vesting totals the unrecognised cost at the through date to the cent."),
}


MARKET_NOTES = [
    ("Share price", "The close on the grant date, or the last close before it (source_price_note says which)."),
    ("Expected term", "From the ledger's option grants on the date, quantity-weighted, by the simplified method "
                      "(SEC SAB Topic 14.D.2); expected_term_years is left blank so the ledger applies the "
                      "simplified method grant by grant. With --dates, the term given."),
    ("Volatility", "Sample standard deviation of log returns over the lookback ending on the grant date, "
                   "annualised by the square root of 252, 52 or 12 periods a year (ASC 718-10-55-37). With peers, "
                   "blended with their weighted-average volatility over the same lookback (SAB Topic 14.D.1)."),
    ("Risk-free rate", "Par yield interpolated linearly between tenors to the expected term (flat beyond the ends), "
                       "converted from semiannual to continuous compounding: r = 2 ln(1 + y/2)."),
    ("Dividend yield", "Dividends with ex-dates in the 365 days up to the grant date, over the share price."),
]


#: stated only when the ledger has a grant whose service began before its grant date
SERVICE_INCEPTION = (
    "Service inception before the grant date (grants.service_inception_date): service and cost run from the "
    "inception date; before the grant date cost is measured at the fair value at each reporting date (the "
    "assumptions row for that date, valued as if granted then) and from the grant date at the grant-date fair "
    "value, with the cumulative catch-up in the period of the grant date (ASC 718-10-30-25; ASC 718-10-35-6 and "
    "55-108 to 55-109, IFRS 2 IG4: from memory).")


def expense_notes(policy, ledger=None) -> list[tuple[str, str]]:
    """Statements of the attribution and forfeiture rules applied under ``policy`` (and the ledger's features)."""
    rules = [("attribution", EXPENSE_RULES[policy.attribution]), ("forfeitures", EXPENSE_RULES[policy.forfeitures])]
    rules += [(k, EXPENSE_RULES[k]) for k in ("service", "cancel", "rounding", "forecast")]
    if ledger is not None:
        from grantval.attribution.inception import uses_inception

        if uses_inception(ledger):
            rules.append(("service inception", SERVICE_INCEPTION))
    return rules
