"""POST /api/v1/standardizations/preview: compute a standardization run without storing it."""

from __future__ import annotations

from flask import Blueprint

bp = Blueprint("preview", __name__)
