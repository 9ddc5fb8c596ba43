"""Timing of the science core: a 10-replicate preview with 10^5 and 10^6 Monte Carlo draws.

    python -m stockroom.benchmark

measures the median wall time of the pure computation (request parsing, chemistry, statistics,
GUM and Monte Carlo) and of the same request through the Flask test client, and compares each with
its goal: 10^5 draws within 30 ms, 10^6 draws within 0.5 s. `stockroom bench` calls
science_figures(). This is a benchmark, not a test: the figures
depend on the machine.
"""

from __future__ import annotations

import statistics
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

GOALS_S = {100_000: 0.030, 1_000_000: 0.5}


def _sign_in_bench_user(app: Any, client: Any) -> None:
    """Make a throwaway staff account in the benchmark's own temporary database and sign the client in."""
    import secrets

    from stockroom import accounts
    from stockroom import db as dbmod

    password = secrets.token_urlsafe(18)
    conn = dbmod.connect(app.config["DATABASE"])
    try:
        accounts.create_user(conn, "bench-staff", "Bench staff", "staff", password, actor="benchmark")
    finally:
        conn.close()
    r = client.post("/sign-in", data={"username": "bench-staff", "password": password})
    if r.status_code != 303:
        raise RuntimeError(f"the benchmark could not sign in (status {r.status_code})")


def sample_request(draws: int) -> dict[str, Any]:
    """A 10-replicate NaOH-against-KHP preview request (invented numbers), with `draws` Monte Carlo trials."""
    masses = (0.8123, 0.8241, 0.8090, 0.8302, 0.8177, 0.8212, 0.8150, 0.8266, 0.8105, 0.8230)
    titres = (39.80, 40.39, 39.62, 40.70, 40.04, 40.22, 39.93, 40.49, 39.71, 40.33)
    return {
        "titrant": "NaOH",
        "standard": "KHP",
        "purity": 0.99995,
        "purity_U": 0.0002,
        "purity_k": 2,
        "nominal_molarity": 0.1,
        "monte_carlo_draws": draws,
        "replicates": [
            {"gross_g": round(15.0 + m, 4), "tare_g": 15.0, "volume_ml": v, "blank_ml": 0.03, "temperature_c": 21.0}
            for m, v in zip(masses, titres, strict=True)
        ],
    }


def _median_seconds(func: Callable[[], Any], repeats: int) -> float:
    func()  # warm caches (imports, molar masses, the t quantiles) before timing
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        func()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def science_figures(repeats_1e5: int = 25, repeats_1e6: int = 7) -> dict[str, Any]:
    """Median times of the preview computation, pure and through Flask, against the issue's goals.

    repeats_1e5, repeats_1e6: timed runs per case (counts). Returns a dict with, per draw count,
    pure_ms and client_ms (milliseconds), goal_ms, the ratios time/goal (below 1 meets the goal)
    and client_over_pure (the cost of the HTTP layer), plus met (all ratios below 1).
    """
    from stockroom import create_app
    from stockroom.web.preview import URL_RULE, compute_preview

    out: dict[str, Any] = {"cases": []}
    with tempfile.TemporaryDirectory() as tmp:
        app = create_app({"DATABASE": str(Path(tmp) / "bench.db"), "TESTING": True, "WTF_CSRF_ENABLED": False})
        client = app.test_client()
        # Signed in: an anonymous preview is held to 10^5 draws, and the benchmark times 10^6 too.
        _sign_in_bench_user(app, client)
        for draws, repeats in ((100_000, repeats_1e5), (1_000_000, repeats_1e6)):
            body = sample_request(draws)

            def pure_computation(b: dict[str, Any] = body) -> None:
                compute_preview(b, app.config)

            with app.app_context():
                pure = _median_seconds(pure_computation, repeats)

            def through_client(b: dict[str, Any] = body) -> None:
                r = client.post(URL_RULE, json=b)
                if r.status_code != 200:
                    raise RuntimeError(f"preview answered {r.status_code}: {r.get_data(as_text=True)[:300]}")

            via = _median_seconds(through_client, repeats)
            goal = GOALS_S[draws]
            out["cases"].append(
                {
                    "draws": draws,
                    "replicates": len(body["replicates"]),
                    "repeats": repeats,
                    "pure_ms": pure * 1000,
                    "client_ms": via * 1000,
                    "goal_ms": goal * 1000,
                    "pure_over_goal": pure / goal,
                    "client_over_goal": via / goal,
                    "client_over_pure": via / pure,
                }
            )
    cases = out["cases"]
    out["met"] = all(c["client_over_goal"] < 1 and c["pure_over_goal"] < 1 for c in cases)
    out["ratio_1e6_over_1e5"] = cases[1]["pure_ms"] / cases[0]["pure_ms"]
    return out


