"""One lab session's input at every door (the schedule form, the schedule CSV import, the JSON API).

A lab session is a date, a destination (course, section, room), the titrant and its nominal molarity,
and the volume the session needs. `parse_session` reads it whichever way it comes and `read_schedule`
reads a schedule CSV into the same values, so a typed session, an imported row and a JSON body can
never be judged differently; LIMITS is the one table of limits they share.

Schedule CSV, one row per session, header row required, columns in any order, unknown columns refused,
`#` lines are comments:

    session_on,course,section,room,titrant,nominal_molarity,volume_needed_l,notes

Dates YYYY-MM-DD, molarity in mol/L, volume in L, decimal point only.
"""

from __future__ import annotations

import csv
import datetime as dt
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from stockroom import chemistry
from stockroom.errors import FieldError, StockroomError
from stockroom.parsing import MISSING, Parser
from stockroom.stock import Destination


@dataclass(frozen=True)
class Limits:
    """Every limit a lab session's input is held to, at every door."""

    # How far back a session may be entered (a term's record typed in late) and ahead (next year's
    # timetable), days from today.
    past_days: int = 366
    future_days: int = 366
    # Volume one session needs, L: more than a thousandth of a litre (1 mL) and at most 50 L (two full
    # 20 L carboys; a larger figure is a unit slip, mL typed for L; common practice).
    min_volume_l: float = 0.001
    max_volume_l: float = 50.0
    # Nominal molarity, mol/L: above 0 and at most 6 (the strongest titrant the catalogue's policies
    # name is 1 mol/L; 6 leaves room and still catches a slip such as 100).
    max_nominal_molarity: float = 6.0
    # Text lengths (characters).
    max_course: int = 40
    max_section: int = 20
    max_room: int = 40
    max_notes: int = 500


LIMITS = Limits()

# The request's keys, in the order forms and the CSV show them.
KEYS = ("session_on", "course", "section", "room", "titrant", "nominal_molarity", "volume_needed_l", "notes")
REQUIRED_COLUMNS = ("session_on", "course", "titrant", "nominal_molarity", "volume_needed_l")
LABELS = {
    "session_on": "Date",
    "course": "Course",
    "section": "Section",
    "room": "Room",
    "titrant": "Titrant",
    "nominal_molarity": "Nominal molarity",
    "volume_needed_l": "Volume needed",
    "notes": "Notes",
}


def label(field_name: str) -> str:
    """How a person reads a request key (the form's label); an unknown key reads as it is."""
    return LABELS.get(field_name, field_name)


@dataclass(frozen=True)
class SessionInput:
    """One lab session as every door delivers it: date, destination, titrant key, mol/L, L, notes."""

    session_on: dt.date
    course: str
    section: str
    room: str
    reagent: str
    nominal_molarity: float
    volume_needed_l: float
    notes: str = ""

    def row(self) -> dict[str, Any]:
        """The values as the lab_sessions table stores them (without who and when)."""
        return {
            "session_on": self.session_on.isoformat(),
            "course": self.course,
            "section": self.section,
            "room": self.room,
            "reagent": self.reagent,
            "nominal_molarity": self.nominal_molarity,
            "volume_needed_l": self.volume_needed_l,
            "notes": self.notes,
        }


def read_titrant(p: Parser, raw: Any, name: str, *, required: bool = True) -> str | None:
    """A titrant's catalogue key from its typed name (case as the catalogue reads it), or None with an error on `name`."""
    text = p.text(raw, name, required=required, max_length=80)
    if text is None:
        return None
    try:
        return chemistry.titrant(text).key
    except StockroomError:
        known = ", ".join(t.key for t in chemistry.list_titrants())
        p.error(name, f"{text!r} is not a titrant the catalogue holds; known: {known}")
        return None


