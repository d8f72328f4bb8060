"""Former module of the readers, kept so that existing imports work.

The readers now live by format: :mod:`grantval.io.tables` (raw tables),
:mod:`grantval.io.csv_read`, :mod:`grantval.io.xlsx.read`, :mod:`grantval.io.xlsx.safety`,
:mod:`grantval.io.ledger_files` and :mod:`grantval.io.limits`.
"""

from grantval.io.csv_read import read_csv_table
from grantval.io.ledger_files import read_ledger_files
from grantval.io.limits import MAX_FILE_BYTES, MAX_ROWS, MAX_UNZIPPED_BYTES
from grantval.io.tables import RawLedger, RawTable, normalise_header, sha256_of
from grantval.io.xlsx.read import read_xlsx
from grantval.io.xlsx.safety import SheetInfo, inspect_xlsx

__all__ = ["read_csv_table", "read_ledger_files", "MAX_FILE_BYTES", "MAX_ROWS", "MAX_UNZIPPED_BYTES", "RawLedger",
           "RawTable", "normalise_header", "sha256_of", "read_xlsx", "SheetInfo", "inspect_xlsx"]
