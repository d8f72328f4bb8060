"""Attribution: cost layers of each tranche turned into cumulative cost and expense by period.

- :mod:`grantval.attribution.layers`: a tranche's cost layers (grant-date fair value now;
  a modification's incremental value or a remeasured liability later), each with its own
  fair value and start of service;
- :mod:`grantval.attribution.inputs`: the arrays the engine works on, built from a ledger
  and its fair values;
- :mod:`grantval.attribution.engine`: cumulative cost at a date, vectorised over tranches
  and layers;
- :mod:`grantval.attribution.periods`: fiscal periods, cents, forecast.
"""
