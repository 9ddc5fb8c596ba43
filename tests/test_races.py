"""Races on a run's certified value, driven by real concurrent HTTP requests on loopback.

The real app is served by waitress (`stockroom serve` in a subprocess, as test_reliability does);
two signed-in clients (cookies, CSRF tokens read from pages) are released at once by a
threading.Barrier. Each race is repeated 100 times.

Race 1: two people leave out different replicates at once; the current result must count both.
Race 2: one person leaves a replicate out while another accepts; the release must carry the result
computed from every exclusion stored before it, or the accept is refused (409).

Even iterations post exactly what the page holds (one-time form id, result version); odd iterations
leave both out (an older page, a script), so the workflow's own write lock is what is tested.
"""

from __future__ import annotations

import datetime as dt
import re
import statistics
import threading
from html import unescape

import pytest
from test_reliability import PASSWORD, Server, Session

from stockroom import accounts, create_app, records, run_input, schema, workflow
from stockroom import db as dbmod

pytestmark = pytest.mark.slow
TODAY = dt.datetime.now(dt.UTC).date()
ITERATIONS = int(__import__("os").environ.get("RACES_ITERATIONS", "100"))
# Five replicates near 0.1 mol/L NaOH on KHP (invented figures): any two left out still leave three.
MASSES = (0.8012, 0.8107, 0.8203, 0.8301, 0.8398)
TITRES = (39.32, 39.80, 40.27, 40.73, 41.24)


class FastSession(Session):
    """A signed-in client that reads its CSRF token once (it is valid for the whole session)."""

    def __init__(self, base, username):
        super().__init__(base, username)
        self.csrf = self.token("/")

    def send(self, path, data):
        import urllib.error
        import urllib.parse
        import urllib.request

        body = urllib.parse.urlencode(dict(data, csrf_token=self.csrf)).encode()
        req = urllib.request.Request(self.base + path, data=body, method="POST")
        try:
            with self.opener.open(req, timeout=30) as r:
                return r.status, r.read().decode()
        except urllib.error.HTTPError as e:
            return e.code, e.read().decode()


@pytest.fixture
def served(tmp_path):
    """The real app on waitress on a free loopback port, with two staff accounts, a lot and a batch."""
    path = tmp_path / "races.db"
    conn = dbmod.connect(path)
    schema.migrate(conn)
    accounts.HASH_METHOD = "pbkdf2:sha256:1000"
    for name in ("ana", "ben"):
        accounts.create_user(conn, name, name.title(), "staff", PASSWORD, "test")
    lot = records.create_lot(
        conn,
        {
            "substance": "KHP",
            "assay": 1.0,
            "assay_expanded_u": 0.0002,
            "assay_k": 2,
            "expires_on": (TODAY + dt.timedelta(days=300)).isoformat(),
            "dried_on": TODAY.isoformat(),
            "dried_at_c": 120,
        },
        "test",
    )
    batch = records.create_batch(
        conn,
        {"reagent": "NaOH", "nominal_molarity": 0.1, "volume_l": 20, "prepared_on": TODAY.isoformat(), "prepared_by": "t"},
        "test",
    )
    # The app as served (stockroom serve: waitress) in a subprocess on a free loopback port.
    app = create_app({"DATABASE": str(path), "SECRET_KEY": "races", "LAB_TIMEZONE": "UTC"})
    server = Server(path)
    try:
        yield {"base": server.base, "conn": conn, "app": app, "lot": lot, "batch": batch}
    finally:
        server.stop()
        conn.close()


def _new_run(served) -> int:
    data = {
        "method": "primary",
        "purpose": "certify",
        "standard_lot_id": served["lot"]["id"],
        "performed_on": TODAY.isoformat(),
        "analyst": "Ana",
        "burette_capacity_ml": 50.0,
        "replicates": [{"mass_g": m, "initial_ml": 0.10, "final_ml": t + 0.10} for m, t in zip(MASSES, TITRES, strict=True)],
    }
    run = run_input.parse_run(data, today=TODAY, prepared_on=TODAY)
    run_id, _ = workflow.record_run(served["conn"], served["app"].config, served["batch"], run, "ana")
    return run_id


def _form_fields(page: str, action: str) -> dict[str, str]:
    """The hidden fields of the page's form posting to `action`."""
    form = re.search(rf'<form method="post" action="{re.escape(action)}">(.*?)</form>', page, re.S)
    assert form, f"no form posting to {action}"
    return {n: unescape(v) for n, v in re.findall(r'<input type="hidden" name="([^"]+)" value="([^"]*)">', form.group(1))}


def _accept_fields(page: str, run_id: int) -> dict[str, str]:
    forms = re.findall(rf'<form method="post" action="/runs/{run_id}/decide">(.*?)</form>', page, re.S)
    accept = next(f for f in forms if 'name="decision" value="accept"' in f)
    return {n: unescape(v) for n, v in re.findall(r'<input type="hidden" name="([^"]+)" value="([^"]*)">', accept)}


