"""Former module of the disclosure tables, kept so that existing imports work: see :mod:`grantval.reporting.disclosure`."""

from grantval.reporting.disclosure import Disclosure, compute_disclosure  # noqa: F401
