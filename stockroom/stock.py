"""Where a batch's solution goes: dispensings into containers, their codes, expiry and status, and the volume rules.

Pure: dates, litres and stockroom.policy's status reports in, frozen dataclasses and sentences out. A
container's status is never stored; it follows its parent batch's status (policy.status_on, not derived
again here) and its own expiry and disposal, so "what state was bottle C03 in on day D" is one call.

    d = read_dispensing(form_or_json, today=..., decimal_comma=...)   # the one reader of every door
    expires = container_expiry(release.expires_on, d.filled_on, policy.container_shelf_life_days)
    state = container_state(batch_report, filled_on, expires, disposed_on, on)
"""

from __future__ import annotations

import datetime as dt
import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from enum import StrEnum
from typing import Any

from stockroom.errors import Conflict, FieldError, InvalidInput
from stockroom.parsing import MISSING, Parser
from stockroom.policy import ReleaseFact, Status, StatusReport

KINDS: tuple[str, ...] = ("bench bottle", "burette reservoir", "carboy")
LOSS_KINDS: tuple[str, ...] = ("loss", "disposal")
# The largest single dispensing and the largest batch alike: the register's own bound on a batch's
# volume (web.intake.MAX_VOLUME_L, 50 L); a larger figure is a slip of units (mL typed as L).
MAX_VOLUME_L = 50.0
# The smallest volume worth a record: 1 mL (a burette reservoir top-up); below it is a typing slip.
MIN_VOLUME_L = 0.001
MAX_PLACE_TEXT = 40  # room, course, section: what fits on a label line
MAX_REASON = 500
MAX_NOTES = 500
# Litres treated as equal when a dispensing would take a batch exactly to zero (float sums of
# decimal litres, e.g. 0.1 + 0.2, differ from 0.3 by about 1e-16).
VOLUME_EPS_L = 1e-9

# The words a person reads for each field, on the form and in every message naming a field.
LABELS: dict[str, str] = {
    "volume_l": "Volume dispensed",
    "dispensed_on": "Filled on",
    "container": "Container",
    "room": "Room",
    "course": "Course",
    "section": "Section",
    "destination": "Destination",
    "destination.room": "Room",
    "destination.course": "Course",
    "destination.section": "Section",
    "notes": "Notes",
    "kind": "Kind",
    "occurred_on": "Date",
    "disposed_on": "Taken out of use on",
    "reason": "Reason",
}
DISPENSING_KEYS = ("volume_l", "dispensed_on", "container", "destination", "room", "course", "section", "notes")
_CODE = re.compile(r"^(?P<batch>.+)-C(?P<n>[0-9]{2,})$")


@dataclass(frozen=True)
class Destination:
    """Where a container went: room, course and section (each may be empty but the course)."""

    room: str = ""
    course: str = ""
    section: str = ""

    @classmethod
    def of(cls, row: Mapping[str, Any]) -> Destination:
        """The destination a row records in its room, course and section columns (missing or NULL: empty)."""
        return cls(row.get("room") or "", row.get("course") or "", row.get("section") or "")

    def words(self) -> str:
        """As a person reads it: 'CHM 110 · section B · room 214' (empty parts left out)."""
        parts = [self.course] if self.course else []
        if self.section:
            parts.append(f"section {self.section}")
        if self.room:
            parts.append(f"room {self.room}")
        return " · ".join(parts) if parts else "no destination recorded"


@dataclass(frozen=True)
class Dispensing:
    """One dispensing as read from a request: litres into a container of a kind, on a date, to a destination."""

    volume_l: float
    filled_on: dt.date
    kind: str
    destination: Destination
    notes: str = ""


@dataclass(frozen=True)
class VolumeChange:
    """A loss or disposal of a batch's own remaining volume: kind ('loss' or 'disposal'), litres, date, reason."""

    kind: str
    volume_l: float
    occurred_on: dt.date
    reason: str


def label(field: str) -> str:
    """The words a person reads for a dispensing field ('volume_l' -> 'Volume dispensed')."""
    return LABELS.get(field, field.replace("_", " ").capitalize())


# ---------------------------------------------------------------------------------------------- reading


def _place(p: Parser, raw: Any, field: str, *, required: bool) -> str:
    return p.text(raw, field, required=required, max_length=MAX_PLACE_TEXT) or ""


