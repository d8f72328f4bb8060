"""Measurement: the fair value of a ledger's awards at a date (grant date now).

:mod:`grantval.measurement.context` collects the valuation inputs as arrays,
each award kind (:mod:`grantval.awards`) values its grants, and
:mod:`grantval.measurement.fairvalue` assembles the fair-value table.
"""
