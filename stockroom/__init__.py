"""stockroom: batch register, standardization, uncertainty and labels for titrant solutions."""

from __future__ import annotations

from typing import Any

from flask import Flask


def create_app(config: dict[str, Any] | None = None) -> Flask:
    """Build the Flask application; `config` overrides settings (key DATABASE is the SQLite file path)."""
    from stockroom import db, schema, settings
    from stockroom.records import audit
    from stockroom.resources import resource_dir
    from stockroom.web.app import register

    app = Flask(
        __name__,
        template_folder=str(resource_dir("templates")),
        static_folder="static",
    )
    app.config.update(settings.resolve(config))
    hosts = app.config.get("TRUSTED_HOSTS")
    if isinstance(hosts, str):  # the setting is comma-separated text; Flask wants a list (or None: any host)
        app.config["TRUSTED_HOSTS"] = [h.strip() for h in hosts.split(",") if h.strip()] or None
    app.config["SESSION_COOKIE_HTTPONLY"] = True
    audit.use_key_file(app.config["DATABASE"], app.config.get("TRAIL_KEY_FILE") or None)
    db.init_app(app, schema.migrate)
    register(app)
    return app
