"""A small invented prep room for the issue-16 page tests: one KHP lot, NaOH batches, runs (tests/test_ux_pages.py).

A module of its own (not conftest) so that test modules can import it by a name no other folder uses.
"""

from __future__ import annotations

import datetime as dt

from recorded_runs import record

from stockroom import records, workflow

# Four invented replicates of about 0.1 mol/L NaOH against KHP: gross, tare (g), initial, final (mL).
GOOD = [
    ("12.4581", "11.6402", "0.12", "40.21"),
    ("12.0117", "11.1891", "0.40", "40.73"),
    ("11.9012", "11.0759", "0.05", "40.50"),
    ("12.2230", "11.4170", "0.30", "39.82"),
]


def today() -> dt.date:
    return dt.datetime.now(dt.UTC).date()  # the test app's LAB_TIMEZONE is UTC


def make_lot(db):
    return records.create_lot(
        db,
        {
            "substance": "KHP",
            "assay": 1.0,
            "assay_expanded_u": 0.0002,
            "assay_k": 2,
            "supplier": "Invented Chemicals",
            "supplier_lot": "K-0001",
            "expires_on": (today() + dt.timedelta(days=300)).isoformat(),
            "dried_on": today().isoformat(),
            "dried_at_c": 120,
        },
        "setup",
    )


def make_batch(db, nominal=0.1, days_ago=3, reagent="NaOH"):
    return records.create_batch(
        db,
        {
            "reagent": reagent,
            "nominal_molarity": nominal,
            "volume_l": 20,
            "prepared_on": (today() - dt.timedelta(days=days_ago)).isoformat(),
            "prepared_by": "R. Okafor (invented)",
        },
        "setup",
    )


def good_reps(scale: float = 1.0):
    """GOOD as stored replicate rows; scale multiplies each mass (a different strength for a re-check)."""
    out = []
    for g, t, i, f in GOOD:
        gross, tare = float(g), float(t)
        out.append(
            {
                "mass_gross_g": round(tare + (gross - tare) * scale, 4),
                "mass_tare_g": tare,
                "initial_ml": float(i),
                "final_ml": float(f),
                "volume_ml": round(float(f) - float(i), 2),
            }
        )
    return out


def run(db, config, batch, lot, *, purpose="certify", days_ago=1, scale=1.0):
    """Record a run of GOOD (masses scaled) on the batch; return (run id, result)."""
    meta = {
        "purpose": purpose,
        "performed_on": (today() - dt.timedelta(days=days_ago)).isoformat(),
        "analyst": "R. Okafor",
        "burette_capacity_ml": 50.0,
        "endpoint": "phenolphthalein",
    }
    return record(db, config, batch, meta, good_reps(scale), "setup", lot=lot)


def released(db, config, batch, lot, days_ago=2):
    """Record a certifying run and accept it (the policy sets the expiry); return the release id."""
    run_id, _ = run(db, config, batch, lot, days_ago=days_ago)
    return workflow.accept(db, run_id, "setup")
