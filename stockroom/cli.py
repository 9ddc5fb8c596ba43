"""The `stockroom` command group."""

from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path

import click

from stockroom import settings


def _db_path(db: str | None) -> str:
    return db or settings.database_path()


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
def main() -> None:
    """stockroom: batch register, standardization, uncertainty and labels for titrant solutions."""


@main.command("init-db")
@click.option("--db", "db_path", type=click.Path(dir_okay=False), help="SQLite file (default: the configured one).")
def init_db(db_path: str | None) -> None:
    """Create the database, or bring its schema up to date."""
    from stockroom import db as dbmod
    from stockroom import schema

    path = _db_path(db_path)
    conn = dbmod.connect(path)
    try:
        version = schema.migrate(conn)
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
@click.option(
    "--db",
    "db_path",
    type=click.Path(dir_okay=False),
    help="File for the demo database (default: a new file in a temporary folder).",
)
@click.option("--host", default="127.0.0.1", show_default=True, help="Address to listen on.")
@click.option("--port", default=8000, show_default=True, type=click.IntRange(1, 65535), help="Port to listen on.")
@click.option("--no-serve", is_flag=True, help="Build the demo database and stop.")
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
    from stockroom import schema

    conn = dbmod.connect(_db_path(db_path))
    schema.migrate(conn)
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
@click.option("--db", "db_path", type=click.Path(dir_okay=False), help="SQLite file (default: the configured one).")
def add_user(name: str, role: str, display_name: str | None, db_path: str | None) -> None:
    """Create an account. The password is read from STOCKROOM_PASSWORD if set, else asked for twice."""
    from stockroom import accounts

    password = _new_password("Password for the new account (at least 12 characters)")
    conn = _accounts_db(db_path)
    try:
        user = _account_call(accounts.create_user, conn, name, display_name or name, role, password, _cli_actor())
    finally:
        conn.close()
    click.echo(f"created {user.username} ({user.role_label})")


@main.command("disable-user")
@click.argument("name")
@click.option("--reason", default="", help="Why, for the audit trail.")
@click.option("--db", "db_path", type=click.Path(dir_okay=False), help="SQLite file (default: the configured one).")
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
@click.option("--db", "db_path", type=click.Path(dir_okay=False), help="SQLite file (default: the configured one).")
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


# ---------------------------------------------------------------- labels and certificates


def _lab_today(config: dict):  # -> datetime.date: today in the lab's time zone
    from stockroom.db import lab_today

    return lab_today(config["LAB_TIMEZONE"])


