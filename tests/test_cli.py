"""The `stockroom` command group."""

from __future__ import annotations

import socket
import subprocess
import sys
import time
import urllib.request

import click
import pytest
from click.testing import CliRunner

from stockroom import db as dbmod
from stockroom import schema
from stockroom.cli import main
from stockroom.schema import SCHEMA_VERSION


def _commands():
    return sorted(main.commands.items())


@pytest.mark.parametrize("name,command", _commands())
def test_every_command_has_help_text(name, command):
    assert command.help and len(command.help.strip()) > 10, f"`stockroom {name}` has no help text"
    for param in command.params:
        if isinstance(param, click.Option) and param.name != "help":
            assert param.help, f"option {param.opts} of `stockroom {name}` has no help"
    result = CliRunner().invoke(main, [name, "--help"])
    assert result.exit_code == 0 and "Usage:" in result.output


def test_every_command_reports_errors_in_one_line_and_shares_the_db_option():
    for name, command in _commands():
        assert getattr(command.callback, "reports_errors", False), f"`stockroom {name}` lacks @reports_errors"
        for param in command.params:
            if param.name == "db_path":
                assert param.opts == ["--db"]
                # demo and synth write a new file: they must never pick the working database up from the environment
                assert param.envvar == (None if name in {"demo", "synth"} else "STOCKROOM_DATABASE"), name


def test_the_db_option_reads_the_same_variable_as_settings(tmp_path, monkeypatch):
    from stockroom import settings

    monkeypatch.setenv("STOCKROOM_DATABASE", str(tmp_path / "from-env.db"))
    assert settings.resolve({"SECRET_KEY": "test-only"})["DATABASE"] == str(tmp_path / "from-env.db")
    result = CliRunner().invoke(main, ["init-db"])
    assert result.exit_code == 0, result.output
    assert (tmp_path / "from-env.db").is_file() and "from-env.db" in result.output


def test_layout_choices_are_the_files_in_labels():
    from stockroom.pdf import layouts

    found, broken = layouts.load_all()
    assert broken == []
    layout = next(p for p in main.commands["labels"].params if p.name == "layout_name")
    assert list(layout.type.choices) == sorted(found) and "sheet-a4-21" in found
    help_text = CliRunner().invoke(main, ["labels", "--help"], terminal_width=200).output
    for name in found:
        assert name in help_text


def test_every_argument_is_named_in_its_command_help():
    for name, command in _commands():
        for param in command.params:
            if isinstance(param, click.Argument):
                assert param.human_readable_name in (command.help or ""), (
                    f"`stockroom {name}` help never names {param.human_readable_name}"
                )


# ---------------------------------------------------------------- one-line errors, nothing created


def _tree(root) -> list[str]:
    return sorted(str(p.relative_to(root)) for p in root.rglob("*"))


def _one_line_error(result, exit_code: int = 1) -> str:
    """The single `Error: ...` line of a command that failed cleanly (click exits; nothing raised)."""
    assert result.exit_code == exit_code, result.output
    assert isinstance(result.exception, SystemExit), repr(result.exception)  # CliRunner keeps any other exception
    assert "Traceback" not in result.output
    lines = [line for line in result.output.splitlines() if line.strip()]
    assert len(lines) == 1 and lines[0].startswith("Error: "), result.output
    return lines[0]


_READING_COMMANDS = [
    ["verify"],
    ["labels", "NAOH-2611-01", "--layout", "bottle", "--out", "{out}"],
    ["certificate", "NAOH-2611-01", "--out", "{out}"],
    ["backup", "{out}"],
    ["add-user", "kim", "--role", "staff"],
    ["disable-user", "kim"],
    ["set-password", "kim"],
]


@pytest.mark.parametrize("args", _READING_COMMANDS, ids=lambda a: a[0])
@pytest.mark.parametrize("from_env", [False, True], ids=["--db", "env"])
def test_a_missing_database_is_refused_and_nothing_is_created(tmp_path, monkeypatch, args, from_env):
    missing = tmp_path / "no-such-folder" / "stockroom.db"
    args = [a.format(out=tmp_path / "out.pdf") for a in args]
    if from_env:
        monkeypatch.setenv("STOCKROOM_DATABASE", str(missing))
    else:
        args += ["--db", str(missing)]
    result = CliRunner(env={"STOCKROOM_PASSWORD": "violet kettle under the stairs"}).invoke(main, args)
    line = _one_line_error(result)
    assert line.startswith(f"Error: no database at {missing};") and "stockroom init-db" in line
    assert _tree(tmp_path) == []  # no folder, no database, no secret key, no output file


