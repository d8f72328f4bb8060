"""All file input and output of grantval lives in this package.

- :mod:`grantval.io.read` turns a CSV folder or an ``.xlsx`` workbook into raw tables;
- :mod:`grantval.io.write` writes CSV files and workbooks atomically.
"""