@main.command("labels")
@click.argument("batch_id")
@click.option(
    "--layout",
    "layout_name",
    required=True,
    help="Label layout: the name of a file in labels/ without .toml (e.g. carboy-a5, bottle, sheet-a4-24).",
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
@click.option("--db", "db_path", type=click.Path(dir_okay=False), help="SQLite file (default: the configured one).")
@click.option("--out", "out_path", required=True, type=click.Path(dir_okay=False, writable=True), help="PDF file to write.")
def labels_command(batch_id: str, layout_name: str, copies: int, start: int, db_path: str | None, out_path: str) -> None:
    """Print labels of a batch to a PDF; the print is recorded (as cli:<your login>) with its serials."""
    from stockroom import records
    from stockroom.pdf import labels, layouts

    path = _db_path(db_path)
    config = settings.resolve({"DATABASE": path})
    conn = _accounts_db(path)
    try:
        layout = _account_call(layouts.get, layout_name)
        batch = _account_call(records.batch_by_code, conn, batch_id)
        job = _account_call(labels.print_labels, conn, config, batch, layout, copies, start, _cli_actor(), _lab_today(config))
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
@click.option("--db", "db_path", type=click.Path(dir_okay=False), help="SQLite file (default: the configured one).")
@click.option("--out", "out_path", required=True, type=click.Path(dir_okay=False, writable=True), help="PDF file to write.")
def certificate_command(batch_id: str, db_path: str | None, out_path: str) -> None:
    """Write the certificate of standardization of a batch's release in force (else its latest) to a PDF."""
    from stockroom.pdf import certificates

    path = _db_path(db_path)
    config = settings.resolve({"DATABASE": path})
    conn = _accounts_db(path)
    try:
        data = _account_call(certificates.certificate_data_for_batch, conn, batch_id, _lab_today(config))
        pdf = certificates.build_certificate(data)
    finally:
        conn.close()
    Path(out_path).write_bytes(pdf)
    click.echo(f"certificate of {batch_id}, release {data['release']['id']}, written to {out_path}")


@main.command()
@click.option("--db", "db_path", type=click.Path(dir_okay=False, exists=True), help="SQLite file (default: the configured one).")
def verify(db_path: str | None) -> None:
    """Check the audit trail's hash chain and that every record has its entry; exit 1 if not."""
    from stockroom import db as dbmod
    from stockroom import records

    path = _db_path(db_path)
    conn = dbmod.connect(path)
    try:
        total = conn.execute("SELECT count(*) FROM events").fetchone()[0]
        broken = records.verify_chain(conn)
        missing = records.unaudited_records(conn)
        integrity = conn.execute("PRAGMA integrity_check").fetchone()[0]
    finally:
        conn.close()
    problems = []
    if integrity != "ok":
        problems.append(f"SQLite integrity check failed: {integrity}")
    if broken is not None:
        problems.append(
            f"the hash chain is broken at entry {broken}: that entry, or the one before it, was "
            "changed or removed outside stockroom"
        )
    for table, row_id in missing[:20]:
        problems.append(f"{table} row {row_id} has no audit entry (an entry was removed)")
    if len(missing) > 20:
        problems.append(f"... and {len(missing) - 20} more records without an entry")
    if problems:
        for line in problems:
            click.echo(f"PROBLEM: {line}", err=True)
        raise SystemExit(1)
    click.echo(f"audit trail of {path} is whole: {total} entries, every record accounted for")


@main.command("backup")
@click.argument("dest", type=click.Path(dir_okay=False))
@click.option("--db", "db_path", type=click.Path(dir_okay=False, exists=True), help="SQLite file (default: the configured one).")
def backup_command(dest: str, db_path: str | None) -> None:
    """Write a consistent copy of the database to DEST, safely while the server is running."""
    from stockroom import backup

    try:
        pages = backup.backup(_db_path(db_path), dest)
    except FileExistsError as exc:
        raise click.UsageError(str(exc)) from None
    click.echo(f"backup written to {dest} ({pages} pages), integrity check ok")


@main.command("restore")
@click.argument("src", type=click.Path(dir_okay=False))
@click.option("--db", "db_path", type=click.Path(dir_okay=False), help="SQLite file to replace (default: the configured one).")
@click.option("--yes", is_flag=True, help="Do not ask for confirmation.")
def restore_command(src: str, db_path: str | None, yes: bool) -> None:
    """Replace the database with the backup SRC (stop the server first); refuses a damaged or newer file."""
    from stockroom import backup

    target = _db_path(db_path)
    try:
        backup.check_restorable(src)
    except backup.RestoreRefused as exc:
        click.echo(f"refused: {exc}", err=True)
        raise SystemExit(1) from None
    if not yes:
        click.confirm(f"Replace {target} with {src}? Everything recorded since that backup is lost", abort=True)
    version = backup.restore(src, target)
    click.echo(f"{target} restored from {src} (schema version {version}, brought up to date)")


@main.command()
@click.option(
    "--years",
    default=10,
    show_default=True,
    type=click.IntRange(1, 30),
    help="Years of synthetic history for the large case (a 1-year case always runs beside it).",
)
@click.option(
    "--seconds", default=3.0, show_default=True, type=click.FloatRange(0.5, 60), help="Load time per route, in seconds."
)
@click.option(
    "--clients", default=4, show_default=True, type=click.IntRange(1, 32), help="Concurrent client processes per route."
)
def bench(years: int, seconds: float, clients: int) -> None:
    """Measure the real server on loopback at 1 and N years of synthetic data, with ratios to /healthz."""
    from stockroom import benchmark

    sizes = [1] if years == 1 else [1, years]
    click.echo(f"building or reusing synthetic databases ({', '.join(f'{y} y' for y in sizes)}) ...")
    figures = [benchmark.web_figures(y, seconds=seconds, clients=clients) for y in sizes]
    click.echo(f"served by waitress on 127.0.0.1, {clients} keep-alive clients, {seconds:g} s per route")
    benchmark.print_web_figures(figures)
    sheet = benchmark.label_sheet_seconds(Path(figures[-1]["database"]))
    click.echo(f"30-label letter sheet PDF: {sheet * 1000:.1f} ms (goal <= 300 ms, ratio {sheet / 0.3:.2f})")
    science = benchmark.science_figures(repeats_1e5=11, repeats_1e6=5)
    for case in science["cases"]:
        click.echo(
            f"preview, 10 replicates, {case['draws']:,} Monte Carlo draws: {case['pure_ms']:.1f} ms pure, "
            f"{case['client_ms']:.1f} ms through Flask (goal {case['goal_ms']:.0f} ms, "
            f"ratio {case['client_over_goal']:.2f})"
        )


@main.command()
@click.option("--years", default=10, show_default=True, type=click.IntRange(1, 30), help="Years of history to write.")
@click.option(
    "--db",
    "db_path",
    required=True,
    type=click.Path(dir_okay=False),
    help="New SQLite file to write (must not exist; never the working database).",
)
@click.option("--seed", default=1, show_default=True, type=int, help="Seed: the same seed gives the same history.")
@click.option("--end", "end_day", default=None, help="Last day of the history, YYYY-MM-DD (default: today).")
def synth(years: int, db_path: str, seed: int, end_day: str | None) -> None:
    """Write a plausible, clearly synthetic history (about 200 batches a year) for load tests."""
    import datetime as dt

    from stockroom import synth as synthmod

    target = Path(db_path)
    if target.exists():
        raise click.UsageError(f"{target} already exists; synth writes a new file")
    if target.resolve() == Path(settings.database_path()).resolve():
        raise click.UsageError("synth never writes into the working database; pick another --db file")
    try:
        end = dt.date.fromisoformat(end_day) if end_day else None
    except ValueError:
        raise click.BadParameter("write it as YYYY-MM-DD", param_hint="--end") from None
    counts = synthmod.build(str(target), years=years, seed=seed, end=end)
    click.echo(f"synthetic history of {years} years written to {target}: " + ", ".join(f"{v} {k}" for k, v in counts.items()))


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