def test_a_file_that_is_not_a_stockroom_database_is_left_untouched(tmp_path):
    other = tmp_path / "notes.db"
    import sqlite3

    conn = sqlite3.connect(other)
    conn.execute("CREATE TABLE notes (body TEXT)")
    conn.close()
    before = other.read_bytes()
    line = _one_line_error(CliRunner().invoke(main, ["verify", "--db", str(other)]))
    assert line == f"Error: {other} is not a stockroom database (it has no schema)"
    text = tmp_path / "text.db"
    text.write_text("not sqlite at all\n")
    line = _one_line_error(CliRunner().invoke(main, ["verify", "--db", str(text)]))
    assert line.startswith(f"Error: {text} is not a readable SQLite database")
    assert other.read_bytes() == before and _tree(tmp_path) == ["notes.db", "text.db"]  # no -wal, -shm or secret


@pytest.fixture
def cli_database(tmp_path):
    path = tmp_path / "stockroom.db"
    assert CliRunner().invoke(main, ["init-db", "--db", str(path)]).exit_code == 0
    return path


def test_an_unknown_batch_is_one_line_and_writes_nothing(cli_database, tmp_path):
    before = _tree(tmp_path)
    out = tmp_path / "out.pdf"
    for command in (["labels", "NOPE-0000-00", "--layout", "bottle"], ["certificate", "NOPE-0000-00"]):
        result = CliRunner().invoke(main, [*command, "--db", str(cli_database), "--out", str(out)])
        assert _one_line_error(result) == "Error: no batch with ID 'NOPE-0000-00'"
    # no PDF and no instance/secret_key: the CLI resolves settings without writing the secret file
    assert _tree(tmp_path) == before
    conn = dbmod.connect(cli_database)
    assert conn.execute("SELECT count(*) FROM label_prints").fetchone()[0] == 0


def test_an_unknown_layout_is_a_usage_error_naming_the_layouts(cli_database, tmp_path):
    out = tmp_path / "out.pdf"
    result = CliRunner().invoke(main, ["labels", "X", "--layout", "sheet-a4-24", "--db", str(cli_database), "--out", str(out)])
    assert result.exit_code == 2 and isinstance(result.exception, SystemExit) and "Traceback" not in result.output
    assert "'sheet-a4-24' is not one of" in result.output and "'sheet-a4-21'" in result.output
    assert not out.exists()


def test_os_errors_are_one_line(cli_database, tmp_path):
    (tmp_path / "a-file").write_text("")
    line = _one_line_error(CliRunner().invoke(main, ["backup", str(tmp_path / "a-file" / "b.db"), "--db", str(cli_database)]))
    assert "a-file" in line and "exists" in line
    line = _one_line_error(CliRunner().invoke(main, ["backup", str(cli_database), "--db", str(cli_database)]))
    assert line == f"Error: {cli_database} already exists; a backup never overwrites a file"


