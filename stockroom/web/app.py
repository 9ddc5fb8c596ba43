"""The web application's wiring: every blueprint, the error handlers and the response headers."""

from __future__ import annotations

from typing import Any

from flask import Flask, jsonify, render_template
from werkzeug.exceptions import HTTPException, SecurityError

from stockroom.errors import InvalidInput, StockroomError
from stockroom.web import csrf, forms, install, wants_json


def register(app: Flask) -> None:
    """Attach every blueprint, the error handlers and the response headers to the app."""
    from stockroom.web import (
        access,
        account,
        admin,
        api,
        audit,
        batches,
        containers,
        curves,
        dashboard,
        formatting,
        hazards_admin,
        health,
        instruments,
        intake,
        labday,
        lots,
        once,
        preview,
        printing,
        recalls,
        runs,
        schedule,
    )

    install(app)  # the request guards every route shares (stockroom.web)
    csrf.init_app(app)
    for module in (health, dashboard, batches, containers, api, preview, curves, account, runs, intake, lots, labday):
        app.register_blueprint(module.bp)
    for module in (printing, hazards_admin):  # labels, certificates and hazard data
        app.register_blueprint(module.bp)
    for module in (instruments, recalls):  # the instrument register, recalls and their impact
        app.register_blueprint(module.bp)
    app.register_blueprint(recalls.trace_bp)  # a batch's traceability chain
    app.register_blueprint(audit.bp)
    app.register_blueprint(admin.bp)
    app.register_blueprint(intake.api_bp)
    app.register_blueprint(labday.api_bp)
    app.register_blueprint(schedule.bp)  # the lab schedule and the prep plan
    app.register_blueprint(schedule.api_bp)
    access.init_app(app)
    # The JSON API is for programs: its writes take an API token and refuse the session cookie
    # (access.api_require), so it needs no CSRF token.
    csrf.exempt(api.bp)
    csrf.exempt(preview.bp)
    csrf.exempt(curves.bp)  # end points of a recorded curve: computes, stores nothing
    csrf.exempt(intake.api_bp)  # the preparation calculator: computes, stores nothing
    csrf.exempt(labday.api_bp)  # the lab-day look-up: JSON reads only
    csrf.exempt(schedule.api_bp)  # the schedule's JSON: writes take an API token (access.api_require)
    formatting.install(app)
    once.install(app)  # once_field(): the one-time form id of every creating form

    @app.errorhandler(StockroomError)
    def _stockroom_error(exc: StockroomError) -> Any:
        if wants_json():
            if isinstance(exc, InvalidInput):
                body = {"errors": [e.as_dict() for e in exc.errors]}
            else:
                body = {"errors": [{"field": "_", "message": exc.message}]}
            return jsonify(body), exc.status
        if isinstance(exc, InvalidInput):  # each field by the words the form uses, never its internal name
            listed = forms.problems(exc)
            return render_template("error.html", status=exc.status, message=None, problems=listed), exc.status
        return render_template("error.html", status=exc.status, message=exc.message), exc.status

    @app.errorhandler(HTTPException)
    def _http_error(exc: HTTPException) -> Any:
        status = exc.code or 500
        message = exc.description or exc.name
        if isinstance(exc, SecurityError):
            # An untrusted Host header: no URL can be built for it, so answer in plain text.
            return message, status, {"Content-Type": "text/plain; charset=utf-8"}
        if wants_json():
            return jsonify({"errors": [{"field": "_", "message": message}]}), status
        return render_template("error.html", status=status, message=message), status

    @app.after_request
    def _headers(resp: Any) -> Any:
        resp.headers.setdefault(
            "Content-Security-Policy",
            "default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; "
            "object-src 'none'; base-uri 'self'; form-action 'self'; frame-ancestors 'none'",
        )
        resp.headers.setdefault("X-Content-Type-Options", "nosniff")
        resp.headers.setdefault("Referrer-Policy", "same-origin")
        resp.headers.setdefault("X-Frame-Options", "DENY")
        return resp
