"""Use cases: one module per command, each reading, computing and writing through the layers below.

Nothing here knows the command line: functions take paths, dates and options as
Python values and raise :class:`~grantval.errors.GrantvalError` subclasses.
:mod:`grantval.api` re-exports them as the importable Python API.
"""