def test_a_folder_where_the_database_should_be_is_one_line(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    monkeypatch.delenv("STOCKROOM_DATABASE", raising=False)
    (tmp_path / "instance" / "stockroom.db").mkdir(parents=True)  # the default path, which click does not check
    line = _one_line_error(CliRunner().invoke(main, ["verify"]))
    assert line == "Error: instance/stockroom.db is a folder; --db names the database file"
    given = CliRunner().invoke(main, ["verify", "--db", str(tmp_path)])  # click's own check of --db
    assert given.exit_code == 2 and "is a directory" in given.output and "Traceback" not in given.output


def test_serving_on_a_busy_port_is_one_line_before_anything_else(tmp_path):
    with socket.socket() as taken:
        taken.bind(("127.0.0.1", 0))
        taken.listen()
        port = taken.getsockname()[1]
        for command in (["serve", "--db", str(tmp_path / "s.db")], ["demo", "--db", str(tmp_path / "d.db")]):
            result = CliRunner().invoke(main, [*command, "--port", str(port)])
            line = _one_line_error(result)
            assert line.startswith(f"Error: port {port} on 127.0.0.1 is already in use") and "serving" not in result.output
    assert _tree(tmp_path) == []  # checked before the database is opened or the demo is built


def test_init_db_creates_current_schema(tmp_path):
    path = tmp_path / "new.db"
    result = CliRunner().invoke(main, ["init-db", "--db", str(path)])
    assert result.exit_code == 0, result.output
    assert f"schema version {SCHEMA_VERSION}" in result.output
    assert schema.schema_version(dbmod.connect(path)) == SCHEMA_VERSION


def test_demo_builds_a_fresh_file_and_refuses_an_existing_one(tmp_path):
    path = tmp_path / "demo.db"
    result = CliRunner().invoke(main, ["demo", "--db", str(path), "--no-serve"])
    assert result.exit_code == 0, result.output
    assert "invented" in result.output
    conn = dbmod.connect(path)
    # The scenario's 8 invented batches and the potentiometric demo run's batch (demo.add_potentiometric_run).
    assert conn.execute("SELECT count(*) FROM batches").fetchone()[0] == 9
    again = CliRunner().invoke(main, ["demo", "--db", str(path), "--no-serve"])
    assert again.exit_code != 0 and "already exists" in again.output


def test_demo_never_writes_into_the_working_database(tmp_path, monkeypatch):
    working = tmp_path / "working.db"
    monkeypatch.setenv("STOCKROOM_DATABASE", str(working))
    result = CliRunner().invoke(main, ["demo", "--db", str(working), "--no-serve"])
    assert result.exit_code != 0 and "never writes into the working database" in result.output
    assert not working.exists()


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.mark.slow
def test_demo_command_serves_on_loopback(tmp_path):
    port = _free_port()
    proc = subprocess.Popen(
        [sys.executable, "-m", "stockroom.cli", "demo", "--db", str(tmp_path / "d.db"), "--port", str(port)],
        stdout=subprocess.PIPE,
        stderr=subprocess.STDOUT,
    )
    try:
        deadline = time.monotonic() + 30
        body = None
        while time.monotonic() < deadline:
            try:
                with urllib.request.urlopen(f"http://127.0.0.1:{port}/healthz", timeout=2) as r:
                    body = r.read()
                break
            except OSError:
                time.sleep(0.2)
        assert body == b"ok\n"
        with urllib.request.urlopen(f"http://127.0.0.1:{port}/", timeout=5) as r:
            page = r.read().decode()
            assert r.headers["Server"] == "stockroom"  # waitress, not a development server
        assert "Prep room today" in page
    finally:
        proc.terminate()
        proc.wait(timeout=10)
        if proc.stdout:
            proc.stdout.close()


def test_synth_is_deterministic_for_a_seed(tmp_path):
    import sqlite3

    def content(path):
        conn = sqlite3.connect(path)
        try:
            return (
                conn.execute("SELECT code, reagent, nominal_molarity, prepared_on FROM batches ORDER BY id").fetchall(),
                conn.execute("SELECT mass_g, volume_ml FROM replicates ORDER BY id").fetchall(),
            )
        finally:
            conn.close()

    # A thinned year (about 50 batches) proves the same as a full one, in a quarter of the time.
    args = ["--years", "1", "--seed", "7", "--end", "2026-06-30", "--per-year", "50"]
    for name in ("a.db", "b.db"):
        result = CliRunner().invoke(main, ["synth", "--db", str(tmp_path / name), *args])
        assert result.exit_code == 0, result.output
    a, b = content(tmp_path / "a.db"), content(tmp_path / "b.db")
    assert a == b and 20 < len(a[0]) < 100 and len(a[1]) > 3 * len(a[0])
    assert all("synthetic" in n for (n,) in sqlite3.connect(tmp_path / "a.db").execute("SELECT notes FROM batches"))
    assert CliRunner().invoke(main, ["verify", "--db", str(tmp_path / "a.db")]).exit_code == 0
    again = CliRunner().invoke(main, ["synth", "--db", str(tmp_path / "a.db"), *args])
    assert again.exit_code != 0 and "already exists" in again.output


@pytest.mark.slow
def test_bench_runs_end_to_end(tmp_path, monkeypatch):
    """The benchmark itself works (its figures are machine-dependent and not asserted)."""
    monkeypatch.setenv("TMPDIR", str(tmp_path))
    import tempfile

    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    # One round: the medians of several are the figures' business, not this test's.
    result = CliRunner().invoke(main, ["bench", "--years", "1", "--seconds", "0.5", "--clients", "1", "--rounds", "1"])
    assert result.exit_code == 0, result.output
    for route in ("healthz", "dashboard", "batch page", "lab-day JSON", "preview API"):
        assert route in result.output
    assert "30-label letter sheet PDF" in result.output and "of /healthz throughput" in result.output
    # Each ratio is printed with its goal.
    assert "lab-day JSON at 1 y:" in result.output and "(goal >= 0.8)" in result.output
    assert "medians of 1 rounds" in result.output
