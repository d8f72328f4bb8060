"""The grant ledger: format, reading, typing, checks, tranches and events.

Use :func:`load_ledger` to get a checked :class:`Ledger`, or
:func:`read_ledger` to get every problem without raising.
"""

from grantval.ledger.load import load_ledger, read_ledger
from grantval.ledger.model import Ledger

__all__ = ["load_ledger", "read_ledger", "Ledger"]
