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
    assert conn.execute("SELECT count(*) FROM batches").fetchone()[0] == 8
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

    args = ["--years", "1", "--seed", "7", "--end", "2026-06-30"]
    for name in ("a.db", "b.db"):
        result = CliRunner().invoke(main, ["synth", "--db", str(tmp_path / name), *args])
        assert result.exit_code == 0, result.output
    a, b = content(tmp_path / "a.db"), content(tmp_path / "b.db")
    assert a == b and 100 < len(a[0]) < 400 and len(a[1]) > 3 * len(a[0])
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
    result = CliRunner().invoke(main, ["bench", "--years", "1", "--seconds", "0.5", "--clients", "1"])
    assert result.exit_code == 0, result.output
    for route in ("healthz", "dashboard", "batch page", "lab-day JSON", "preview API"):
        assert route in result.output
    assert "30-label letter sheet PDF" in result.output and "of /healthz throughput" in result.output
