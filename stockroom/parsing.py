"""Strict parsing of raw request values (JSON bodies and form fields) into typed values.

Nothing here guesses: a number is a real JSON number or a plain decimal string; true/false, NaN,
infinities, a decimal comma and empty text are refused with a sentence saying what to write
instead. The one exception is the HTML forms' door (Parser(decimal_comma=True)), which reads a
decimal comma where it cannot be a thousands separator (form_decimal). A Parser collects every
FieldError of a request so one answer can name them all; field names are the request's own paths,
e.g. `replicates[2].mass_g` (see field_path).
"""

from __future__ import annotations

import datetime as dt
import math
import re
from collections.abc import Iterable, Mapping
from typing import Any

from stockroom.errors import FieldError, InvalidInput

# Optional sign, digits with at most one point (".5" and "5." allowed); no exponent, no grouping.
# Digits are 0-9 only: Python's int() and float() also read Arabic-Indic, Devanagari or full-width
# digits, which a person cannot tell apart on a label, so they are refused with a message.
_PLAIN_DECIMAL = re.compile(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)")
_DECIMAL_COMMA = re.compile(r"[+-]?(?:[0-9]+,[0-9]*|,[0-9]+)")
_PLAIN_INTEGER = re.compile(r"[+-]?[0-9]+")
_ISO_DATE = re.compile(r"[0-9]{4}-[0-9]{2}-[0-9]{2}")
_TRUE = {"true", "1", "yes", "on"}
_FALSE = {"false", "0", "no", "off"}

# ---- the bounds every request value is held to, whichever door it comes through

# The earliest date anyone may type: a department's register may go back decades (1970 leaves room
# for more than fifty years of records), and a year such as 0001 or 1899 would make a batch code
# (YYMM) that looks plausible but is not.
EARLIEST_DATE = dt.date(1970, 1, 1)
# The latest date at all (an expiry, a calibration due date): batch codes carry two-digit years.
LATEST_DATE = dt.date(2099, 12, 31)
# How far ahead a date may be where the future makes sense (a lab day looked up, a planned date).
FUTURE_DAYS = 366
# Whole numbers (ids, counts, page numbers): SQLite's integers stop at 2**63 - 1; nothing here
# comes near 2**53, the largest a JSON client's double holds exactly.
MAX_INTEGER = 2**53
# A number written as text: longer than this it is not a measurement but padding.
MAX_NUMBER_TEXT = 40
# One-line text: control characters (NUL, escape, form feed...) are never typed by a person; line
# breaks are allowed only in notes.
_CONTROL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f\ud800-\udfff]")
_LINE_BREAK = re.compile(r"[\r\n\u2028\u2029\x85]")
ASCII_DIGITS_RULE = "use the digits 0-9"


def non_ascii_digits(text: str) -> bool:
    """True when text holds a digit other than 0-9 (e.g. '٣', '２', '²')."""
    return any(ch.isdigit() and not "0" <= ch <= "9" for ch in text)


def text_problem(value: str, *, multiline: bool = False) -> str | None:
    """Why a piece of typed text cannot be kept, or None: control characters, or a line break in a one-line field."""
    if _CONTROL.search(value):
        return "must not contain control characters (such as NUL)"
    if not multiline and (_LINE_BREAK.search(value) or "\t" in value):
        return "must be on one line (line breaks are allowed only in notes)"
    return None


def date_problem(
    raw: Any, *, not_before: dt.date | None = None, not_after: dt.date | None = None
) -> tuple[dt.date | None, str | None]:
    """Read YYYY-MM-DD (digits 0-9) within [not_before, not_after] and the register's own bounds.

    raw: the typed value; not_before/not_after: the caller's bounds (None: EARLIEST_DATE and
    LATEST_DATE only). Returns (date, None) or (None, message).
    """
    if not isinstance(raw, str):
        return None, f"must be a date written as YYYY-MM-DD, not {_kind(raw)}"
    text = raw.strip()
    if non_ascii_digits(text):
        return None, f"{_quote(text)} is not a date: {ASCII_DIGITS_RULE}, as YYYY-MM-DD"
    if not _ISO_DATE.fullmatch(text):
        return None, f"{_quote(text)} is not a date; write it as YYYY-MM-DD"
    try:
        value = dt.date.fromisoformat(text)
    except ValueError:
        return None, f"{_quote(text)} is not a date on the calendar; write it as YYYY-MM-DD"
    low = max(EARLIEST_DATE, not_before) if not_before is not None else EARLIEST_DATE
    high = min(LATEST_DATE, not_after) if not_after is not None else LATEST_DATE
    if value < low:
        return None, f"cannot be earlier than {low.isoformat()}"
    if value > high:
        return None, f"cannot be later than {high.isoformat()}"
    return value, None


