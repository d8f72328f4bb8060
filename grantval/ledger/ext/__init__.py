"""Ledger extensions of the award features (see :mod:`grantval.ledger.extensions`)."""
