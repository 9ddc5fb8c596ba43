"""The `stockroom` command group.

Every command reports stockroom's own errors and the expected OS errors as one line, `Error: ...`,
with exit status 1 (`reports_errors`); usage mistakes are click's, with exit status 2. Every command
that opens the working database takes the same `--db` option (`database_option`, environment
variable STOCKROOM_DATABASE as in settings.py) and opens it through `open_database`.
"""

from __future__ import annotations

import datetime as dt
import errno
import functools
import os
import socket
import sqlite3
import sys
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any, TypeVar

import click

from stockroom import settings
from stockroom.errors import StockroomError
from stockroom.pdf import layouts

if TYPE_CHECKING:
    import sqlite_utils

F = TypeVar("F", bound=Callable[..., Any])

DATABASE_ENVVAR = "STOCKROOM_DATABASE"  # settings.resolve reads STOCKROOM_<NAME> for every setting
_DEFAULT_DATABASE = next(default for name, default, _ in settings.describe() if name == "DATABASE")


# ---------------------------------------------------------------- the shared pieces


def database_option(
    help: str = f"SQLite file of the working database (default: {_DEFAULT_DATABASE}).",
    *,
    required: bool = False,
    from_environment: bool = True,
) -> Callable[[F], F]:
    """The `--db` option every command that opens a database takes; the value arrives as `db_path`.

    `from_environment=False` is for the commands that write a new file (demo, synth): they must never
    pick up the working database from the environment.
    """
    return click.option(
        "--db",
        "db_path",
        type=click.Path(dir_okay=False),
        required=required,
        envvar=DATABASE_ENVVAR if from_environment else None,
        show_envvar=from_environment,
        help=help,
    )


def _os_message(exc: OSError) -> str:
    if exc.strerror and exc.filename:
        return f"{exc.filename}: {exc.strerror}"
    return exc.strerror or str(exc)


# SQLite's messages for a file it cannot open or write (permission, read-only, locked, full disk).
_SQLITE_ENVIRONMENT = ("unable to open", "readonly database", "database is locked", "disk I/O error", "disk is full")


def reports_errors(fn: F) -> F:
    """Turn stockroom's errors and expected OS errors into one `Error: ...` line and exit status 1."""

    @functools.wraps(fn)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            return fn(*args, **kwargs)
        except click.ClickException:
            raise
        except StockroomError as exc:  # InvalidInput's message already names every field and rule
            raise click.ClickException(exc.message) from None
        except OSError as exc:  # missing file, permission, folder given for a file, port taken
            raise click.ClickException(_os_message(exc)) from None
        except sqlite3.OperationalError as exc:
            # The file system's answers through SQLite; any other OperationalError is a bug and shows as one.
            if not any(words in str(exc) for words in _SQLITE_ENVIRONMENT):
                raise
            raise click.ClickException(f"the database could not be used: {exc}") from None

    wrapper.reports_errors = True  # type: ignore[attr-defined]  # the CLI tests check every command has it
    return wrapper  # type: ignore[return-value]


def working_database(db_path: str | None) -> str:
    """The database file a command works on: --db, else STOCKROOM_DATABASE, else the default."""
    return db_path or settings.database_path()


def _schema_of_existing(path: Path) -> int:
    """The stockroom schema version of an existing file, read without writing anything; 0 if none."""
    try:
        conn = sqlite3.connect(f"file:{path.resolve()}?mode=ro", uri=True)
        try:
            found = conn.execute(
                "SELECT count(*) FROM sqlite_master WHERE type = 'table' AND name = '_sqlite_migrations'"
            ).fetchone()[0]
            if not found:
                return 0
            return int(conn.execute("SELECT count(*) FROM _sqlite_migrations").fetchone()[0])
        finally:
            conn.close()
    except sqlite3.DatabaseError as exc:
        raise click.ClickException(f"{path} is not a readable SQLite database ({exc})") from None


