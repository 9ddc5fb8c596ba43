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


def _client_worker(args: tuple[str, int, str, str, bytes | None, float, str | None]) -> list[float]:
    """One client process: keep-alive requests to one URL for `seconds`; return each latency in s."""
    import http.client

    host, port, method, path, body, seconds, cookie = args
    conn = http.client.HTTPConnection(host, port, timeout=30)
    headers = {"Content-Type": "application/json"} if body is not None else {}
    if cookie:
        headers["Cookie"] = cookie
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


def _cpu_seconds(pid: int | None) -> float | None:
    """CPU time (user + system, s) a process has used so far, all its threads; None where /proc is not there."""
    import os

    if pid is None:
        return None
    try:
        fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    except OSError:
        return None
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def measure(
    port: int,
    method: str,
    path: str,
    body: bytes | None = None,
    clients: int = 4,
    seconds: float = 3.0,
    cookie: str | None = None,
    server_pid: int | None = None,
) -> dict[str, float]:
    """Throughput (requests/s), p50/p95 latency (ms) of one route under `clients` concurrent clients.

    With server_pid (Linux): also cpu_ms, the server's CPU time per request (ms), which other work on a
    shared machine slows far less than wall time.
    """
    from multiprocessing import get_context

    _client_worker(("127.0.0.1", port, method, path, body, 0.3, cookie))  # warm the route
    cpu_before = _cpu_seconds(server_pid)
    if clients == 1:  # one client: no process pool, whose start-up would count in the elapsed time
        start = time.perf_counter()
        results = [_client_worker(("127.0.0.1", port, method, path, body, seconds, cookie))]
        elapsed = time.perf_counter() - start
    else:
        with get_context("spawn").Pool(clients) as pool:
            start = time.perf_counter()
            results = pool.map(_client_worker, [("127.0.0.1", port, method, path, body, seconds, cookie)] * clients)
            elapsed = time.perf_counter() - start
    cpu_after = _cpu_seconds(server_pid)
    latencies = [x for r in results for x in r]
    out = {
        "requests": len(latencies),
        "throughput": len(latencies) / elapsed,
        "p50_ms": _percentile(latencies, 0.50) * 1000,
        "p95_ms": _percentile(latencies, 0.95) * 1000,
    }
    if cpu_before is not None and cpu_after is not None and latencies:
        out["cpu_ms"] = (cpu_after - cpu_before) * 1000 / len(latencies)
    return out


def synthetic_database(years: int, seed: int = 1, cache_dir: Path | None = None) -> Path:
    """A synthetic history of `years` years, built once and kept in a cache folder for later runs."""
    import datetime as dt

    from stockroom import schema, synth

    cache_dir = cache_dir or Path(tempfile.gettempdir()) / "stockroom-bench"
    cache_dir.mkdir(parents=True, exist_ok=True)
    end = dt.date.today()
    # The schema version is in the name: a database built by an older stockroom is built again.
    path = cache_dir / f"synth-{years}y-seed{seed}-v{schema.SCHEMA_VERSION}-{end.isoformat()}.db"
    if not path.exists():
        partial = path.with_suffix(".building")
        partial.unlink(missing_ok=True)
        synth.build(str(partial), years=years, seed=seed, end=end)
        # The trail's key and head log are named after the database file: they move with it, so the
        # served copy can record (a sign-in) and check its keyed chain.
        for suffix in (".trail-key", ".trail-head"):
            side = Path(str(partial) + suffix)
            if side.exists():
                side.rename(str(path) + suffix)
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


# The goals of issue 20: each of these costs what its page shows, so its single-client median at N
# years stays within FLAT_GOAL of the 1-year figure; and the cached lab-day answer keeps at least
# LAB_DAY_GOAL of /healthz's throughput on the same server in the same run.
FLAT_GOAL = 1.2
LAB_DAY_GOAL = 0.8
# (name, URL, signed in?): {code} a recent batch, {recall} the newest recall, {today} the lab's date,
# {month} last month as batch codes write it (YYMM)
ROUTES: tuple[tuple[str, str, bool], ...] = (
    ("healthz", "/healthz", False),
    ("dashboard", "/", False),
    ("batch list", "/batches/", False),
    ("list: titrant", "/batches/?reagent=HCl", False),
    ("list: expired", "/batches/?status=expired", False),
    ("list: in service", "/batches/?status=in_service", False),
    ("list: search", "/batches/?q={month}", False),  # last month's batch codes (YYMM): a search that finds a few
    ("batch page", "/batches/{code}", False),
    ("batches JSON", "/api/v1/batches?limit=200", False),
    ("audit trail", "/audit", True),
    ("recall list", "/recalls/", False),
    ("recall page", "/recalls/{recall}", False),
    ("lab-day JSON", "/api/v1/lab-day?date={today}&titrant=HCl", False),
)
FLAT_ROUTES = tuple(name for name, _, _ in ROUTES if name not in ("healthz", "lab-day JSON"))


