"""stockroom: batch register, standardization, uncertainty and labels for titrant solutions."""

from __future__ import annotations

from typing import Any

from flask import Flask


def create_app(config: dict[str, Any] | None = None) -> Flask:
    """Build the Flask application; `config` overrides settings (key DATABASE is the SQLite file path)."""
    from stockroom import db, settings
    from stockroom.resources import resource_dir
    from stockroom.web import register

    app = Flask(
        __name__,
        template_folder=str(resource_dir("templates")),
        static_folder="static",
    )
    app.config.update(settings.resolve(config))
    db.init_app(app)
    register(app)
    return app