class _Missing:
    def __repr__(self) -> str:
        return "MISSING"


MISSING: Any = _Missing()


def field_path(*parts: str | int) -> str:
    """A request path as errors name it: field_path("replicates", 2, "mass_g") -> "replicates[2].mass_g".

    parts: keys (str) and list positions (int, 0-based). Returns the path text.
    """
    out = ""
    for p in parts:
        if isinstance(p, int):
            out += f"[{p}]"
        else:
            out += f".{p}" if out else p
    return out


def _num(x: float) -> str:
    """A limit for a sentence: 0.25, 40, 1e-06 (as short as it goes)."""
    return f"{x:g}"


def _with_unit(x: float, unit: str) -> str:
    return f"{_num(x)} {unit}" if unit else _num(x)


def range_rule(
    gt: float | None = None, ge: float | None = None, lt: float | None = None, le: float | None = None, unit: str = ""
) -> str | None:
    """The sentence naming a numeric range, e.g. "must be between 5 and 40 °C".

    gt/ge: lower bound, exclusive/inclusive; lt/le: upper bound; unit: appended to the numbers
    ("g", "mL", "°C"; "" for none). Returns the sentence, or None when no bound is given.
    """
    lower = ("greater than", gt) if gt is not None else ("at least", ge) if ge is not None else None
    upper = ("less than", lt) if lt is not None else ("at most", le) if le is not None else None
    if lower and upper:
        if ge is not None and le is not None:
            return f"must be between {_num(ge)} and {_with_unit(le, unit)}"
        return f"must be {lower[0]} {_with_unit(lower[1], unit)} and {upper[0]} {_with_unit(upper[1], unit)}"
    if lower:
        return f"must be {lower[0]} {_with_unit(lower[1], unit)}"
    if upper:
        return f"must be {upper[0]} {_with_unit(upper[1], unit)}"
    return None


def number_problem(raw: Any) -> tuple[float | None, str | None]:
    """Read one raw value as a finite float, or say why not.

    raw: a JSON value (int, float, str, ...) or a form string. Returns (value, None) or (None,
    message). Missing/empty is reported as "is required" by the caller, not here.
    """
    if isinstance(raw, bool):
        return None, f"must be a number, not {'true' if raw else 'false'}"
    if isinstance(raw, int):
        try:
            value = float(raw)
        except OverflowError:
            return None, "is too large to be a measurement"
        return value, None
    if isinstance(raw, float):
        if math.isnan(raw):
            return None, "must be a number (NaN is not one)"
        if math.isinf(raw):
            return None, "must be a finite number, not infinity"
        return raw, None
    if isinstance(raw, str):
        text = raw.strip()
        if len(text) > MAX_NUMBER_TEXT:
            return None, f"is too large to be a measurement (at most {MAX_NUMBER_TEXT} characters)"
        if non_ascii_digits(text):
            return None, f"must be a plain decimal number: {ASCII_DIGITS_RULE}"
        if _DECIMAL_COMMA.fullmatch(text):
            fixed = text.replace(",", ".")
            fixed = re.sub(r"^([+-]?)\.", r"\g<1>0.", fixed)
            return None, f"use a point, not a comma, for the decimal sign: write {fixed}"
        if "," in text:
            return None, "write the number without commas (no thousands separators), e.g. 1234.5"
        if _PLAIN_DECIMAL.fullmatch(text):
            value = float(text)
            if not math.isfinite(value):
                return None, "is too large to be a measurement"
            return value, None
        if text.lower().lstrip("+-") in {"nan", "inf", "infinity"}:
            return None, "must be a finite number"
        return None, f"must be a plain decimal number such as 0.25, not {_quote(text)}"
    return None, f"must be a number, not {_kind(raw)}"


_ONE_DECIMAL_COMMA = re.compile(r"([+-]?)([0-9]*),([0-9]+)")


