"""Load the invented demo scenario (demo_data/scenario.json) into a fresh database."""

from __future__ import annotations

import datetime as dt
import json
import secrets
from typing import Any

from stockroom import curve_synth, planning, prep_plan, records, run_input, schema, settings, workflow
from stockroom import db as dbmod
from stockroom.records import lab_sessions
from stockroom.resources import resource_dir
from stockroom.schedule_input import SessionInput


def load_scenario() -> dict[str, Any]:
    """The scenario as shipped (days relative to the day it is built)."""
    return json.loads((resource_dir("demo_data") / "scenario.json").read_text(encoding="utf-8"))


def build_demo(path: str, today: dt.date | None = None, password: str | None = None) -> list[str]:
    """Create a database at `path` holding the demo scenario anchored at `today`; return summary lines.

    password: the demo users' password (tests pass a known one); None makes a fresh random one.
    """
    scenario = load_scenario()
    today = today or dt.date.today()

    def day(n: int) -> str:
        return (today + dt.timedelta(days=n)).isoformat()

    config = settings.resolve({"DATABASE": path, "SECRET_KEY": "demo-build"})
    conn = dbmod.connect(path)
    try:
        schema.migrate(conn)
        lines = [scenario["title"]]
        lines += _demo_users(conn, scenario["users"], password)
        lots = {}
        for lot in scenario["lots"]:
            values = {k: v for k, v in lot.items() if not k.endswith("_day") and k != "key"}
            values["assay_expanded_u"] = values.pop("assay_U")
            values["expires_on"] = day(lot["expires_day"])
            values["dried_on"] = day(lot["dried_day"]) if "dried_day" in lot else None
            values["received_on"] = day(lot["received_day"]) if "received_day" in lot else None
            lots[lot["key"]] = records.create_lot(conn, values, "demo-loader")
        batches: dict[str, dict[str, Any]] = {}
        for b in sorted(scenario["batches"], key=lambda b: b["prepared_day"]):
            values = {k: v for k, v in b.items() if k not in ("key", "runs", "withdrawn", "prepared_day")}
            values["prepared_on"] = day(b["prepared_day"])
            batches[b["key"]] = records.create_batch(conn, values, "demo-loader")
        # Runs in date order across batches, so a reference is released before it is used.
        runs = sorted(((r["day"], b["key"], r) for b in scenario["batches"] for r in b["runs"]), key=lambda t: t[0])
        for run_day, key, r in runs:
            batch = batches[key]
            excluded = {e["position"]: e["reason"] for e in r.get("exclusions", [])}
            data: dict[str, Any] = {
                "method": r.get("method", "primary"),
                "purpose": r["purpose"],
                "performed_on": day(run_day),
                "analyst": r["analyst"],
                "endpoint": r.get("endpoint", ""),
                "burette_capacity_ml": r.get("burette_capacity_ml", 50.0),
                "notes": r.get("notes", ""),
                "replicates": [_replicate(x, excluded.get(i)) for i, x in enumerate(r["replicates"], start=1)],
            }
            if r.get("method") == "secondary":
                data["reference_batch"] = batches[r["reference"]]["code"]
            else:
                data["standard_lot_id"] = lots[r["lot"]]["id"]
            actor = _username(scenario["users"], r["analyst"])
            run = run_input.parse_run(data, today=today, prepared_on=dt.date.fromisoformat(batch["prepared_on"]))
            # The history is written at the run's day (mid-day UTC), not the moment the demo is built.
            with dbmod.clock_at(dt.datetime.combine(today + dt.timedelta(days=run_day), dt.time(12), dt.UTC)):
                run_id, _ = workflow.record_run(conn, config, batch, run, actor)
                if r.get("decision") == "accept":
                    workflow.accept(conn, run_id, actor, reason=r.get("reason", ""))
                elif r.get("decision") == "reject":
                    workflow.reject(conn, run_id, r["reason"], actor)
        for b in scenario["batches"]:
            if "withdrawn" in b:
                records.withdraw_batch(
                    conn,
                    batches[b["key"]]["id"],
                    dt.date.fromisoformat(day(b["withdrawn"]["day"])),
                    b["withdrawn"]["reason"],
                    "okafor",
                )
        lines.append(f"{len(batches)} batches, {len(lots)} standard lots, {len(runs)} runs")
        lines += demo_dispensings(conn, batches, today)
        lines.append(add_potentiometric_run(conn, config, lots["khp"], today))
        lines += demo_term_schedule(conn, today, config)
    finally:
        conn.close()
    return lines


# The invented potentiometric run: masses of KHP (g), the strength its curves are generated with (mol/L),
# and one noise seed per replicate (so the demo is the same every time it is built).
POTENTIOMETRIC_MASSES_G = (0.8150, 0.8221, 0.8097)
POTENTIOMETRIC_TRUE_MOLARITY = 0.1003
POTENTIOMETRIC_SEEDS = (20261, 20262, 20263)
# Each replicate's own small error (weighing, delivery), as a relative shift of the strength its curve shows.
POTENTIOMETRIC_SCATTER = (0.00031, -0.00042, 0.00018)