def open_database(path: str, *, must_exist: bool) -> sqlite_utils.Database:
    """Open the stockroom database at `path` with its schema brought up to date.

    With `must_exist` (every command that reads, verifies or adds to existing records) a missing
    file, a folder or a file that is not a stockroom database is refused in one line and nothing is
    created: no folder, no file. Without it (init-db, serve) the file and its folder are created.
    """
    from stockroom import db as dbmod
    from stockroom import schema

    target = Path(path)
    if must_exist:
        if target.is_dir():
            raise click.ClickException(f"{target} is a folder; --db names the database file")
        if not target.is_file():
            raise click.ClickException(
                f"no database at {target}; create it with `stockroom init-db --db {target}` or name another with --db"
            )
        if _schema_of_existing(target) == 0:
            raise click.ClickException(f"{target} is not a stockroom database (it has no schema)")
    try:
        conn = dbmod.connect(target)
    except sqlite3.DatabaseError as exc:
        raise click.ClickException(f"cannot open {target} as a database ({exc})") from None
    try:
        schema.migrate(conn)
    except RuntimeError as exc:  # a schema newer than this stockroom
        conn.close()
        raise click.ClickException(str(exc)) from None
    except sqlite3.DatabaseError as exc:
        conn.close()
        raise click.ClickException(f"cannot bring {target} up to date ({exc})") from None
    return conn


def _lab_today(timezone_name: str) -> dt.date:
    """Today's date in the lab's time zone (LAB_TIMEZONE, an IANA name)."""
    from stockroom import db as dbmod

    return dbmod.lab_today(timezone_name)


def _settings_for(path: str) -> dict[str, Any]:
    """The settings in force for the database at `path`, read without writing anything.

    The command line signs no cookie, so a throwaway key stands in for SECRET_KEY: resolving it
    otherwise would create instance/secret_key beside the database.
    """
    import secrets

    return settings.resolve({"DATABASE": path, "SECRET_KEY": secrets.token_hex(16)})


def _cli_actor() -> str:
    import getpass

    try:
        return f"cli:{getpass.getuser()}"
    except (KeyError, OSError):  # no login name in some containers
        return "cli"


def _ensure_port_free(host: str, port: int) -> None:
    """Refuse, in one line, an address the server could not listen on (port taken, not allowed, unknown host)."""
    try:
        addresses = socket.getaddrinfo(
            None if host == "*" else host, port, type=socket.SOCK_STREAM, proto=socket.IPPROTO_TCP, flags=socket.AI_PASSIVE
        )
    except socket.gaierror as exc:
        raise click.ClickException(f"cannot listen on {host}: {exc.strerror}") from None
    for family, kind, proto, _, address in addresses:
        with socket.socket(family, kind, proto) as probe:
            # waitress sets SO_REUSEADDR too, so a port left in TIME_WAIT is not mistaken for a busy one.
            probe.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
            try:
                probe.bind(address)
            except OSError as exc:
                if exc.errno == errno.EADDRINUSE:
                    raise click.ClickException(
                        f"port {port} on {host} is already in use (another stockroom or server?); pick another with --port"
                    ) from None
                raise click.ClickException(f"cannot listen on {host} port {port}: {exc.strerror}") from None


def _serve(app: object, host: str, port: int) -> None:
    from waitress import serve as waitress_serve

    _ensure_port_free(host, port)
    click.echo(f"stockroom serving on http://{host}:{port}/  (Ctrl+C stops it)")
    waitress_serve(app, host=host, port=port, threads=8, ident="stockroom")


def _layout_names() -> list[str]:
    """Names of the layout files in labels/ (a broken one is listed: using it reports its problems)."""
    try:
        folder = layouts.layouts_folder()
    except FileNotFoundError:  # an installation without labels/: every --layout value is refused
        return []
    return sorted(p.stem for p in folder.glob("*.toml"))


_HOST_OPTION = click.option("--host", default="127.0.0.1", show_default=True, help="Address to listen on.")
_PORT_OPTION = click.option("--port", default=8000, show_default=True, type=click.IntRange(1, 65535), help="Port to listen on.")
_OUT_OPTION = click.option(
    "--out", "out_path", required=True, type=click.Path(dir_okay=False, writable=True), help="PDF file to write."
)


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
def main() -> None:
    """stockroom: batch register, standardization, uncertainty and labels for titrant solutions."""


# ---------------------------------------------------------------- the database and the server


