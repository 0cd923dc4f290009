"""Spreadsheet cell references: column letters and 0-based column indexes."""


def column_letter(index: int) -> str:
    """Spreadsheet column letter for a 0-based column index (0 → A, 27 → AB)."""
    letters = ""
    n = index + 1
    while n:
        n, rem = divmod(n - 1, 26)
        letters = chr(65 + rem) + letters
    return letters


def column_index(letters: str) -> int:
    """0-based column index of spreadsheet column letters ('A' -> 0, 'AB' -> 27, 'XFD' -> 16383)."""
    n = 0
    for ch in letters:
        n = n * 26 + ord(ch) - 64
    return n - 1
