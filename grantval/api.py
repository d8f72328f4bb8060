"""The importable Python API behind the ``grantval`` commands.

Each function takes paths and options, returns result objects, and raises
:class:`~grantval.errors.GrantvalError` subclasses for problems the user can
fix.  The use cases live in :mod:`grantval.runs`, one module per command; this
module gathers them under one name.
"""

from grantval.runs.assumptions import assumptions, write_assumptions
from grantval.runs.assumptions import peer_tables, write_peer_tables  # noqa: F401
from grantval.runs.check import CheckReport, check
from grantval.runs.close import close, export_register, register_closes, reopen, verify_register  # noqa: F401
from grantval.runs.common import reconcile
from grantval.runs.disclose import DisclosureRun, disclose, write_disclosure
from grantval.runs.dilution import DilutionRun, dilution, write_dilution  # noqa: F401
from grantval.runs.expense import ExpenseOutputs, ExpenseRun, expense, write_expense
from grantval.runs.value import ValueRun, value, write_fair_values
from grantval.runs.whatif import whatif, write_whatif

__all__ = ["assumptions", "write_assumptions", "CheckReport", "check", "reconcile", "DisclosureRun", "disclose",
           "write_disclosure", "ExpenseOutputs", "ExpenseRun", "expense", "write_expense", "ValueRun", "value",
           "write_fair_values", "whatif", "write_whatif"]
