"""Liveness probe; also the baseline the benchmark compares every other route with."""

from flask import Blueprint, Response

bp = Blueprint("health", __name__)


@bp.get("/healthz")
def healthz() -> Response:
    return Response("ok\n", mimetype="text/plain")