def read_session(p: Parser, data: Mapping[str, Any], today: dt.date, prefix: str = "") -> SessionInput | None:
    """Read one session into `p` (errors recorded under prefix + key); the SessionInput, or None on any error."""

    def name(key: str) -> str:
        return f"{prefix}{key}"

    before = len(p.errors)
    p.known_keys(data, KEYS, prefix.rstrip("."))
    on = p.date(
        data.get("session_on", MISSING),
        name("session_on"),
        not_before=today - dt.timedelta(days=LIMITS.past_days),
        not_after=today + dt.timedelta(days=LIMITS.future_days),
    )
    course = p.text(data.get("course", MISSING), name("course"), max_length=LIMITS.max_course)
    section = p.text(data.get("section", MISSING), name("section"), required=False, max_length=LIMITS.max_section)
    room = p.text(data.get("room", MISSING), name("room"), required=False, max_length=LIMITS.max_room)
    reagent = read_titrant(p, data.get("titrant", MISSING), name("titrant"))
    nominal = p.number(
        data.get("nominal_molarity", MISSING), name("nominal_molarity"), gt=0, le=LIMITS.max_nominal_molarity, unit="mol/L"
    )
    volume = p.number(
        data.get("volume_needed_l", MISSING),
        name("volume_needed_l"),
        ge=LIMITS.min_volume_l,
        le=LIMITS.max_volume_l,
        unit="L",
    )
    notes = p.text(data.get("notes", MISSING), name("notes"), required=False, max_length=LIMITS.max_notes, multiline=True)
    if len(p.errors) > before:
        return None
    assert on is not None and course is not None and reagent is not None and nominal is not None and volume is not None
    return SessionInput(on, course, section or "", room or "", reagent, nominal, volume, notes or "")


def parse_session(data: Any, *, today: dt.date, decimal_comma: bool = False) -> SessionInput:
    """One session from a form or JSON body; InvalidInput naming every field that broke a rule.

    data: a mapping of the request keys (KEYS); today: the lab's date (the window of allowed dates);
    decimal_comma: True at the HTML form's door only.
    """
    p = Parser(decimal_comma=decimal_comma)
    if not isinstance(data, Mapping):
        p.error("body", "must be an object of the session's fields")
        p.raise_if_errors()
    session = read_session(p, data, today)
    p.raise_if_errors()
    assert session is not None
    return session


# ---------------------------------------------------------------- the schedule CSV


@dataclass(frozen=True)
class Problem:
    """One thing wrong with a schedule file: its line (0: the file as a whole), the column's label, the rule."""

    line: int
    field: str
    message: str

    def sentence(self) -> str:
        where = f"line {self.line}" if self.line else "the file"
        return f"{where}, {self.field}: {self.message}" if self.field else f"{where}: {self.message}"


@dataclass
class Schedule:
    """A schedule file read: the sessions by line and every problem; rows count only when there is none."""

    sessions: list[tuple[int, SessionInput]] = field(default_factory=list)
    problems: list[Problem] = field(default_factory=list)

    @property
    def ok(self) -> bool:
        return not self.problems and bool(self.sessions)


MAX_LINE_CHARS = 2000


