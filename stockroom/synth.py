"""A plausible, clearly synthetic prep-room history for load tests and the benchmark.

Every record is written through the same workflow the web forms use (so the data obeys every rule),
inside one transaction, with a seeded generator: the same seed and end date give the same history.
All names are marked synthetic.
"""

from __future__ import annotations

import datetime as dt
import random
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from stockroom import chemistry, records, run_input, schema, settings, workflow
from stockroom import db as dbmod
from stockroom import recall as recall_mod

SYNTH_USERS = ("synth-staff-1", "synth-staff-2", "synth-staff-3")


@dataclass(frozen=True)
class Recipe:
    """One kind of batch the synthetic prep room makes: titrant, nominal mol/L, standard, mass range g."""

    reagent: str
    nominal: float
    standard: str
    mass_range: tuple[float, float]
    weight: int


RECIPES = (
    Recipe("HCl", 0.1, "Na2CO3", (0.19, 0.23), 6),
    Recipe("HCl", 1.0, "TRIS", (4.3, 4.9), 2),
    Recipe("NaOH", 0.1, "KHP", (0.78, 0.88), 7),
    Recipe("NaOH", 0.5, "KHP", (3.9, 4.4), 1),
    Recipe("H2SO4", 0.05, "Na2CO3", (0.19, 0.23), 2),
    Recipe("H2SO4", 0.1, "Na2CO3", (0.40, 0.45), 2),
    Recipe("KOH", 0.1, "KHP", (0.78, 0.88), 1),
    Recipe("HNO3", 0.1, "TRIS", (0.45, 0.52), 1),
)


def _buoyancy(rho: float) -> float:
    return 1 + 0.0012 * (1 / rho - 1 / 8.0)


def _primary_reps(rng: random.Random, recipe: Recipe, c_true: float, n: int, scatter: float) -> list[dict[str, Any]]:
    std = chemistry.standard(recipe.standard)
    nu = chemistry.stoichiometric_factor(chemistry.titrant(recipe.reagent), std)
    m_std = std.molar_mass.value
    reps = []
    for _ in range(n):
        tare = round(rng.uniform(0.8, 1.6), 4)
        gross = round(tare + rng.uniform(*recipe.mass_range), 4)
        mass = gross - tare
        volume = 1000 * mass * nu * _buoyancy(std.density_g_cm3) / (m_std * c_true) * (1 + rng.gauss(0, scatter))
        initial = round(rng.uniform(0.02, 0.6), 2)
        final = round(initial + volume, 2)
        if final > 50:
            initial, final = 0.02, round(0.02 + volume, 2)
        reps.append(
            {
                "gross_g": gross,
                "tare_g": tare,
                "initial_ml": initial,
                "final_ml": final,
                "blank_ml": 0.0,
                "temperature_c": round(rng.uniform(19.5, 23.5), 1),
            }
        )
    return reps


# The history's length: up to fifty years (a department's records kept for decades), never before
# the register's earliest date.
MAX_YEARS = 50
# About this many batches a year at full volume (the default); a smaller per_year thins them out.
FULL_PER_YEAR = 200


def _policies_from(conn: Any, start: dt.date) -> None:
    """Put the starting policies in force from `start` when the history begins before they do.

    The migrations record the starting policies from a fixed date; a longer history needs the same
    policy in force from its first day, recorded (as any policy change is) with its reason.
    """
    first = conn.execute("SELECT min(effective_from) FROM reagent_policies").fetchone()[0]
    if first is None or dt.date.fromisoformat(first) <= start:
        return
    for policy in records.policies(conn, dt.date.fromisoformat(first)).values():
        records.add_policy(conn, policy, start, "the synthetic history begins before the starting policies (synthetic)", "synth")


