"""grantval: grant-date fair values and expense schedules for stock-based compensation.

The package is layered:

- :mod:`grantval.pricing` -- the pricing core, pure numpy/scipy on arrays;
- :mod:`grantval.ledger` -- reading and validating a grant ledger;
- :mod:`grantval.attribution` -- attribution and forfeiture rules, period schedules;
- :mod:`grantval.cli` -- the ``grantval`` command, thin over the Python API.
"""

__version__ = "0.1.0"

from grantval.errors import GrantvalError, InputError, LedgerError, UsageError  # noqa: E402

__all__ = ["__version__", "GrantvalError", "InputError", "LedgerError", "UsageError"]