def _served_copy(source: Path, folder: Path) -> tuple[Path, str, str]:
    """A copy of a cached synthetic database (with its trail key) and a bench account in it: (path, user, password)."""
    import secrets
    import shutil

    from stockroom import accounts
    from stockroom import db as dbmod

    target = folder / source.name
    shutil.copyfile(source, target)
    for suffix in (".trail-key", ".trail-head"):
        side = Path(str(source) + suffix)
        if side.exists():
            shutil.copyfile(side, str(target) + suffix)
    password = secrets.token_urlsafe(18)
    conn = dbmod.connect(target)
    try:
        accounts.create_user(conn, "bench-reader", "Bench reader", "staff", password, actor="benchmark")
    finally:
        conn.close()
    return target, "bench-reader", password


def _sign_in_cookie(port: int, username: str, password: str) -> str:
    """Sign in over HTTP like a browser (the form's CSRF token and the session cookie); the Cookie header to send."""
    import http.client
    import re
    from urllib.parse import urlencode

    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=30)
    try:
        conn.request("GET", "/sign-in")
        resp = conn.getresponse()
        page = resp.read().decode()
        jar = _cookies(resp, {})
        cookie = "; ".join(f"{k}={v}" for k, v in jar.items())
        found = re.search(r'name="csrf_token" value="([^"]+)"', page)
        if found is None:
            raise RuntimeError("the sign-in page has no CSRF token")
        form = urlencode({"csrf_token": found.group(1), "username": username, "password": password})
        headers = {"Content-Type": "application/x-www-form-urlencoded", "Cookie": cookie}
        conn.request("POST", "/sign-in", body=form, headers=headers)
        resp = conn.getresponse()
        resp.read()
        if resp.status != 303:
            raise RuntimeError(f"the benchmark could not sign in over HTTP (status {resp.status})")
        return "; ".join(f"{k}={v}" for k, v in _cookies(resp, jar).items())
    finally:
        conn.close()


def _cookies(resp: Any, jar: dict[str, str]) -> dict[str, str]:
    """The cookie jar updated with every Set-Cookie header of an http.client response (name -> value)."""
    out = dict(jar)
    for header in resp.msg.get_all("Set-Cookie") or []:
        name, _, value = header.split(";")[0].partition("=")
        out[name.strip()] = value.strip()
    return out


