"""All file input and output, split by format.

- :mod:`grantval.io.tables`: raw tables (cells with the row numbers a user sees);
- :mod:`grantval.io.csv_read`, :mod:`grantval.io.xlsx.read` and :mod:`grantval.io.ledger_files`
  read a CSV folder or an ``.xlsx`` workbook; :mod:`grantval.io.xlsx.safety` checks a workbook
  before it is parsed; :mod:`grantval.io.limits` holds the size limits;
- :mod:`grantval.io.csv` and :mod:`grantval.io.xlsx.write` write CSV files and workbooks
  (:mod:`grantval.io.xlsx.sheet` describes a sheet, :mod:`grantval.io.xlsx.bigsheet` writes
  long tables fast); :mod:`grantval.io.files` writes atomically and guards the inputs;
- :mod:`grantval.io.convert` turns a CSV ledger into a workbook and back;
- :mod:`grantval.io.handoff`: the files through which worker processes hand back large results
  (:mod:`grantval.workers`).
"""