def add_potentiometric_run(conn: Any, config: dict[str, Any], lot: dict[str, Any], today: dt.date) -> str:
    """Add the invented potentiometric run: a fresh 0.1 mol/L NaOH batch titrated against KHP with a glass
    electrode, each replicate's pH curve generated by stockroom.curve_synth (exact charge balance, 0.01 pH
    seeded noise) and its titre located on the curve. The run is left for review (not decided).
    Returns a summary line."""
    with dbmod.clock_at(dt.datetime.combine(today - dt.timedelta(days=2), dt.time(9), dt.UTC)):
        batch = records.create_batch(
            conn,
            {
                "reagent": "NaOH",
                "nominal_molarity": 0.1,
                "volume_l": 10.0,
                "prepared_on": (today - dt.timedelta(days=2)).isoformat(),
                "prepared_by": "J. Abara",
                "water_grade": "boiled, CO2-free deionized",
                "notes": "invented demo batch: standardized potentiometrically (pH curves)",
            },
            "demo-loader",
        )
    curves = [
        curve_synth.khp_curve(m, POTENTIOMETRIC_TRUE_MOLARITY * (1 + e), seed=s)
        for m, s, e in zip(POTENTIOMETRIC_MASSES_G, POTENTIOMETRIC_SEEDS, POTENTIOMETRIC_SCATTER, strict=True)
    ]
    data = {
        "purpose": "certify",
        "performed_on": (today - dt.timedelta(days=1)).isoformat(),
        "analyst": "R. Okafor",
        "endpoint": "glass electrode, pH; end point by the derivative method",
        "burette_capacity_ml": 50.0,
        "temperature_c": 20.5,
        "standard_lot_id": lot["id"],
        "notes": "invented demo run: pH curves generated from the charge balance with seeded noise",
        "curve_reading": "ph",
        "curve_method": "derivative",
        "replicates": [
            {"mass_g": m, "curve": curve_synth.as_text(c)} for m, c in zip(POTENTIOMETRIC_MASSES_G, curves, strict=True)
        ],
    }
    run = run_input.parse_run(data, today=today, prepared_on=dt.date.fromisoformat(batch["prepared_on"]))
    with dbmod.clock_at(dt.datetime.combine(today - dt.timedelta(days=1), dt.time(12), dt.UTC)):
        run_id, result = workflow.record_run(conn, config, batch, run, "okafor")
    return f"potentiometric run {run_id} on {batch['code']}: {result.molarity:.5f} mol/L from 3 pH curves (invented)"


def _replicate(x: dict[str, Any], exclude_reason: str | None) -> dict[str, Any]:
    """A scenario replicate in stockroom.run_input's shape (the scenario stores mass by difference as
    mass_gross_g/mass_tare_g, as the records do)."""
    names = {"mass_gross_g": "gross_g", "mass_tare_g": "tare_g"}
    rep = {names.get(k, k): v for k, v in x.items()}
    if exclude_reason:
        rep["exclude_reason"] = exclude_reason
    return rep


def _username(users: list[dict[str, Any]], display: str) -> str:
    return next((u["username"] for u in users if u["display_name"] == display), "demo-loader")


def _demo_users(conn: Any, users: list[dict[str, Any]], password: str | None = None) -> list[str]:
    """Create the scenario's users with one password (fresh and random unless given), printed once."""
    try:
        from stockroom import accounts
    except ImportError:  # accounts arrive with the sign-in work
        return []
    password = password or "demo-" + secrets.token_urlsafe(9)
    for u in users:
        accounts.create_user(conn, u["username"], u["display_name"], u["role"], password, "demo-loader")
    names = ", ".join(f"{u['username']} ({u['role']})" for u in users)
    return [f"sign in as any of: {names}", f"demo password (this database only): {password}"]


# ------------------------------------------------------------------------------------ tracking (dispensings)


def load_dispensings() -> dict[str, Any]:
    """The invented dispensings, losses and disposals of the demo (demo_data/dispensings.json)."""
    return json.loads((resource_dir("demo_data") / "dispensings.json").read_text(encoding="utf-8"))


