"""POST /api/v1/end-points: locate the end points of a recorded titration curve without storing it.

The body is {"points": [{"volume_ml", "ph"} | {"volume_ml", "mv"}, ...], "method"?, "u_reading"?,
"initial_volume_ml"?}; every point gives the same kind of reading. The computation is
stockroom.endpoints; a bad input is a 422 with {"errors": [{"field", "message"}]} naming the request
path of each bad field, as the standardization preview answers.
"""

from __future__ import annotations

from typing import Any

from flask import Blueprint, current_app, jsonify

from stockroom import endpoints, formatting
from stockroom.errors import FieldError, InvalidInput
from stockroom.web import read_json_body
from stockroom.web.access import anonymous_response, current_user, public
from stockroom.web.inputs import MISSING, Parser, field_path

bp = Blueprint("curves", __name__)

URL_RULE = "/api/v1/end-points"
KEYS = {"points", "method", "u_reading", "initial_volume_ml"}
# A 500-point curve is under 40 KB of JSON; the anonymous preview's 64 KB bound serves here too.
MAX_BODY_BYTES = 64 * 1024


def read_curve(data: dict[str, Any]) -> tuple[list[float], list[float], str, dict[str, Any]]:
    """The volumes (mL), readings (pH or mV), their kind and the options; InvalidInput naming each bad field."""
    p = Parser()
    p.known_keys(data, KEYS)
    method = p.choice(data.get("method", MISSING), "method", endpoints.METHODS, default=endpoints.DERIVATIVE)
    u_reading = p.number(data.get("u_reading", MISSING), "u_reading", required=False, ge=0, le=100)
    v0 = p.number(
        data.get("initial_volume_ml", MISSING), "initial_volume_ml", required=False, gt=0, le=endpoints.MAX_VOLUME_ML, unit="mL"
    )
    raw = p.array(data.get("points", MISSING), "points", min_items=endpoints.MIN_POINTS, max_items=endpoints.MAX_POINTS)
    volumes: list[float] = []
    readings: list[float] = []
    kind = None
    for i, item in enumerate(raw or ()):
        base = field_path("points", i)
        obj = p.mapping(item, base)
        if obj is None:
            continue
        p.known_keys(obj, {"volume_ml", *endpoints.KINDS}, base)
        given = [k for k in endpoints.KINDS if k in obj]
        if len(given) != 1:
            p.error(base, "needs one reading: ph or mv")
            continue
        if kind is None:
            kind = given[0]
        elif given[0] != kind:
            p.error(field_path(base, given[0]), f"every point must give the same kind of reading ({kind} in the first)")
            continue
        low, high = endpoints.READING_RANGE[kind]
        vol = p.number(obj.get("volume_ml", MISSING), field_path(base, "volume_ml"), ge=0, le=endpoints.MAX_VOLUME_ML, unit="mL")
        reading = p.number(obj[kind], field_path(base, kind), ge=low, le=high, unit=endpoints.UNITS[kind])
        if vol is not None and reading is not None:
            volumes.append(vol)
            readings.append(reading)
    p.raise_if_errors()
    assert kind is not None and method is not None
    return volumes, readings, kind, {"method": method, "u_reading": u_reading, "initial_volume_ml": v0}


def _with_display(body: dict[str, Any], point: endpoints.EndPoint, kind: str) -> dict[str, Any]:
    """The end point's JSON plus the words a person reads: the volume ± U in mL (k: COVERAGE_FACTOR), the reading."""
    reading = f"pH {point.reading:.2f}" if kind == endpoints.PH else f"{point.reading:.1f} mV"
    # The expanded uncertainty people read: U = k u with the lab's fixed coverage factor (2 by default).
    k = float(current_app.config["COVERAGE_FACTOR"])
    body["display"] = {"volume": formatting.volume_u(point.volume_ml, k * point.u_ml, k), "reading": reading}
    return body


@bp.post(URL_RULE)
@public
def end_points() -> Any:
    # Storing nothing, it is a read in all but method: open exactly when reads are open.
    if not current_app.config.get("OPEN_READS", True) and current_user() is None:
        return anonymous_response()
    data = read_json_body(max_bytes=MAX_BODY_BYTES)
    try:
        volumes, readings, kind, options = read_curve(data)
        found = endpoints.locate(volumes, readings, kind=kind, **options)
    except InvalidInput as exc:
        return jsonify({"errors": [e.as_dict() for e in exc.errors]}), 422
    except (ArithmeticError, ValueError, FloatingPointError) as exc:
        return jsonify({"errors": [FieldError("points", f"these values cannot be computed: {exc}").as_dict()]}), 422
    return jsonify(
        {
            "end_points": [_with_display(endpoints.as_dict(p, kind), p, kind) for p in found],
            "method": options["method"],
            "reading": kind,
            "points": len(volumes),
            "units": {"volume_ml": "mL", "u_ml": "mL (standard uncertainty, k = 1)", "reading": endpoints.UNITS[kind]},
        }
    )