@main.command("init-db")
@database_option()
@reports_errors
def init_db(db_path: str | None) -> None:
    """Create the database, or bring its schema up to date."""
    from stockroom import schema

    path = working_database(db_path)
    conn = open_database(path, must_exist=False)
    try:
        version = schema.schema_version(conn)
    finally:
        conn.close()
    click.echo(f"database {path} at schema version {version}")


@main.command()
@database_option()
@_HOST_OPTION
@_PORT_OPTION
@reports_errors
def serve(db_path: str | None, host: str, port: int) -> None:
    """Serve stockroom with waitress (a production WSGI server); creates the database if there is none."""
    from stockroom import create_app

    path = working_database(db_path)
    _ensure_port_free(host, port)
    open_database(path, must_exist=False).close()
    _serve(create_app({"DATABASE": path}), host, port)


@main.command()
@database_option(
    "File for the demo database (default: a new file in a temporary folder; never the working database).",
    from_environment=False,
)
@_HOST_OPTION
@_PORT_OPTION
@click.option("--no-serve", is_flag=True, help="Build the demo database and stop.")
@reports_errors
def demo(db_path: str | None, host: str, port: int, no_serve: bool) -> None:
    """Build a fresh database from the invented demo scenario and serve it."""
    from stockroom import create_app
    from stockroom.demo import build_demo

    working = Path(settings.database_path()).resolve()
    if db_path is None:
        db_path = str(Path(tempfile.mkdtemp(prefix="stockroom-demo-")) / "demo.db")
    target = Path(db_path).resolve()
    if target == working:
        raise click.UsageError("the demo never writes into the working database; pick another --db file")
    if target.exists():
        raise click.UsageError(f"{target} already exists; the demo builds a fresh file (remove it or pick another)")
    if not no_serve:
        _ensure_port_free(host, port)  # before the build, not after it
    summary = build_demo(str(target))
    click.echo(f"demo database (invented scenario): {target}")
    for line in summary:
        click.echo(f"  {line}")
    if not no_serve:
        _serve(create_app({"DATABASE": str(target), **demo_address(host, port)}), host, port)


def demo_address(host: str, port: int) -> dict[str, str]:
    """BASE_URL for a demo served at host:port, so its label QR codes point where it serves. A wildcard
    host (0.0.0.0, ::) names no address to print: BASE_URL stays empty and labels printed from the web
    carry the address the person printing reached."""
    if host in ("", "0.0.0.0", "::"):
        return {}
    shown = f"[{host}]" if ":" in host else host
    return {"BASE_URL": f"http://{shown}:{port}"}


# ---------------------------------------------------------------- accounts

_ROLE_CHOICE = click.Choice(["staff", "instructor", "admin"])  # accounts.ROLES (a test keeps them equal)


def _new_password(prompt: str) -> str:
    """The password from STOCKROOM_PASSWORD when set (for scripts), else asked for twice, hidden."""
    from_env = os.environ.get("STOCKROOM_PASSWORD")
    if from_env is not None:
        return from_env
    return str(click.prompt(prompt, hide_input=True, confirmation_prompt=True))


@main.command("add-user")
@click.argument("name")
@click.option("--role", required=True, type=_ROLE_CHOICE, help="What the account may do.")
@click.option("--display-name", default=None, help="The person's name as shown (default: NAME).")
@database_option()
@reports_errors
def add_user(name: str, role: str, display_name: str | None, db_path: str | None) -> None:
    """Create the account NAME. The password is read from STOCKROOM_PASSWORD if set, else asked for twice."""
    from stockroom import accounts

    conn = open_database(working_database(db_path), must_exist=True)
    try:
        password = _new_password("Password for the new account (at least 12 characters)")
        user = accounts.create_user(conn, name, display_name or name, role, password, _cli_actor())
    finally:
        conn.close()
    click.echo(f"created {user.username} ({user.role_label})")