def read_dispensing(data: Mapping[str, Any], *, today: dt.date, decimal_comma: bool = False) -> Dispensing:
    """Read a dispensing from a form's fields or a JSON body; InvalidInput naming every field broken.

    data: volume_l (L), dispensed_on (YYYY-MM-DD, not after today), container (a kind of KINDS),
    and the destination either as flat room/course/section fields (the form) or as `destination`, an
    object {room, course, section} or a plain string taken as the course (JSON). The course is required.
    today: the lab's date; decimal_comma: the HTML form's door (an unambiguous 0,5 reads as 0.5).
    """
    p = Parser(decimal_comma=decimal_comma)
    p.known_keys(data, DISPENSING_KEYS)
    volume = p.number(data.get("volume_l", MISSING), "volume_l", ge=MIN_VOLUME_L, le=MAX_VOLUME_L, unit="L")
    filled_on = p.date(data.get("dispensed_on", MISSING), "dispensed_on", not_after=today)
    kind = p.choice(data.get("container", MISSING), "container", KINDS)
    raw_dest = data.get("destination", MISSING)
    if raw_dest is not MISSING and raw_dest is not None:
        if any(k in data for k in ("room", "course", "section")):
            p.error("destination", "give the destination once: either as destination or as room, course and section")
            dest = Destination()
        elif isinstance(raw_dest, str):
            dest = Destination(course=_place(p, raw_dest, "destination", required=True))
        else:
            found = p.mapping(raw_dest, "destination")
            if found is None:
                dest = Destination()
            else:
                p.known_keys(found, ("room", "course", "section"), prefix="destination")
                dest = Destination(
                    room=_place(p, found.get("room", MISSING), "destination.room", required=False),
                    course=_place(p, found.get("course", MISSING), "destination.course", required=True),
                    section=_place(p, found.get("section", MISSING), "destination.section", required=False),
                )
    else:
        dest = Destination(
            room=_place(p, data.get("room", MISSING), "room", required=False),
            course=_place(p, data.get("course", MISSING), "course", required=True),
            section=_place(p, data.get("section", MISSING), "section", required=False),
        )
    notes = p.text(data.get("notes", MISSING), "notes", required=False, max_length=MAX_NOTES, multiline=True) or ""
    p.raise_if_errors()
    assert volume is not None and filled_on is not None and kind is not None
    return Dispensing(volume, filled_on, kind, dest, notes)


def read_volume_change(data: Mapping[str, Any], *, today: dt.date, decimal_comma: bool = False) -> VolumeChange:
    """Read a loss or disposal of batch volume: kind, volume_l (L), occurred_on (not after today), reason (required)."""
    p = Parser(decimal_comma=decimal_comma)
    p.known_keys(data, ("kind", "volume_l", "occurred_on", "reason"))
    kind = p.choice(data.get("kind", MISSING), "kind", LOSS_KINDS)
    volume = p.number(data.get("volume_l", MISSING), "volume_l", ge=MIN_VOLUME_L, le=MAX_VOLUME_L, unit="L")
    occurred_on = p.date(data.get("occurred_on", MISSING), "occurred_on", not_after=today)
    reason = p.text(data.get("reason", MISSING), "reason", max_length=MAX_REASON)
    p.raise_if_errors()
    assert kind is not None and volume is not None and occurred_on is not None and reason is not None
    return VolumeChange(kind, volume, occurred_on, reason)


# ---------------------------------------------------------------------------------------------- rules


def container_expiry(batch_expires_on: dt.date, filled_on: dt.date, shelf_life_days: int | None) -> dt.date:
    """A container's expiry: the batch's expiry in force on the fill date, or sooner when the policy gives a
    container shelf life (days counted from the fill date; None: the batch's own)."""
    if shelf_life_days is None:
        return batch_expires_on
    return min(batch_expires_on, filled_on + dt.timedelta(days=shelf_life_days))


def container_code(batch_code: str, sequence: int) -> str:
    """A container's readable code: the batch code, '-C' and its sequence within the batch (2 digits at least)."""
    if sequence < 1:
        raise ValueError("a container's sequence starts at 1")
    return f"{batch_code}-C{sequence:02d}"


def next_sequence(batch_code: str, existing_codes: Iterable[str]) -> int:
    """The sequence of the next container of a batch: one past the highest among its existing codes."""
    highest = 0
    for code in existing_codes:
        m = _CODE.match(code)
        if m and m.group("batch") == batch_code:
            highest = max(highest, int(m.group("n")))
    return highest + 1


# A batch's state a dispensing may be drawn in. Re-check due still has a certified value in force (the
# re-check is late, the value is not doubted); drifting and under review are on hold (common practice).
_DISPENSABLE = (Status.IN_SERVICE, Status.RECHECK_DUE)


def dispensing_refusal(report: StatusReport, in_force: ReleaseFact | None) -> str | None:
    """Why solution may not be drawn from a batch on the day of `report`, or None when it may.

    report: policy.status_on(facts, fill date); in_force: policy.release_in_force on the same date.
    """
    day = report.on.isoformat()
    if in_force is None or report.status not in _DISPENSABLE:
        if report.status is Status.AWAITING:
            return f"the batch was not released by {day}: nothing may be dispensed before its value is certified"
        return f"the batch is {report.status.label.lower()} on {day} ({'; '.join(report.reasons) or 'no value in force'})"
    if report.under_review is not None:
        return f"the batch is on hold on {day}: {report.under_review.message}"
    return None


