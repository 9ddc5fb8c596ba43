"""The Jinja filters: the pure formatter (stockroom.formatting) and the audit trail's action words."""

from __future__ import annotations

from typing import Any

from flask import Flask

from stockroom.formatting import (
    date,
    interval,
    molarity,
    p_value,
    percent,
    percent_u,
    quantity,
    relative,
    relative_percent,
    signed_percent,
    temperature,
    uncertainty,
    value_at,
    value_u,
)

# Plain words for the audit trail's action codes; an unknown code is shown as it is.
ACTION_LABELS = {
    "batch.register": "registered a batch",
    "batch.release": "released a batch",
    "batch.withdraw": "withdrew a batch",
    "batch.amend": "corrected a batch detail",
    "lot.register": "registered a standard lot",
    "run.record.certify": "recorded a standardization",
    "run.record.recheck": "recorded a re-check",
    "run.accept": "accepted a run",
    "run.reject": "rejected a run",
    "replicate.exclude": "left out a replicate",
    "label.print": "printed labels",
    "hazard.classify": "added a hazard classification",
    "classdata.correct": "corrected class data",
    "token.create": "made an API token",
    "token.revoke": "revoked an API token",
    "account.create": "created an account",
    "account.disable": "disabled an account",
    "account.password_change": "changed their password",
    "account.password_reset": "reset a password",
    "account.signin": "signed in",
    "account.signin_failed": "failed to sign in",
    "account.signin_paused": "sign-in paused after failures",
    "account.signout": "signed out",
    "access.refused": "was refused an action",
    "instrument.register": "registered an instrument",
    "instrument.calibrate": "recorded a calibration",
    "run.instruments": "named the instruments of a run",
    "recall.open": "opened a recall",
    "recall.clear": "cleared a recall",
    "policy.change": "changed a reagent policy",
}


def fromjson(text: str | None) -> Any:
    """A JSON-encoded stored value (amendments keep before and after as JSON), for display."""
    import json

    if text is None:
        return "—"
    value = json.loads(text)
    return "—" if value in (None, "") else value


def action_label(code: str) -> str:
    return ACTION_LABELS.get(code, code)


def install(app: Flask) -> None:
    """Register the filters with Jinja."""
    app.add_template_filter(molarity, "molarity")
    app.add_template_filter(value_u, "value_u")
    app.add_template_filter(value_at, "value_at")
    app.add_template_filter(percent_u, "percent_u")
    app.add_template_filter(relative, "relative")
    app.add_template_filter(relative_percent, "relative_percent")
    app.add_template_filter(uncertainty, "uncertainty")
    app.add_template_filter(interval, "interval")
    app.add_template_filter(signed_percent, "signed_percent")
    app.add_template_filter(p_value, "p_value")
    app.add_template_filter(temperature, "temperature")
    app.add_template_filter(percent, "percent")
    app.add_template_filter(quantity, "quantity")
    app.add_template_filter(date, "date")
    app.add_template_filter(action_label, "action_label")
    app.add_template_filter(fromjson, "fromjson")