def build(
    path: str,
    years: int = 10,
    seed: int = 1,
    end: dt.date | None = None,
    progress: Callable[[str], None] | None = None,
    per_year: int = FULL_PER_YEAR,
) -> dict[str, int]:
    """Write a synthetic history of `years` years ending on `end` into a new database at `path`.

    About `per_year` batches a year (at most FULL_PER_YEAR, 200), each standardized with 3-5 replicates
    and re-checked on its policy's interval until it is used up; NaOH and KOH slowly lose strength.
    years: 1..MAX_YEARS. Returns row counts.
    """
    if not 1 <= years <= MAX_YEARS:
        raise ValueError(f"years must be between 1 and {MAX_YEARS}")
    if not 1 <= per_year <= FULL_PER_YEAR:
        raise ValueError(f"per_year must be between 1 and {FULL_PER_YEAR}")
    rng = random.Random(seed)
    end = end or dt.date.today()
    start = end - dt.timedelta(days=365 * years)
    # Fewer Monte Carlo draws keep the build quick; GUM values, which are what is released, are unaffected.
    config = settings.resolve({"DATABASE": path, "SECRET_KEY": "synth", "MONTE_CARLO_DRAWS": 2000})
    conn = dbmod.connect(path)
    schema.migrate(conn)
    weights = [r.weight for r in RECIPES]
    keep = per_year / FULL_PER_YEAR
    thin = random.Random(seed + 1)
    with dbmod.write(conn):
        _policies_from(conn, start)
        lots: dict[tuple[str, int], dict[str, Any]] = {}
        for year in range(years + 1):
            for key in {r.standard for r in RECIPES}:
                received = start + dt.timedelta(days=365 * year - 30)
                lots[(key, year)] = records.create_lot(
                    conn,
                    {
                        "substance": key,
                        "supplier": "Synthetic Supplies (synthetic)",
                        "supplier_lot": f"SYN-{key[:3].upper()}-{year:02d}",
                        "assay": round(rng.uniform(0.9990, 1.0), 5),
                        "assay_expanded_u": 0.0004,
                        "assay_k": 2.0,
                        "expires_on": (received + dt.timedelta(days=800)).isoformat(),
                        "dried_on": received.isoformat(),
                        "dried_at_c": {"Na2CO3": 280, "KHP": 120, "TRIS": 100}.get(key),
                        "received_on": received.isoformat(),
                    },
                    "synth",
                )
        day = start
        n_batches = 0
        while day <= end:
            for _ in range(rng.choice((0, 1, 1, 1, 2, 2))):
                # Thinning draws from its own stream only when asked, so full volume keeps its history.
                if keep < 1 and thin.random() >= keep:
                    continue
                recipe = rng.choices(RECIPES, weights)[0]
                _one_batch(conn, config, rng, recipe, day, end, lots[(recipe.standard, (day - start).days // 365)])
                n_batches += 1
            day += dt.timedelta(days=rng.choice((1, 2, 2, 3)))
            if progress and day.day == 1:
                progress(f"{day.isoformat()}: {n_batches} batches")
        _recall(conn, start, end, lots[("KHP", 0)])
    counts = {
        t: conn.execute(f"SELECT count(*) FROM {t}").fetchone()[0]
        for t in ("batches", "runs", "replicates", "releases", "withdrawals", "events")
    }
    conn.close()
    return counts


def _recall(conn: Any, start: dt.date, end: dt.date, lot: dict[str, Any]) -> None:
    """One recall of the first year's KHP lot, opened in the history's first year and cleared a month later.

    The recall pages and every status look-up then have a recall to follow, as a real register does.
    """
    opened = min(end, start + dt.timedelta(days=200))
    rid = recall_mod.open_recall(
        conn, "lot", lot["id"], start, "supplier reissued the certificate of analysis (synthetic)", opened, SYNTH_USERS[0]
    )
    recall_mod.clear_recall(
        conn,
        rid,
        None,
        min(end, opened + dt.timedelta(days=30)),
        "supplier confirmed the original assay (synthetic)",
        SYNTH_USERS[0],
    )


def _one_batch(
    conn: Any, config: Any, rng: random.Random, recipe: Recipe, prepared: dt.date, end: dt.date, lot: dict[str, Any]
) -> None:
    actor = rng.choice(SYNTH_USERS)
    batch = records.create_batch(
        conn,
        {
            "reagent": recipe.reagent,
            "nominal_molarity": recipe.nominal,
            "volume_l": rng.choice((10.0, 20.0)),
            "prepared_on": prepared.isoformat(),
            "prepared_by": actor,
            "concentrate_lot": "synthetic",
            "water_grade": "CO2-free" if recipe.reagent in ("NaOH", "KOH") else "Type II",
            "container": "synthetic carboy",
            "notes": "synthetic history",
        },
        actor,
    )
    c0 = recipe.nominal * rng.uniform(0.985, 1.015)
    base = recipe.reagent in ("NaOH", "KOH")
    loss_per_day = rng.uniform(0.00002, 0.0002) if base else rng.uniform(-0.00001, 0.00002)
    policy = records.policy_for(conn, recipe.reagent, prepared)
    life = min(policy.shelf_life_days, rng.randint(40, 160))
    day = prepared + dt.timedelta(days=1)
    released = False
    while day <= min(end, prepared + dt.timedelta(days=life)):
        c_true = c0 * (1 - loss_per_day * (day - prepared).days)
        scatter = 0.0035 if rng.random() < 0.04 else rng.uniform(0.0001, 0.0004)
        reps = _primary_reps(rng, recipe, c_true, rng.choice((3, 4, 4, 5)) if not released else 3, scatter)
        data = {
            "purpose": "recheck" if released else "certify",
            "performed_on": day.isoformat(),
            "analyst": actor,
            "burette_capacity_ml": 50.0,
            "endpoint": "synthetic",
            "standard_lot_id": lot["id"],
            "replicates": reps,
        }
        run = run_input.parse_run(data, today=end, prepared_on=prepared)
        run_id, result = workflow.record_run(conn, config, batch, run, actor)
        if result.accepted:
            workflow.accept(conn, run_id, actor)
            released = True
        else:
            workflow.reject(conn, run_id, "scatter beyond the acceptance rule (synthetic)", actor)
        day += dt.timedelta(days=policy.recheck_interval_days if released else 1)
    if released and rng.random() < 0.03:
        records.withdraw_batch(conn, batch["id"], min(end, day), "synthetic withdrawal", actor)