def main() -> None:
    """Print the figures as a small table."""
    figures = science_figures()
    print("preview of a 10-replicate run (median wall time)")
    print(
        f"{'draws':>9}  {'pure ms':>9}  {'Flask ms':>9}  {'goal ms':>8}  {'pure/goal':>9}  {'Flask/goal':>10}  {'Flask/pure':>10}"
    )
    for c in figures["cases"]:
        print(
            f"{c['draws']:>9}  {c['pure_ms']:>9.2f}  {c['client_ms']:>9.2f}  {c['goal_ms']:>8.0f}  "
            f"{c['pure_over_goal']:>9.3f}  {c['client_over_goal']:>10.3f}  {c['client_over_pure']:>10.3f}"
        )
    print(f"10^6 / 10^5 draws (pure): {figures['ratio_1e6_over_1e5']:.1f}x")
    print("goals met" if figures["met"] else "GOALS NOT MET")


if __name__ == "__main__":
    main()


# ---------------------------------------------------------------- the served application


def _percentile(values: list[float], q: float) -> float:
    ordered = sorted(values)
    if not ordered:
        return float("nan")
    k = max(0, min(len(ordered) - 1, round(q * (len(ordered) - 1))))
    return ordered[k]


def _client_worker(args: tuple[str, int, str, str, bytes | None, float]) -> list[float]:
    """One client process: keep-alive requests to one URL for `seconds`; return each latency in s."""
    import http.client

    host, port, method, path, body, seconds = args
    conn = http.client.HTTPConnection(host, port, timeout=30)
    headers = {"Content-Type": "application/json"} if body is not None else {}
    latencies: list[float] = []
    deadline = time.perf_counter() + seconds
    while time.perf_counter() < deadline:
        start = time.perf_counter()
        conn.request(method, path, body=body, headers=headers)
        resp = conn.getresponse()
        resp.read()
        if resp.status != 200:
            raise RuntimeError(f"{method} {path} answered {resp.status}")
        latencies.append(time.perf_counter() - start)
    conn.close()
    return latencies


def measure(
    port: int, method: str, path: str, body: bytes | None = None, clients: int = 4, seconds: float = 3.0
) -> dict[str, float]:
    """Throughput (requests/s) and p50/p95 latency (ms) of one route under `clients` concurrent clients."""
    from multiprocessing import get_context

    _client_worker(("127.0.0.1", port, method, path, body, 0.3))  # warm the route
    with get_context("spawn").Pool(clients) as pool:
        start = time.perf_counter()
        results = pool.map(_client_worker, [("127.0.0.1", port, method, path, body, seconds)] * clients)
        elapsed = time.perf_counter() - start
    latencies = [x for r in results for x in r]
    return {
        "requests": len(latencies),
        "throughput": len(latencies) / elapsed,
        "p50_ms": _percentile(latencies, 0.50) * 1000,
        "p95_ms": _percentile(latencies, 0.95) * 1000,
    }


def synthetic_database(years: int, seed: int = 1, cache_dir: Path | None = None) -> Path:
    """A synthetic history of `years` years, built once and kept in a cache folder for later runs."""
    import datetime as dt

    from stockroom import synth

    cache_dir = cache_dir or Path(tempfile.gettempdir()) / "stockroom-bench"
    cache_dir.mkdir(parents=True, exist_ok=True)
    end = dt.date.today()
    path = cache_dir / f"synth-{years}y-seed{seed}-{end.isoformat()}.db"
    if not path.exists():
        partial = path.with_suffix(".building")
        partial.unlink(missing_ok=True)
        synth.build(str(partial), years=years, seed=seed, end=end)
        partial.rename(path)
    return path