@main.command("disable-user")
@click.argument("name")
@click.option("--reason", default="", help="Why, for the audit trail.")
@database_option()
@reports_errors
def disable_user(name: str, reason: str, db_path: str | None) -> None:
    """Disable the account NAME; every session it has ends at once."""
    from stockroom import accounts

    conn = open_database(working_database(db_path), must_exist=True)
    try:
        user = accounts.disable_user(conn, name, _cli_actor(), reason)
    finally:
        conn.close()
    click.echo(f"disabled {user.username}; its sessions have ended")


@main.command("set-password")
@click.argument("name")
@database_option()
@reports_errors
def set_password(name: str, db_path: str | None) -> None:
    """Give the account NAME a new password (forgotten password); from STOCKROOM_PASSWORD or asked for twice."""
    from stockroom import accounts

    conn = open_database(working_database(db_path), must_exist=True)
    try:
        password = _new_password(f"New password for {name} (at least 12 characters)")
        user = accounts.set_password(conn, name, password, _cli_actor())
    finally:
        conn.close()
    click.echo(f"password of {user.username} changed; its sessions and API tokens have ended")


# ---------------------------------------------------------------- labels and certificates


@main.command("labels")
@click.argument("batch_id")
@click.option(
    "--layout",
    "layout_name",
    required=True,
    type=click.Choice(_layout_names()),
    help="Label layout: a file in labels/ without .toml (a new file there is a new choice).",
)
@click.option(
    "--copies",
    default=1,
    show_default=True,
    type=click.IntRange(1, 200),
    help="How many labels to print (each gets its own serial).",
)
@click.option(
    "--start",
    default=1,
    show_default=True,
    type=click.IntRange(1, None),
    help="Position of the first label on a partly used sheet, counted along rows from the top left.",
)
@database_option()
@_OUT_OPTION
@reports_errors
def labels_command(batch_id: str, layout_name: str, copies: int, start: int, db_path: str | None, out_path: str) -> None:
    """Print labels of the batch BATCH_ID to a PDF; the print is recorded (as cli:<your login>) with its serials."""
    from stockroom import records
    from stockroom.pdf import labels

    path = working_database(db_path)
    conn = open_database(path, must_exist=True)
    try:
        config = _settings_for(path)
        layout = layouts.get(layout_name)
        batch = records.batch_by_code(conn, batch_id)
        job = labels.print_labels(conn, config, batch, layout, copies, start, _cli_actor(), _lab_today(config["LAB_TIMEZONE"]))
    finally:
        conn.close()
    Path(out_path).write_bytes(job.pdf)
    rec = job.record
    click.echo(
        f"{copies} label{'s' if copies != 1 else ''} of {batch_id} on {layout.name}, serials "
        f"{labels.format_serial(rec['serial_first'])}-{labels.format_serial(rec['serial_last'])}: "
        f"{job.content.certified}"
    )
    click.echo(f"written to {out_path}")


@main.command("certificate")
@click.argument("batch_id")
@database_option()
@_OUT_OPTION
@reports_errors
def certificate_command(batch_id: str, db_path: str | None, out_path: str) -> None:
    """Write the certificate of standardization of batch BATCH_ID (its release in force, else its latest) to a PDF."""
    from stockroom.pdf import certificates

    path = working_database(db_path)
    conn = open_database(path, must_exist=True)
    try:
        config = _settings_for(path)
        data = certificates.certificate_data_for_batch(conn, batch_id, _lab_today(config["LAB_TIMEZONE"]))
        pdf = certificates.build_certificate(data, institution=str(config.get("INSTITUTION_NAME") or ""))
    finally:
        conn.close()
    Path(out_path).write_bytes(pdf)
    click.echo(f"certificate of {batch_id}, release {data['release_number']}, written to {out_path}")


# ---------------------------------------------------------------- integrity, backup and restore