def _mean_kept(conn, run_id: int) -> tuple[float, int]:
    """Mean of the stored replicate molarities not left out, and how many (the result's value by definition)."""
    excluded = {r[0] for r in conn.execute("SELECT position FROM exclusions WHERE run_id = ?", [run_id])}
    kept = [
        r[1] for r in conn.execute("SELECT position, molarity FROM replicates WHERE run_id = ?", [run_id]) if r[0] not in excluded
    ]
    return statistics.fmean(kept), len(kept)


def _together(*posts):
    """Send the (session, path, data) posts from threads released at the same instant; answers in order."""
    barrier = threading.Barrier(len(posts))
    out: list = [None] * len(posts)

    def go(i, post):
        session, path, data = post
        barrier.wait()
        out[i] = session.send(path, data)

    threads = [threading.Thread(target=go, args=(i, p)) for i, p in enumerate(posts)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=60)
    return out


def test_two_exclusions_at_once_both_count(served):
    ana, ben = FastSession(served["base"], "ana"), FastSession(served["base"], "ben")
    conn = served["conn"]
    for i in range(ITERATIONS):
        run_id = _new_run(served)
        action = f"/runs/{run_id}/exclude"
        extra_a = extra_b = {}
        if i % 2 == 0:
            extra_a = {k: v for k, v in _form_fields(ana.get(f"/runs/{run_id}")[1], action).items() if k == "form_id"}
            extra_b = {k: v for k, v in _form_fields(ben.get(f"/runs/{run_id}")[1], action).items() if k == "form_id"}
        (sa, _), (sb, _) = _together(
            (ana, action, {"position": "1", "reason": "spilled at the end point", **extra_a}),
            (ben, action, {"position": "5", "reason": "over-titrated", **extra_b}),
        )
        assert (sa, sb) == (303, 303), f"iteration {i}"
        current = records.run_by_id(conn, run_id)["current"]
        mean, n = _mean_kept(conn, run_id)
        assert n == 3
        assert current["n"] == 3, f"iteration {i}: the current result ignores an exclusion"
        # The result is the mean of the kept replicates (standardization: the run's value is their mean).
        assert current["molarity"] == pytest.approx(mean, rel=1e-12), f"iteration {i}"
        assert current["cause"].startswith("exclusion of replicate")


def test_accept_racing_an_exclusion_never_releases_a_stale_value(served):
    ana, ben = FastSession(served["base"], "ana"), FastSession(served["base"], "ben")
    conn = served["conn"]
    outcomes = {"released": 0, "refused": 0, "both": 0}
    for i in range(ITERATIONS):
        run_id = _new_run(served)
        page_a = ana.get(f"/runs/{run_id}")[1]
        page_b = ben.get(f"/runs/{run_id}")[1]
        exclude_extra: dict[str, str] = {}
        # Every run is on the same batch: from the second on, accepting supersedes the value in force.
        accept = {"decision": "accept", "released_on": TODAY.isoformat(), "reason": "re-standardized (race test)"}
        if i % 2 == 0:
            exclude_extra = {k: v for k, v in _form_fields(page_a, f"/runs/{run_id}/exclude").items() if k == "form_id"}
            shown = _accept_fields(page_b, run_id)
            assert shown["result_version"] == str(records.run_by_id(conn, run_id)["current"]["id"])
            accept.update({k: shown[k] for k in ("form_id", "result_version")})
        (s_ex, body_ex), (s_ac, body_ac) = _together(
            (ana, f"/runs/{run_id}/exclude", {"position": "2", "reason": "bubble in the tip", **exclude_extra}),
            (ben, f"/runs/{run_id}/decide", accept),
        )
        assert s_ex in (303, 409), f"iteration {i}: {s_ex} {body_ex[:200]}"
        assert s_ac in (303, 409), f"iteration {i}: {s_ac} {body_ac[:200]}"
        releases = list(conn.execute("SELECT molarity FROM releases WHERE run_id = ?", [run_id]))
        if s_ac == 409:
            assert releases == [], f"iteration {i}: a refused accept wrote a release"
            assert "the result changed since you opened the page: Replicate 2 was left out by ana" in unescape(body_ac)
            assert "review the new result" in unescape(body_ac)
            outcomes["refused"] += 1
            continue
        assert len(releases) == 1
        # Every exclusion stored precedes the release (a decided run takes none), so the released
        # value must be the mean over the replicates kept by all of them.
        mean, _ = _mean_kept(conn, run_id)
        assert releases[0][0] == pytest.approx(mean, rel=1e-12), f"iteration {i}: a stale value was released"
        if s_ex == 303:
            assert i % 2 == 1, f"iteration {i}: the page's version was stale yet the accept went through"
            outcomes["both"] += 1
        else:
            assert "already been decided" in unescape(body_ex)
            outcomes["released"] += 1
    assert sum(outcomes.values()) == ITERATIONS
    print("race 2 outcomes:", outcomes)