def form_decimal(raw: Any) -> tuple[Any, str | None]:
    """A form's typed number with a decimal comma read as a point where that is unambiguous: (value, problem).

    The HTML forms' door only (the JSON API stays strict: a comma there is refused by number_problem).
    One comma and no point, with digits after it, is a decimal sign ("0,1012" -> "0.1012", "12,5" ->
    "12.5") unless it could be a thousands separator: a non-zero whole part followed by exactly three
    digits ("1,234" reads as 1.234 or as 1234), which is refused, as are two commas ("1,234,5") and a
    comma with a point ("1,234.5"). Anything else is returned as typed for number_problem to judge.
    """
    if not isinstance(raw, str) or "," not in raw:
        return raw, None
    text = raw.strip()
    if "." in text:
        return None, "mixes a comma and a point: write the number with one decimal sign and no thousands separators, e.g. 1234.5"
    if text.count(",") > 1:
        return None, "has more than one comma: write the number with one decimal sign and no thousands separators, e.g. 1234.5"
    m = _ONE_DECIMAL_COMMA.fullmatch(text)
    if m is None:
        return raw, None
    sign, whole, fraction = m.groups()
    if whole.lstrip("0") and len(fraction) == 3:
        return None, (
            f"{_quote(text)} could be {sign}{whole}.{fraction} or {sign}{whole}{fraction}: "
            f"write it with a point for the decimal sign (e.g. {sign}{whole}.{fraction}) and no thousands separator"
        )
    return f"{sign}{whole or '0'}.{fraction}", None


def _quote(text: str) -> str:
    return repr(text if len(text) <= 20 else text[:20] + "…")


def _kind(raw: Any) -> str:
    if raw is None:
        return "null"
    if isinstance(raw, list | tuple):
        return "a list"
    if isinstance(raw, Mapping):
        return "an object"
    return type(raw).__name__


def kind_of(raw: Any) -> str:
    """What a JSON value is, for a message: "null", "a number", "a list", "an object", "true or false"."""
    if isinstance(raw, bool):
        return "true or false"
    if isinstance(raw, int | float):
        return "a number"
    return _kind(raw)


def _absent(raw: Any) -> bool:
    return raw is MISSING or raw is None or (isinstance(raw, str) and raw.strip() == "")