def web_figures(years: int | list[int], seconds: float = 3.0, clients: int = 4, rounds: int = 3) -> dict[str, Any]:
    """Serve synthetic databases of each size at once on loopback and measure every route in turn.

    years: the sizes (years of history); seconds: load time per route and round (s); clients: the
    concurrent clients of the throughput case; rounds: how many times each measurement is repeated,
    the sizes taking turns within a round so that a busy machine weighs on all of them alike.
    Returns sizes, databases (years -> the cached file), latency (route -> years -> median of the
    rounds' single-client p50, ms), throughput (years -> route -> median requests/s with `clients`
    clients, for /healthz and the lab-day JSON) and the ratios with their goals.
    """
    import datetime as dt
    import json
    import sqlite3
    import statistics as stats

    sizes = [years] if isinstance(years, int) else list(years)
    today = dt.date.today().isoformat()
    month = (dt.date.today().replace(day=1) - dt.timedelta(days=1)).strftime("%y%m")
    out: dict[str, Any] = {"sizes": sizes, "databases": {}, "rounds": rounds, "clients": clients}
    latency: dict[str, dict[int, list[float]]] = {name: {y: [] for y in sizes} for name, _, _ in ROUTES}
    latency["preview API"] = {y: [] for y in sizes}
    cpu: dict[str, dict[int, list[float]]] = {name: {y: [] for y in sizes} for name in latency}
    rate: dict[int, dict[str, list[float]]] = {y: {"healthz": [], "lab-day JSON": []} for y in sizes}
    rate_cpu: dict[int, dict[str, list[float]]] = {y: {"healthz": [], "lab-day JSON": []} for y in sizes}
    with tempfile.TemporaryDirectory() as tmp:
        servers: dict[int, tuple[Any, int, str, dict[str, str]]] = {}
        try:
            for y in sizes:
                source = synthetic_database(y)
                out["databases"][y] = str(source)
                path, user, password = _served_copy(source, Path(tmp))
                conn = sqlite3.connect(path)
                code = conn.execute("SELECT code FROM batches ORDER BY id DESC LIMIT 1 OFFSET 5").fetchone()[0]
                recall = conn.execute("SELECT max(id) FROM recalls").fetchone()[0]
                conn.close()
                proc, port = _serve(path)
                servers[y] = (
                    proc,
                    port,
                    _sign_in_cookie(port, user, password),
                    {"code": code, "recall": recall, "today": today, "month": month},
                )
            preview = json.dumps(sample_request(100_000)).encode()
            for _ in range(rounds):
                for name, url, signed in ROUTES:
                    for y in sizes:
                        _, port, cookie, fill = servers[y]
                        if "{recall}" in url and fill["recall"] is None:
                            continue
                        proc = servers[y][0]
                        r = measure(port, "GET", url.format(**fill), None, 1, seconds, cookie if signed else None, proc.pid)
                        latency[name][y].append(r["p50_ms"])
                        if "cpu_ms" in r:
                            cpu[name][y].append(r["cpu_ms"])
                for y in sizes:
                    proc = servers[y][0]
                    r = measure(servers[y][1], "POST", "/api/v1/standardizations/preview", preview, 1, seconds, None, proc.pid)
                    latency["preview API"][y].append(r["p50_ms"])
                    if "cpu_ms" in r:
                        cpu["preview API"][y].append(r["cpu_ms"])
                    for name, url in (("healthz", "/healthz"), ("lab-day JSON", f"/api/v1/lab-day?date={today}&titrant=HCl")):
                        r = measure(servers[y][1], "GET", url, None, clients, seconds, None, servers[y][0].pid)
                        rate[y][name].append(r["throughput"])
                        if "cpu_ms" in r:
                            rate_cpu[y][name].append(r["cpu_ms"])
        finally:
            for proc, *_ in servers.values():
                proc.terminate()
                proc.wait(timeout=10)
    out["latency"] = {name: {y: stats.median(v) for y, v in by.items() if v} for name, by in latency.items()}
    out["cpu"] = {name: {y: stats.median(v) for y, v in by.items() if v} for name, by in cpu.items()}
    out["throughput"] = {y: {name: stats.median(v) for name, v in by.items()} for y, by in rate.items()}
    out["lab_day_ratio"] = {y: t["lab-day JSON"] / t["healthz"] for y, t in out["throughput"].items()}
    # The same comparison in the server's CPU time per request under load (healthz's over the lab day's):
    # the share of /healthz's throughput the lab-day answer would keep on an otherwise idle machine.
    out["lab_day_cpu_ratio"] = {
        y: stats.median(c["healthz"]) / stats.median(c["lab-day JSON"])
        for y, c in rate_cpu.items()
        if c["healthz"] and c["lab-day JSON"]
    }
    small, big = sizes[0], sizes[-1]

    def growth(table: dict[str, dict[int, float]]) -> dict[str, float]:
        if big == small:
            return {}
        return {n: table[n][big] / table[n][small] for n in FLAT_ROUTES if big in table.get(n, {}) and small in table[n]}

    # The goal is judged on the server's CPU time per request where it can be read (the cost of the page
    # itself, which a busy shared machine hardly changes), else on the single-client median.
    out["p50_ratio"] = growth(out["latency"])
    out["cpu_ratio"] = growth(out["cpu"])
    out["judged_on"] = "CPU time per request" if out["cpu_ratio"] else "single-client median"
    out["flat_ratio"] = out["cpu_ratio"] or out["p50_ratio"]
    out["met"] = all(r <= FLAT_GOAL for r in out["flat_ratio"].values()) and all(
        r >= LAB_DAY_GOAL for r in out["lab_day_ratio"].values()
    )
    return out


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


def print_web_figures(figures: dict[str, Any]) -> None:
    """Print the served-route figures: medians per size, the growth ratios and the lab-day ratio, with goals."""
    sizes = figures["sizes"]
    small, big = sizes[0], sizes[-1]
    head = f"{'route':<17}" + "".join(f"  {y:>3} y p50 ms  {y:>3} y CPU ms" for y in sizes)
    if big != small:
        head += f"  p50 {big}/{small}  CPU {big}/{small} (goal <= {FLAT_GOAL:g})"
    print(head)
    for name, by in figures["latency"].items():
        if not by:
            continue
        line = f"{name:<17}"
        for y in sizes:
            line += f"  {by.get(y, float('nan')):>12.2f}  {figures['cpu'].get(name, {}).get(y, float('nan')):>12.2f}"
        ratio = figures["flat_ratio"].get(name)
        if ratio is not None:
            line += (
                f"  {figures['p50_ratio'].get(name, float('nan')):>9.2f}  {figures['cpu_ratio'].get(name, float('nan')):>8.2f}"
            )
            line += f" {'ok' if ratio <= FLAT_GOAL else 'OVER'}"
        print(line)
    if big != small:
        print(f"growth from {small} y to {big} y judged on {figures['judged_on']} (goal <= {FLAT_GOAL:g})")
    for y in sizes:
        t = figures["throughput"][y]
        ratio = figures["lab_day_ratio"][y]
        print(
            f"lab-day JSON at {y} y: {t['lab-day JSON']:.0f} req/s, {ratio:.2f} of /healthz throughput "
            f"({t['healthz']:.0f} req/s) (goal >= {LAB_DAY_GOAL:g}) {'ok' if ratio >= LAB_DAY_GOAL else 'UNDER'}"
            + (f"; by server CPU per request {figures['lab_day_cpu_ratio'][y]:.2f}" if y in figures["lab_day_cpu_ratio"] else "")
        )
    print(
        f"medians of {figures['rounds']} rounds, the sizes taking turns; throughput with {figures['clients']} clients: "
        + ("goals met" if figures["met"] else "GOALS NOT MET")
    )
