"""The few specific exceptions the core raises; the web edge turns each into one 4xx answer."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class FieldError:
    """One rule one field broke: the field's name and a sentence a person can act on."""

    field: str
    message: str

    def as_dict(self) -> dict[str, str]:
        return {"field": self.field, "message": self.message}


class StockroomError(Exception):
    """Base of every error stockroom raises on purpose; carries the HTTP status it maps to."""

    status = 400

    def __init__(self, message: str):
        super().__init__(message)
        self.message = message


class InvalidInput(StockroomError):
    """Input broke one or more rules; each FieldError names the field and the rule."""

    status = 422

    def __init__(self, errors: list[FieldError] | FieldError | str, field: str | None = None):
        if isinstance(errors, str):
            errors = [FieldError(field or "_", errors)]
        elif isinstance(errors, FieldError):
            errors = [errors]
        self.errors: list[FieldError] = list(errors)
        super().__init__("; ".join(f"{e.field}: {e.message}" for e in self.errors))

    @property
    def fields(self) -> dict[str, str]:
        """Field name -> first message, for showing beside form fields."""
        out: dict[str, str] = {}
        for e in self.errors:
            out.setdefault(e.field, e.message)
        return out


class NotFound(StockroomError):
    """A record named in the request does not exist."""

    status = 404


class Conflict(StockroomError):
    """The request is well formed but the records' state forbids it (e.g. releasing a withdrawn batch)."""

    status = 409


class Forbidden(StockroomError):
    """The signed-in user's role does not allow this action."""

    status = 403