class Parser:
    """Collects FieldErrors while reading one request; raise_if_errors() ends the reading."""

    def __init__(self, *, decimal_comma: bool = False) -> None:
        self.errors: list[FieldError] = []
        # True at the HTML forms' door: an unambiguous decimal comma is read (form_decimal); the
        # JSON API and the CSV sheet keep False and refuse every comma.
        self.decimal_comma = decimal_comma

    @property
    def ok(self) -> bool:
        """True while no error has been recorded."""
        return not self.errors

    def error(self, field: str, message: str) -> None:
        """Record that `field` broke a rule, in a sentence a person can act on."""
        self.errors.append(FieldError(field, message))

    def has_error(self, prefix: str) -> bool:
        """True when a recorded error names this field or one under it."""
        return any(e.field == prefix or e.field.startswith(prefix + ".") or e.field.startswith(prefix + "[") for e in self.errors)

    def raise_if_errors(self) -> None:
        """Raise InvalidInput with every error recorded so far (status 422)."""
        if self.errors:
            raise InvalidInput(list(self.errors))

    # ---- scalars

    def number(
        self,
        raw: Any,
        field: str,
        *,
        required: bool = True,
        gt: float | None = None,
        ge: float | None = None,
        lt: float | None = None,
        le: float | None = None,
        unit: str = "",
    ) -> float | None:
        """A finite number within the bounds, or None (missing and optional, or an error recorded).

        raw: the raw value (MISSING when the key is absent); field: its path; gt/ge/lt/le: bounds in
        `unit`; unit: named in the range message. Returns float or None.
        """
        if _absent(raw):
            if required:
                self.error(field, "is required")
            return None
        if self.decimal_comma:
            raw, problem = form_decimal(raw)
            if problem is not None:
                self.error(field, problem)
                return None
        value, problem = number_problem(raw)
        if problem is not None:
            self.error(field, problem)
            return None
        assert value is not None
        if (
            (gt is not None and not value > gt)
            or (ge is not None and not value >= ge)
            or (lt is not None and not value < lt)
            or (le is not None and not value <= le)
        ):
            self.error(field, range_rule(gt, ge, lt, le, unit) or "is out of range")
            return None
        return value

    def integer(self, raw: Any, field: str, *, required: bool = True, ge: int | None = None, le: int | None = None) -> int | None:
        """A whole number (JSON integer, integral float, or digits) within [ge, le], or None."""
        if _absent(raw):
            if required:
                self.error(field, "is required")
            return None
        if isinstance(raw, str):
            text = raw.strip()
            if non_ascii_digits(text):
                self.error(field, f"must be a whole number: {ASCII_DIGITS_RULE}")
                return None
            if not _PLAIN_INTEGER.fullmatch(text):
                self.error(field, "must be a whole number")
                return None
            if len(text.lstrip("+-")) > 16:
                self.error(field, "is too large")
                return None
            value = int(text)
        else:
            f, problem = number_problem(raw)
            if problem is not None:
                self.error(field, problem)
                return None
            assert f is not None
            if isinstance(raw, float) and not f.is_integer():
                self.error(field, "must be a whole number")
                return None
            if abs(f) > MAX_INTEGER:
                self.error(field, "is too large")
                return None
            value = int(raw)
        if abs(value) > MAX_INTEGER:
            self.error(field, "is too large")
            return None
        if (ge is not None and value < ge) or (le is not None and value > le):
            self.error(field, range_rule(ge=ge, le=le) or "is out of range")
            return None
        return value

    def boolean(self, raw: Any, field: str, default: bool | None = None) -> bool | None:
        """true/false (JSON) or a form's "true"/"false"/"on"/"off"/"1"/"0"; default when missing."""
        if _absent(raw):
            if default is None:
                self.error(field, "is required")
            return default
        if isinstance(raw, bool):
            return raw
        if isinstance(raw, str) and raw.strip().lower() in _TRUE | _FALSE:
            return raw.strip().lower() in _TRUE
        self.error(field, "must be true or false")
        return None

    def text(
        self, raw: Any, field: str, *, required: bool = True, max_length: int = 200, multiline: bool | None = None
    ) -> str | None:
        """A non-empty string (trimmed) of at most max_length characters, or None.

        multiline: line breaks allowed; None: only in notes (a field whose name ends in "notes").
        Control characters are refused everywhere.
        """
        if _absent(raw):
            if required:
                self.error(field, "is required")
            return None
        if not isinstance(raw, str):
            self.error(field, f"must be text, not {_kind(raw)}")
            return None
        value = raw.strip()
        if len(value) > max_length:
            self.error(field, f"must be at most {max_length} characters")
            return None
        if multiline is None:
            multiline = field.rsplit(".", 1)[-1].endswith("notes")
        problem = text_problem(value, multiline=multiline)
        if problem is not None:
            self.error(field, problem)
            return None
        return value

    def date(
        self,
        raw: Any,
        field: str,
        *,
        required: bool = True,
        not_before: dt.date | None = None,
        not_after: dt.date | None = None,
    ) -> dt.date | None:
        """A YYYY-MM-DD date within the bounds (and EARLIEST_DATE..LATEST_DATE), or None."""
        if _absent(raw):
            if required:
                self.error(field, "is required")
            return None
        value, problem = date_problem(raw, not_before=not_before, not_after=not_after)
        if problem is not None:
            self.error(field, problem)
            return None
        return value

    def choice(self, raw: Any, field: str, choices: Iterable[str], default: str | None = None) -> str | None:
        """One of `choices` (exact text); default when missing, else an error naming the choices."""
        options = tuple(choices)
        if _absent(raw):
            if default is None:
                self.error(field, "is required")
            return default
        if isinstance(raw, str) and raw.strip() in options:
            return raw.strip()
        self.error(field, "must be one of " + ", ".join(repr(o) for o in options))
        return None

    # ---- containers

    def mapping(self, raw: Any, field: str, *, required: bool = True) -> dict[str, Any] | None:
        """A JSON object, or None (missing and optional, or an error recorded)."""
        if raw is MISSING or raw is None:
            if required:
                self.error(field, "is required")
            return None
        if not isinstance(raw, dict):
            self.error(field, f"must be an object, not {_kind(raw)}")
            return None
        return raw

    def array(
        self, raw: Any, field: str, *, required: bool = True, min_items: int = 0, max_items: int | None = None
    ) -> list[Any] | None:
        """A JSON list of min_items to max_items entries, or None."""
        if raw is MISSING or raw is None:
            if required:
                self.error(field, "is required")
            return None
        if not isinstance(raw, list):
            self.error(field, f"must be a list, not {_kind(raw)}")
            return None
        if len(raw) < min_items:
            self.error(field, f"must have at least {min_items} entr{'y' if min_items == 1 else 'ies'}")
            return None
        if max_items is not None and len(raw) > max_items:
            self.error(field, f"must have at most {max_items} entries (got {len(raw)})")
            return None
        return raw

    def known_keys(self, data: Mapping[str, Any], allowed: Iterable[str], prefix: str = "") -> None:
        """Record an error for each key of data not in allowed (a typo must not be ignored silently)."""
        allowed_set = set(allowed)
        for key in data:
            if key not in allowed_set:
                name = field_path(prefix, key) if prefix else str(key)
                self.error(name, "is not a field of this request")