def _serve(path: Path) -> tuple[Any, int]:
    import os
    import socket
    import subprocess
    import sys
    import urllib.request

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    env = dict(os.environ, STOCKROOM_SECRET_KEY="bench", STOCKROOM_LAB_TIMEZONE="UTC")
    proc = subprocess.Popen(
        [sys.executable, "-m", "stockroom.cli", "serve", "--db", str(path), "--port", str(port)],
        env=env,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        try:
            with urllib.request.urlopen(f"http://127.0.0.1:{port}/healthz", timeout=1):
                return proc, port
        except OSError:
            time.sleep(0.1)
    proc.kill()
    raise RuntimeError("the server did not start")


def web_figures(years: int, seconds: float = 3.0, clients: int = 4) -> dict[str, Any]:
    """Serve a synthetic database of `years` years on loopback and measure each route against /healthz."""
    import datetime as dt
    import json
    import sqlite3

    path = synthetic_database(years)
    conn = sqlite3.connect(path)
    code = conn.execute("SELECT code FROM batches ORDER BY id DESC LIMIT 1 OFFSET 5").fetchone()[0]
    conn.close()
    today = dt.date.today().isoformat()
    routes = [
        ("healthz", "GET", "/healthz", None),
        ("dashboard", "GET", "/", None),
        ("batch page", "GET", f"/batches/{code}", None),
        ("lab-day JSON", "GET", f"/api/v1/lab-day?date={today}&titrant=HCl", None),
        ("preview API", "POST", "/api/v1/standardizations/preview", json.dumps(sample_request(100_000)).encode()),
    ]
    proc, port = _serve(path)
    try:
        rows = {name: measure(port, method, url, body, clients, seconds) for name, method, url, body in routes}
    finally:
        proc.terminate()
        proc.wait(timeout=10)
    base = rows["healthz"]["throughput"]
    for r in rows.values():
        r["throughput_ratio"] = r["throughput"] / base
    return {"years": years, "database": str(path), "routes": rows}


def label_sheet_seconds(path: Path, repeats: int = 7) -> float:
    """Median time to build a 30-label letter sheet PDF for a batch of the database at `path` (s)."""
    import datetime as dt

    from stockroom import db as dbmod
    from stockroom import records, settings
    from stockroom.pdf import labels, layouts

    conn = dbmod.connect(path)
    try:
        code = conn.execute("SELECT code FROM batches WHERE reagent = 'HCl' ORDER BY id DESC LIMIT 1").fetchone()[0]
        batch = records.batch_by_code(conn, code)
        content = labels.label_content(
            conn, settings.resolve({"DATABASE": str(path), "SECRET_KEY": "bench"}), batch, dt.date.today()
        )
    finally:
        conn.close()
    layout = layouts.get("sheet-letter-30")
    return _median_seconds(lambda: labels.build_labels(content, layout, 30), repeats)


def print_web_figures(figures: list[dict[str, Any]]) -> None:
    """Print the served-route figures side by side, with ratios to /healthz and between data sizes."""
    print(f"{'route':<14}" + "".join(f"  {f['years']:>2} y: req/s  ratio   p50 ms   p95 ms" for f in figures))
    for name in figures[0]["routes"]:
        line = f"{name:<14}"
        for f in figures:
            r = f["routes"][name]
            line += f"  {r['throughput']:>11.0f}  {r['throughput_ratio']:>5.2f}  {r['p50_ms']:>7.2f}  {r['p95_ms']:>7.2f}"
        print(line)
    for f in figures:
        ratio = f["routes"]["lab-day JSON"]["throughput_ratio"]
        print(f"lab-day JSON at {f['years']} y: {ratio:.2f} of /healthz throughput (goal >= 0.50)")
    if len(figures) == 2:
        small, big = figures
        for name in ("dashboard", "batch page"):
            growth = big["routes"][name]["p95_ms"] / small["routes"][name]["p95_ms"]
            print(f"{name}: p95 at {big['years']} y is {growth:.2f}x the {small['years']} y figure (goal <= 1.2x, and <= 50 ms)")