def _open_for_reading(path: str) -> sqlite_utils.Database:
    """Open an existing stockroom database read-only, at this version's schema; anything else is one line.

    A missing file, a folder, a file that is not SQLite, a SQLite file that is not stockroom's and one
    whose schema is older or newer than this stockroom's are each refused, and nothing is created or
    changed: verify reads only.
    """
    from stockroom import backup
    from stockroom.schema import SCHEMA_VERSION

    target = Path(path)
    if target.is_dir():
        raise click.ClickException(f"{target} is a folder; --db names the database file")
    if not target.is_file():
        raise click.ClickException(
            f"no database at {target}; create it with `stockroom init-db --db {target}` or name another with --db"
        )
    try:
        with target.open("rb") as f:
            header = f.read(16)
    except OSError as exc:
        raise click.ClickException(_os_message(exc)) from None
    if header != b"SQLite format 3\x00":
        raise click.ClickException(f"{target} is not a readable SQLite database (not a stockroom database file)")
    version = _schema_of_existing(target)
    if version == 0:
        raise click.ClickException(f"{target} is not a stockroom database (it has no schema)")
    conn = sqlite3.connect(f"file:{target.resolve()}?mode=ro", uri=True)
    conn.row_factory = sqlite3.Row
    import sqlite_utils

    db = sqlite_utils.Database(conn, execute_plugins=False)
    try:
        tables = {str(r[0]) for r in db.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
    except sqlite3.DatabaseError as exc:
        db.close()
        raise click.ClickException(f"{target} is not a readable SQLite database ({exc})") from None
    missing = [t for t in backup.CORE_TABLES if t not in tables]
    if missing:
        db.close()
        raise click.ClickException(f"{target} is not a stockroom database (it has no {', '.join(missing)} tables)")
    if version > SCHEMA_VERSION:
        db.close()
        raise click.ClickException(
            f"{target} has a newer schema ({version}) than this stockroom ({SCHEMA_VERSION}); upgrade stockroom"
        )
    if version < SCHEMA_VERSION:
        db.close()
        raise click.ClickException(
            f"{target} is at schema version {version}, this stockroom's is {SCHEMA_VERSION}: bring it up to date with "
            f"`stockroom init-db --db {target}` first (verify changes nothing)"
        )
    return db


def _parse_anchor(text: str) -> tuple[int, str]:
    entry, sep, mac = text.strip().partition(":")
    mac = mac.strip().lower()
    if not sep or not entry.strip().isdigit() or len(mac) < 16 or any(c not in "0123456789abcdef" for c in mac):
        raise click.BadParameter(
            f"{text!r}: give the entry id and at least 16 hex digits of its MAC, as a certificate's footer "
            "prints them (41:3fa2...)",
            param_hint="--anchor",
        )
    return int(entry), mac


def _widen(db: sqlite_utils.Database, entry_id: int, mac: str) -> str:
    """A certificate prints 16 hex digits of the MAC: take the entry's full MAC when it begins with them."""
    if len(mac) >= 64:
        return mac
    row = db.execute("SELECT hash FROM events WHERE id = ?", [entry_id]).fetchone()
    return str(row[0]) if row is not None and str(row[0]).startswith(mac) else mac


def _plural(n: int, noun: str) -> str:
    if n == 1:
        return f"1 {noun}"
    if noun.endswith(("ch", "sh", "s", "x")):
        return f"{n} {noun}es"
    if noun.endswith("y") and noun[-2:-1] not in "aeiou":
        return f"{n} {noun[:-1]}ies"
    return f"{n} {noun}s"


@main.command()
@database_option()
@click.option(
    "--manifest",
    "manifests",
    multiple=True,
    type=click.Path(dir_okay=False),
    help="A backup manifest (DEST.manifest.json) kept elsewhere: its trail head must be in the database. Repeatable.",
)
@click.option(
    "--anchor",
    "anchor_texts",
    multiple=True,
    help="An audit trail head ID:MAC as a certificate's footer prints it: that entry must be there, unchanged. Repeatable.",
)
@click.option(
    "--key-file",
    type=click.Path(dir_okay=False),
    default=None,
    help="The trail key (default: TRAIL_KEY_FILE, else beside the database).",
)
@reports_errors
def verify(db_path: str | None, manifests: tuple[str, ...], anchor_texts: tuple[str, ...], key_file: str | None) -> None:
    """Check the audit trail: guards, keyed chain, every record's content, and the heads kept outside; exit 1 on any problem."""
    from stockroom import backup
    from stockroom.records import audit

    path = working_database(db_path)
    anchors_given = [_parse_anchor(t) for t in anchor_texts]
    manifest_heads: list[tuple[str, tuple[int, str] | None]] = []
    for m in manifests:
        try:
            manifest_heads.append((m, backup.manifest_anchor(backup.read_manifest(m))))
        except backup.ManifestUnreadable as exc:
            raise click.ClickException(str(exc)) from None
    db = _open_for_reading(path)
    try:
        integrity = db.execute("PRAGMA integrity_check").fetchone()[0]
        log = audit.head_log_for(db)
        logged = audit.head_log_anchors(db)
        anchors: list[tuple[int, str]] = list(logged)
        sources: list[str] = []
        sources.append(f"head log {log}: {_plural(len(logged), 'head')}" if logged else f"head log {log}: none (no file there)")
        for m, head in manifest_heads:
            if head is None:
                sources.append(f"manifest {m}: an empty trail")
            else:
                anchors.append(head)
                sources.append(f"manifest {m}: entry {head[0]}")
        for entry_id, mac in anchors_given:
            anchors.append((entry_id, _widen(db, entry_id, mac)))
            sources.append(f"--anchor {entry_id}:{mac}")
        counts = {t: int(db.execute(f"SELECT count(*) FROM [{t}]").fetchone()[0]) for t in audit.RECORD_TABLES}
        report = audit.verify(db, anchors=anchors, key_file=key_file)
    finally:
        db.close()
    click.echo(f"verified {path}")
    for kind, n in report.checked:
        click.echo(f"  {kind}: {n}")
    kinds = [_plural(n, audit._NOUNS.get(t, t)) for t, n in counts.items() if n]
    click.echo("  records by kind: " + (", ".join(kinds) if kinds else "none"))
    click.echo("  anchors from outside the database:")
    for line in sources:
        click.echo(f"    {line}")
    for note in report.notes:
        click.echo(f"  note: {note}")
    problems = [str(p) for p in report.problems]
    if integrity != "ok":
        problems.insert(0, f"the database file: fails SQLite's integrity check ({integrity})")
    if report.key_missing:
        problems.append("the keyed audit chain could not be checked: its key file is not there (give it with --key-file)")
    if problems:
        for line in problems:
            click.echo(f"PROBLEM: {line}", err=True)
        click.echo(f"{_plural(len(problems), 'problem')} found", err=True)
        raise SystemExit(1)
    click.echo("no problems: the audit trail is whole and every record matches its entry")


@main.command("backup")
@click.argument("dest", type=click.Path(dir_okay=False))
@database_option()
@reports_errors
def backup_command(dest: str, db_path: str | None) -> None:
    """Write a consistent copy of the database to DEST and its manifest DEST.manifest.json, safely while serving."""
    from stockroom import backup

    path = working_database(db_path)
    open_database(path, must_exist=True).close()
    pages = backup.backup(path, dest)  # FileExistsError (never overwrites) is reported in one line
    manifest = backup.manifest_path(dest)
    head = backup.manifest_anchor(backup.read_manifest(manifest))
    click.echo(f"backup written to {dest} ({pages} pages), integrity check ok")
    click.echo(
        f"manifest written to {manifest}"
        + (f" (trail head: entry {head[0]}, MAC {head[1][:16]}...)" if head else " (the trail is empty)")
        + "; keep a copy away from the server"
    )


@main.command("restore")
@click.argument("src", type=click.Path(dir_okay=False))
@database_option(f"SQLite file to replace (default: {_DEFAULT_DATABASE}).")
@click.option("--yes", is_flag=True, help="Do not ask for confirmation.")
@click.option(
    "--key-file",
    type=click.Path(dir_okay=False, exists=True),
    default=None,
    help="The trail key to check SRC with (default: the target's); copied beside the target if it has none.",
)
@reports_errors
def restore_command(src: str, db_path: str | None, yes: bool, key_file: str | None) -> None:
    """Replace the database with the backup SRC (stop the server first) once SRC passes the audit verification."""
    from stockroom import backup

    target = working_database(db_path)
    try:
        checked = backup.check_restorable(src, target, key_file=key_file)
    except backup.RestoreRefused as exc:
        raise click.ClickException(f"refused: {exc}") from None
    try:
        if not yes:
            click.confirm(f"Replace {target} with {src}? Everything recorded since that backup is lost", abort=True)
    except BaseException:
        checked.discard()
        raise
    kept = backup.apply_restore(checked, target, key_file=key_file)
    checks = ", ".join(f"{n} {kind}" for kind, n in checked.report.checked)
    click.echo(f"{target} restored from {src} (schema version {checked.version}, brought up to date); verified: {checks}")
    if kept is not None:
        click.echo(f"the head log of the replaced database is kept as {kept}; a new one starts at the restored head")


# ---------------------------------------------------------------- load tests


@main.command()
@click.option(
    "--years",
    default=10,
    show_default=True,
    type=click.IntRange(1, 50),
    help="Years of synthetic history for the large case (a 1-year case always runs beside it).",
)
@click.option(
    "--seconds", default=3.0, show_default=True, type=click.FloatRange(0.5, 60), help="Load time per route, in seconds."
)
@click.option(
    "--clients",
    default=4,
    show_default=True,
    type=click.IntRange(1, 32),
    help="Concurrent client processes of the throughput case (/healthz against the lab-day JSON).",
)
@click.option(
    "--rounds",
    default=3,
    show_default=True,
    type=click.IntRange(1, 15),
    help="Times each figure is measured; the median is shown (the sizes take turns within a round).",
)
@reports_errors
def bench(years: int, seconds: float, clients: int, rounds: int) -> None:
    """Measure the real server on loopback at 1 and N years of synthetic data, with ratios and their goals."""
    from stockroom import benchmark

    sizes = [1] if years == 1 else [1, years]
    click.echo(f"building or reusing synthetic databases ({', '.join(f'{y} y' for y in sizes)}) ...")
    figures = benchmark.web_figures(sizes, seconds=seconds, clients=clients, rounds=rounds)
    click.echo(f"served by waitress on 127.0.0.1, one keep-alive client per route, {seconds:g} s per route and round")
    benchmark.print_web_figures(figures)
    sheet = benchmark.label_sheet_seconds(Path(figures["databases"][sizes[-1]]))
    click.echo(f"30-label letter sheet PDF: {sheet * 1000:.1f} ms (goal <= 300 ms, ratio {sheet / 0.3:.2f})")
    science = benchmark.science_figures(repeats_1e5=11, repeats_1e6=5)
    for case in science["cases"]:
        click.echo(
            f"preview, 10 replicates, {case['draws']:,} Monte Carlo draws: {case['pure_ms']:.1f} ms pure, "
            f"{case['client_ms']:.1f} ms through Flask (goal {case['goal_ms']:.0f} ms, "
            f"ratio {case['client_over_goal']:.2f})"
        )


@main.command()
@click.option("--years", default=10, show_default=True, type=click.IntRange(1, 50), help="Years of history to write.")
@database_option("New SQLite file to write (must not exist; never the working database).", required=True, from_environment=False)
@click.option("--seed", default=1, show_default=True, type=int, help="Seed: the same seed gives the same history.")
@click.option(
    "--per-year",
    default=200,
    show_default=True,
    type=click.IntRange(1, 200),
    help="About how many batches a year (200 is the full volume; fewer thin the history out).",
)
@click.option(
    "--end",
    "end_day",
    default=None,
    type=click.DateTime(formats=["%Y-%m-%d"]),
    help="Last day of the history, YYYY-MM-DD (default: today).",
)
@reports_errors
def synth(years: int, db_path: str, seed: int, per_year: int, end_day: dt.datetime | None) -> None:
    """Write a plausible, clearly synthetic history (about 200 batches a year) for load tests."""
    from stockroom import synth as synthmod

    target = Path(db_path)
    if target.exists():
        raise click.UsageError(f"{target} already exists; synth writes a new file")
    if target.resolve() == Path(settings.database_path()).resolve():
        raise click.UsageError("synth never writes into the working database; pick another --db file")
    end = end_day.date() if end_day else None
    counts = synthmod.build(str(target), years=years, seed=seed, end=end, per_year=per_year)
    click.echo(f"synthetic history of {years} years written to {target}: " + ", ".join(f"{v} {k}" for k, v in counts.items()))


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
