"""Spreadsheet cell addressing shared by the workbook writers."""


def col_letter(n: int) -> str:
    """Excel column letters of 1-based column ``n`` (1 -> A, 27 -> AA)."""
    s = ""
    while n:
        n, r = divmod(n - 1, 26)
        s = chr(65 + r) + s
    return s