def demo_dispensings(conn: Any, batches: dict[str, dict[str, Any]], today: dt.date) -> list[str]:
    """Fill the demo's invented bench bottles and reservoirs through the same write the forms use; summary lines.

    batches: scenario key -> batches row; days in the file are relative to `today`.
    """
    from dataclasses import replace

    from stockroom import readmodel, stock
    from stockroom.records import containers

    data = load_dispensings()

    def at(n: int) -> dt.date:
        return today + dt.timedelta(days=n)

    def noon(n: int) -> Any:
        return dbmod.clock_at(dt.datetime.combine(at(n), dt.time(12), dt.UTC))

    pol = data["policy"]
    current = records.policy_for(conn, pol["reagent"], at(pol["from_day"]))
    with noon(pol["from_day"]):
        records.add_policy(
            conn,
            replace(current, container_shelf_life_days=pol["container_shelf_life_days"]),
            at(pol["from_day"]),
            pol["reason"],
            "demo-admin",
        )
    events = [(d["day"], 0, d) for d in data["dispensings"]] + [(x["day"], 1, x) for x in data["losses"]]
    made: list[dict[str, Any]] = []
    for day_n, kind, item in sorted(events, key=lambda t: (t[0], t[1])):
        actor = item["by"].lower()
        batch = batches[item["batch"]]
        with noon(day_n):
            if kind == 0:
                d = stock.Dispensing(
                    item["volume_l"], at(day_n), item["kind"], stock.Destination(item["room"], item["course"], item["section"])
                )
                made.append(containers.dispense(conn, batch, d, actor, facts_of=readmodel.batch_facts))
            else:
                change = stock.VolumeChange(item["kind"], item["volume_l"], at(day_n), item["reason"])
                containers.record_volume_change(conn, batch, change, actor)
    for x in data["disposals"]:
        with noon(x["day"]):
            box = containers.container_by_code(conn, made[x["container"] - 1]["code"])
            containers.dispose_container(conn, box, at(x["day"]), x["reason"], x["by"].lower())
    return [f"{len(made)} containers filled for invented lab sections, {len(data['losses'])} loss recorded"]


# ---------------------------------------------------------------- the invented term schedule

# Invented courses and sections (no real institution's timetable): course, sections, room, weekday of
# each section's lab (0 = Monday), titrant, nominal mol/L, litres one section's session needs.
DEMO_TERM = (
    ("CHM 110", ("A", "B", "C"), "214", (0, 2, 3), "H2SO4", 0.1, None),
    ("CHM 120", ("A", "B"), "118", (1, 3), "HCl", 1.0, 0.6),
)
DEMO_SHORT = ("H2SO4", 0.1)  # the titrant the demo's schedule runs short of
DEMO_SHORT_FROM_DAY = 10  # its first shortfall falls on the first of its sessions from this day on
DEMO_WEEKS_BACK, DEMO_WEEKS_AHEAD = 2, 8


def demo_term_schedule(conn: Any, today: dt.date, config: dict[str, Any]) -> list[str]:
    """Enter an invented term's lab schedule so that the prep plan shows one coming shortfall; summary lines.

    The sessions of every titrant but DEMO_SHORT are kept within what stays in force (a titrant's
    sessions stop at the first date it would run short, a re-check falling due included); DEMO_SHORT's
    volume per session is sized from the litres in force when the demo is built, so that it runs short
    at its first session on or after DEMO_SHORT_FROM_DAY days from today, whatever was dispensed before.
    """
    lead = planning.lead_days(config)
    monday = today - dt.timedelta(days=today.weekday())
    end = monday + dt.timedelta(weeks=DEMO_WEEKS_AHEAD)
    supplies = planning.supplies(conn, {row[4] for row in DEMO_TERM}, today)
    note = "invented term schedule (demo)"
    chosen: list[SessionInput] = []
    for course, sections, room, weekdays, reagent, nominal, litres in DEMO_TERM:
        dates = sorted(
            (monday + dt.timedelta(weeks=w, days=wd), section)
            for w in range(-DEMO_WEEKS_BACK, DEMO_WEEKS_AHEAD)
            for section, wd in zip(sections, weekdays, strict=True)
        )
        key = prep_plan.titrant_key(reagent, nominal)
        mine = [s for s in supplies if prep_plan.titrant_key(s.reagent, s.nominal_molarity) == key]
        if litres is None:  # the short titrant: size each session from the litres in force today
            in_force = sum(s.remaining_l for s in mine if prep_plan.usable_on(s.facts, today) is not None)
            before = sum(1 for d, _ in dates if today <= d < today + dt.timedelta(days=DEMO_SHORT_FROM_DAY))
            litres = min(50.0, max(0.5, round(in_force / (before + 0.5) * 20) / 20))
        sessions = [SessionInput(d, course, section, room, reagent, nominal, litres, note) for d, section in dates]
        if key != DEMO_SHORT:
            demands = [
                prep_plan.Demand(i, s.session_on, s.course, s.section, s.room, s.reagent, s.nominal_molarity, s.volume_needed_l)
                for i, s in enumerate(sessions)
            ]
            short_on = prep_plan.plan(mine, demands, today=today, start=today, end=end, lead_days=lead).titrants
            cut = short_on[0].shortfall_on if short_on else None
            if cut is not None:
                sessions = [s for s in sessions if s.session_on < cut]
        chosen += sessions
    lab_sessions.add_sessions(conn, chosen, "demo-loader", source="demo")
    plan = planning.build_plan(conn, today=today, start=today, end=end, lead=lead)
    short = [t for t in plan.titrants if t.short]
    lines = [f"{len(chosen)} lab sessions in an invented term schedule"]
    lines += [
        f"prep plan: {t.reagent} {t.nominal_molarity:g} mol/L runs short on {t.shortfall_on}; make a new batch by {t.make_by}"
        for t in short
    ]
    return lines
