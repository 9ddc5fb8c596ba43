"""The `stockroom` command group."""

from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path

import click

from stockroom import settings


def _db_path(db: str | None) -> str:
    return db or os.environ.get("STOCKROOM_DATABASE") or settings.resolve()["DATABASE"]


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
def main() -> None:
    """stockroom: batch register, standardization, uncertainty and labels for titrant solutions."""


@main.command("init-db")
@click.option("--db", "db_path", type=click.Path(dir_okay=False), help="SQLite file (default: the configured one).")
def init_db(db_path: str | None) -> None:
    """Create the database, or bring its schema up to date."""
    from stockroom import db as dbmod

    path = _db_path(db_path)
    conn = dbmod.connect(path)
    try:
        version = dbmod.migrate(conn)
    finally:
        conn.close()
    click.echo(f"database {path} at schema version {version}")


def _serve(app: object, host: str, port: int) -> None:
    from waitress import serve as waitress_serve

    click.echo(f"stockroom serving on http://{host}:{port}/  (Ctrl+C stops it)")
    waitress_serve(app, host=host, port=port, threads=8, ident="stockroom")


@main.command()
@click.option("--db", "db_path", type=click.Path(dir_okay=False), help="SQLite file (default: the configured one).")
@click.option("--host", default="127.0.0.1", show_default=True, help="Address to listen on.")
@click.option("--port", default=8000, show_default=True, type=click.IntRange(1, 65535), help="Port to listen on.")
def serve(db_path: str | None, host: str, port: int) -> None:
    """Serve stockroom with waitress (a production WSGI server)."""
    from stockroom import create_app

    _serve(create_app({"DATABASE": _db_path(db_path)}), host, port)


@main.command()
@click.option("--db", "db_path", type=click.Path(dir_okay=False),
              help="File for the demo database (default: a new file in a temporary folder).")
@click.option("--host", default="127.0.0.1", show_default=True, help="Address to listen on.")
@click.option("--port", default=8000, show_default=True, type=click.IntRange(1, 65535), help="Port to listen on.")
@click.option("--no-serve", is_flag=True, help="Build the demo database and stop.")
def demo(db_path: str | None, host: str, port: int, no_serve: bool) -> None:
    """Build a fresh database from the invented demo scenario and serve it."""
    from stockroom import create_app
    from stockroom.demo import build_demo

    working = Path(settings.resolve()["DATABASE"]).resolve()
    if db_path is None:
        db_path = str(Path(tempfile.mkdtemp(prefix="stockroom-demo-")) / "demo.db")
    target = Path(db_path).resolve()
    if target == working:
        raise click.UsageError("the demo never writes into the working database; pick another --db file")
    if target.exists():
        raise click.UsageError(f"{target} already exists; the demo builds a fresh file (remove it or pick another)")
    summary = build_demo(str(target))
    click.echo(f"demo database (invented scenario): {target}")
    for line in summary:
        click.echo(f"  {line}")
    if not no_serve:
        _serve(create_app({"DATABASE": str(target)}), host, port)


# ---------------------------------------------------------------- accounts

_ROLE_CHOICE = click.Choice(["staff", "instructor", "admin"])  # accounts.ROLES (a test keeps them equal)


def _accounts_db(db_path: str | None):  # -> sqlite_utils.Database
    from stockroom import db as dbmod

    conn = dbmod.connect(_db_path(db_path))
    dbmod.migrate(conn)
    return conn


def _cli_actor() -> str:
    import getpass

    try:
        return f"cli:{getpass.getuser()}"
    except (KeyError, OSError):  # no login name in some containers
        return "cli"


def _new_password(prompt: str) -> str:
    """The password from STOCKROOM_PASSWORD when set (for scripts), else asked for twice, hidden."""
    from_env = os.environ.get("STOCKROOM_PASSWORD")
    if from_env is not None:
        return from_env
    return str(click.prompt(prompt, hide_input=True, confirmation_prompt=True))


def _account_call(fn, *args):  # a StockroomError becomes a one-line message and exit status 1
    from stockroom.errors import InvalidInput, StockroomError

    try:
        return fn(*args)
    except InvalidInput as exc:
        raise click.ClickException("\n".join(f"{e.field}: {e.message}" for e in exc.errors)) from None
    except StockroomError as exc:
        raise click.ClickException(exc.message) from None


@main.command("add-user")
@click.argument("name")
@click.option("--role", required=True, type=_ROLE_CHOICE, help="What the account may do.")
@click.option("--display-name", default=None, help="The person's name as shown (default: NAME).")
@click.option("--db", "db_path", type=click.Path(dir_okay=False),
              help="SQLite file (default: the configured one).")
def add_user(name: str, role: str, display_name: str | None, db_path: str | None) -> None:
    """Create an account. The password is read from STOCKROOM_PASSWORD if set, else asked for twice."""
    from stockroom import accounts

    password = _new_password("Password for the new account (at least 12 characters)")
    conn = _accounts_db(db_path)
    try:
        user = _account_call(accounts.create_user, conn, name, display_name or name, role, password,
                             _cli_actor())
    finally:
        conn.close()
    click.echo(f"created {user.username} ({user.role_label})")


@main.command("disable-user")
@click.argument("name")
@click.option("--reason", default="", help="Why, for the audit trail.")
@click.option("--db", "db_path", type=click.Path(dir_okay=False),
              help="SQLite file (default: the configured one).")
def disable_user(name: str, reason: str, db_path: str | None) -> None:
    """Disable an account; every session it has ends at once."""
    from stockroom import accounts

    conn = _accounts_db(db_path)
    try:
        user = _account_call(accounts.disable_user, conn, name, _cli_actor(), reason)
    finally:
        conn.close()
    click.echo(f"disabled {user.username}; its sessions have ended")


@main.command("set-password")
@click.argument("name")
@click.option("--db", "db_path", type=click.Path(dir_okay=False),
              help="SQLite file (default: the configured one).")
def set_password(name: str, db_path: str | None) -> None:
    """Give an account a new password (forgotten password); from STOCKROOM_PASSWORD or asked for twice."""
    from stockroom import accounts

    password = _new_password(f"New password for {name} (at least 12 characters)")
    conn = _accounts_db(db_path)
    try:
        user = _account_call(accounts.set_password, conn, name, password, _cli_actor())
    finally:
        conn.close()
    click.echo(f"password of {user.username} changed; its sessions have ended")


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