def read_schedule(text: str, *, max_rows: int, today: dt.date) -> Schedule:
    """Read a schedule CSV's text; every bad row is reported by line and field, and the good ones are kept.

    text: the file decoded as UTF-8; max_rows: most data rows accepted (CSV_MAX_ROWS); today: the
    lab's date. Nothing is stored here: the caller stores the sessions only when `ok`.
    """
    out = Schedule()
    if text.startswith("\ufeff"):
        text = text[1:]
    lines = [(i, line) for i, line in enumerate(text.splitlines(), start=1) if line.strip() and not line.lstrip().startswith("#")]
    if not lines:
        out.problems.append(Problem(0, "", "the file has no header row and no sessions"))
        return out
    long_line = next((n for n, line in lines if len(line) > MAX_LINE_CHARS), None)
    if long_line is not None:
        out.problems.append(Problem(long_line, "", f"is longer than {MAX_LINE_CHARS} characters"))
        return out
    # Each line is read on its own: a session is one line, so a quote left open cannot swallow the
    # lines after it (the csv module would join them into one cell).
    rows: list[list[str]] = []
    for line_no, line in lines:
        try:
            rows.append(next(csv.reader([line], strict=True), []))
        except csv.Error as exc:
            out.problems.append(Problem(line_no, "", f"cannot be read as CSV ({exc}); a session is one line"))
            rows.append([])
    header_line = lines[0][0]
    if out.problems and out.problems[0].line == header_line:
        return out
    header = [h.strip().lower() for h in rows[0]]
    unknown = [h for h in header if h not in KEYS]
    if unknown:
        out.problems.append(
            Problem(
                header_line,
                "",
                "unknown column(s) " + ", ".join(repr(h) for h in unknown) + "; the columns are " + ", ".join(KEYS),
            )
        )
    if len(set(header)) != len(header):
        out.problems.append(Problem(header_line, "", "a column name appears twice in the header"))
    missing = [c for c in REQUIRED_COLUMNS if c not in header]
    if missing:
        out.problems.append(Problem(header_line, "", "the header needs the column(s) " + ", ".join(missing)))
    if any(p.line == header_line for p in out.problems):
        return out
    data = list(zip([n for n, _ in lines[1:]], rows[1:], strict=True))
    if not data:
        out.problems.append(Problem(0, "", "the file has a header but no sessions"))
        return out
    if len(data) > max_rows:
        out.problems.append(Problem(0, "", f"the file has {len(data)} sessions; at most {max_rows} are accepted"))
        return out
    seen: dict[tuple[Any, ...], int] = {}
    for line_no, cells in data:
        if not cells:  # could not be read: reported above
            continue
        if len(cells) != len(header):
            out.problems.append(Problem(line_no, "", f"has {len(cells)} cells; the header has {len(header)}"))
            continue
        p = Parser()
        values = {h: c for h, c in zip(header, cells, strict=True) if c.strip() or h in REQUIRED_COLUMNS}
        session = read_session(p, values, today)
        out.problems.extend(_row_problems(line_no, p.errors))
        if session is None:
            continue
        key = (session.session_on, session.course.lower(), session.section.lower(), session.reagent, session.nominal_molarity)
        if key in seen:
            out.problems.append(Problem(line_no, "", f"repeats the session on line {seen[key]}"))
            continue
        seen[key] = line_no
        out.sessions.append((line_no, session))
    return out


def _row_problems(line_no: int, errors: Sequence[FieldError]) -> list[Problem]:
    return [Problem(line_no, label(e.field), e.message) for e in errors]


# ---------------------------------------------------------------- a destination in a query

DESTINATION_RULE = 'write the course, then "/" and the section if there is one, e.g. "CHM 110/B" or "CHM 110"'


def read_destination(p: Parser, raw: Any, name: str = "destination") -> tuple[str, str] | None:
    """(course, section) from a query's destination, "CHM 110/B" (section "" for "CHM 110"); None if absent or bad.

    The course and section are compared without regard to case; an empty section means every section
    of the course. Errors are recorded in `p` under `name`.
    """
    text = p.text(raw, name, required=False, max_length=LIMITS.max_course + 1 + LIMITS.max_section)
    if text is None:
        return None
    if text.count("/") > 1:
        p.error(name, f"has more than one '/': {DESTINATION_RULE}")
        return None
    course, _, section = (part.strip() for part in text.partition("/"))
    if not course:
        p.error(name, f"names no course: {DESTINATION_RULE}")
        return None
    if len(course) > LIMITS.max_course:
        p.error(name, f"the course must be at most {LIMITS.max_course} characters")
        return None
    if len(section) > LIMITS.max_section:
        p.error(name, f"the section must be at most {LIMITS.max_section} characters")
        return None
    return course, section


def destination_text(course: str, section: str = "", room: str = "") -> str:
    """A destination as a person reads it: "CHM 110 · section B · room 214" (parts left out when empty)."""
    return Destination(room.strip(), course.strip(), section.strip()).words()
