"""CSV text that a spreadsheet opens as data only: every text cell quoted, formula-looking text defused.

Text that people type (exclusion and decision reasons, analyst names, class groups and notes) comes
back in the exports. A spreadsheet reads a cell that starts with `=`, `+`, `-` or `@` (and, in some
programs, a tab or carriage return before one of them) as a formula, which can fetch URLs or run
commands. The OWASP "CSV Injection" advice is followed: such a cell gets a leading apostrophe, which
spreadsheets show as text, and every cell is quoted so a separator inside it cannot start a new cell.

Numbers stay numbers: an int or float value, or text that is exactly a plain decimal number
("0.100000", "-0.312", "1e-05"), is written bare. A negative number is a number, not a formula.

Comment lines (`# key: value`) are one quoted cell each, whitespace folded to single spaces, so a comma
in them cannot push typed text into a cell of its own.

Pure: no Flask, no database.
"""

from __future__ import annotations

import io
import math
import re
from collections.abc import Iterable
from typing import Any

# The OWASP list (=, +, -, @, tab, carriage return), plus line feed and the full-width forms of the
# four signs, which some spreadsheets in East Asian locales also take as the start of a formula.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r", "\n", "\uff1d", "\uff0b", "\uff0d", "\uff20")

_PLAIN_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?\Z")


def is_number(value: Any) -> bool:
    """Whether a value is written as a bare number: a finite int or float, or a plain decimal text."""
    if isinstance(value, bool):
        return False
    if isinstance(value, int):
        return True
    if isinstance(value, float):
        return math.isfinite(value)
    return isinstance(value, str) and _PLAIN_NUMBER.match(value) is not None


def defuse(text: str) -> str:
    """Text with a leading apostrophe when a spreadsheet would read it as a formula (else unchanged)."""
    if text.startswith(FORMULA_STARTS) and not is_number(text):
        return "'" + text
    return text


def cell(value: Any) -> str:
    """One cell as CSV text: a bare number, or quoted text (None is an empty quoted cell)."""
    if is_number(value):
        return value if isinstance(value, str) else repr(value) if isinstance(value, float) else str(value)
    text = "" if value is None else str(value)
    return '"' + defuse(text).replace('"', '""') + '"'


def line(values: Iterable[Any]) -> str:
    """One CSV line (with its line feed) from a row of values."""
    return ",".join(cell(v) for v in values) + "\n"


def comment(text: str) -> str:
    """A `# ...` comment line as one quoted cell (with its line feed), whitespace folded."""
    folded = " ".join(str(text).split())
    return '"' + ("# " + folded).replace('"', '""') + '"\n'


class SafeCsv:
    """An export being written: comment lines and rows, read back with `text()`."""

    def __init__(self) -> None:
        self._out = io.StringIO()

    def comment(self, text: str) -> None:
        """Append a `# ...` comment line."""
        self._out.write(comment(text))

    def row(self, values: Iterable[Any]) -> None:
        """Append one row of cells."""
        self._out.write(line(values))

    def text(self) -> str:
        """The CSV text so far."""
        return self._out.getvalue()
