"""What-if scenarios: shifted assumptions applied to a valuation context and to the estimates.

- :mod:`grantval.scenarios.shifts`: one scenario's changes and where they apply;
- :mod:`grantval.scenarios.whatif`: parsing ``--vary``, grids, runs, sensitivity and tornado tables.
"""