def check_dispensing(report: StatusReport, in_force: ReleaseFact | None, volume_l: float, remaining_l: float) -> None:
    """Raise Conflict when the batch may not be drawn from that day, InvalidInput when more than remains.

    volume_l: the volume asked (L); remaining_l: what the batch has left after every recorded dispensing and
    loss (L). Says the field by its label.
    """
    why = dispensing_refusal(report, in_force)
    if why is not None:
        raise Conflict(f"Nothing dispensed: {why}")
    check_volume("volume_l", volume_l, remaining_l)


def check_volume(field: str, volume_l: float, remaining_l: float) -> None:
    """InvalidInput on `field` when volume_l (L) is more than remaining_l (L) by more than VOLUME_EPS_L."""
    if volume_l > remaining_l + VOLUME_EPS_L:
        raise InvalidInput(
            [
                FieldError(
                    field,
                    f"{volume_l:g} L is more than remains in the batch ({max(remaining_l, 0.0):.3f} L left)",
                )
            ]
        )


def check_disposal_date(filled_on: dt.date, disposed_on: dt.date) -> None:
    """InvalidInput when a container is said to be taken out of use before it was filled."""
    if disposed_on < filled_on:
        raise InvalidInput(
            [
                FieldError(
                    "disposed_on", f"{label('disposed_on')} cannot be before the container was filled ({filled_on.isoformat()})"
                )
            ]
        )


# ---------------------------------------------------------------------------------------------- status


class ContainerStatus(StrEnum):
    """The states a container can be in on a date."""

    NOT_YET_FILLED = "not_yet_filled"
    IN_USE = "in_use"
    ON_HOLD = "on_hold"
    EXPIRED = "expired"
    WITHDRAWN = "withdrawn"
    REGISTERED_IN_ERROR = "registered_in_error"
    DISPOSED = "disposed"

    @property
    def label(self) -> str:
        return _STATUS_LABELS[self]

    @property
    def usable(self) -> bool:
        """Whether the solution in it may be used that day."""
        return self is ContainerStatus.IN_USE


_STATUS_LABELS = {
    ContainerStatus.NOT_YET_FILLED: "Not yet filled",
    ContainerStatus.IN_USE: "In use",
    ContainerStatus.ON_HOLD: "On hold",
    ContainerStatus.EXPIRED: "Expired",
    ContainerStatus.WITHDRAWN: "Withdrawn",
    ContainerStatus.REGISTERED_IN_ERROR: "Registered in error",
    ContainerStatus.DISPOSED: "Taken out of use",
}


@dataclass(frozen=True)
class ContainerState:
    """A container's status on a date and why, in words."""

    status: ContainerStatus
    on: dt.date
    reason: str


def container_state(
    batch: StatusReport, filled_on: dt.date, expires_on: dt.date, disposed_on: dt.date | None, on: dt.date
) -> ContainerState:
    """A container's status on `on`: its own fill, disposal and expiry, then its parent batch's status that day.

    batch: policy.status_on(parent facts, on); dates as dates. Precedence: not yet filled; taken out of
    use; the batch registered in error or withdrawn (a recall of the solution reaches every bottle);
    the container's own expiry (never later than the batch's); the batch expired, drifting, under review
    or without a value in force (on hold); else in use.
    """
    if on < filled_on:
        return ContainerState(ContainerStatus.NOT_YET_FILLED, on, f"filled on {filled_on.isoformat()}")
    if disposed_on is not None and disposed_on <= on:
        return ContainerState(ContainerStatus.DISPOSED, on, f"taken out of use on {disposed_on.isoformat()}")
    if batch.status is Status.REGISTERED_IN_ERROR:
        return ContainerState(
            ContainerStatus.REGISTERED_IN_ERROR,
            on,
            "its batch was " + (batch.reasons[0] if batch.reasons else "registered in error"),
        )
    if batch.status is Status.WITHDRAWN:
        return ContainerState(
            ContainerStatus.WITHDRAWN, on, "its batch was " + (batch.reasons[0] if batch.reasons else "withdrawn")
        )
    if on > expires_on:
        return ContainerState(ContainerStatus.EXPIRED, on, f"expired on {expires_on.isoformat()}")
    if batch.status is Status.EXPIRED:
        return ContainerState(ContainerStatus.EXPIRED, on, "its batch " + (batch.reasons[0] if batch.reasons else "expired"))
    if batch.status is Status.DRIFTING:
        return ContainerState(ContainerStatus.ON_HOLD, on, "its batch is drifting: " + "; ".join(batch.reasons))
    if batch.under_review is not None:
        return ContainerState(ContainerStatus.ON_HOLD, on, "its batch is " + batch.under_review.message)
    if batch.status is Status.AWAITING or batch.release is None:
        return ContainerState(ContainerStatus.ON_HOLD, on, "its batch has no certified value in force")
    note = f"use by {expires_on.isoformat()}"
    if batch.status is Status.RECHECK_DUE:
        note += "; its batch's re-check is due"
    return ContainerState(ContainerStatus.IN_USE, on, note)
