"""Recording a run in a test's setup through the one path every door uses (run_input + record_run)."""

from __future__ import annotations

import datetime as dt

from stockroom import records, run_input, workflow

_NAMES = {"mass_gross_g": "gross_g", "mass_tare_g": "tare_g"}


def as_run_data(meta, reps, *, lot=None, reference=None, excluded=None):
    """A setup's run (meta, replicate rows as stored) -> stockroom.run_input's JSON-shaped data.

    A row giving only its titre (volume_ml, mL) is read as burette readings 0 and volume_ml.
    """
    excluded = dict(excluded or {})
    replicates = []
    for i, r in enumerate(reps, start=1):
        rep = {_NAMES.get(k, k): v for k, v in r.items() if k != "volume_ml" and v is not None}
        if "initial_ml" not in rep:
            rep["initial_ml"], rep["final_ml"] = 0.0, r["volume_ml"]
        if i in excluded:
            rep["exclude_reason"] = excluded[i]
        replicates.append(rep)
    data = {k: v for k, v in meta.items() if v is not None}
    if reference is not None:
        data.update(method="secondary", reference_batch=reference["code"])
    else:
        data.update(method="primary", standard_lot_id=lot["id"])
    data["replicates"] = replicates
    return data


def record(db, config, batch, meta, reps, actor, *, lot=None, reference=None, excluded=None):
    """Parse and record a setup's run; return (run id, result) as workflow.record_run does."""
    data = as_run_data(meta, reps, lot=lot, reference=reference, excluded=excluded)
    today = max(dt.date.today(), dt.date.fromisoformat(str(meta["performed_on"])))
    run = run_input.parse_run(data, today=today, prepared_on=dt.date.fromisoformat(batch["prepared_on"]))
    return workflow.record_run(db, config, batch, run, actor)


# Invented replicates: about 0.1 mol/L NaOH against KHP (gross, tare in g; initial, final in mL).
GOOD = [
    ("12.4581", "11.6402", "0.12", "40.21"),
    ("12.0117", "11.1891", "0.40", "40.73"),
    ("11.9012", "11.0759", "0.05", "40.50"),
    ("12.2230", "11.4170", "0.30", "39.82"),
]


def good_replicates():
    """The GOOD readings as stored replicate rows (masses in g, readings and titre in mL)."""
    return [
        {
            "mass_gross_g": float(g),
            "mass_tare_g": float(t),
            "initial_ml": float(i),
            "final_ml": float(f),
            "volume_ml": round(float(f) - float(i), 2),
        }
        for g, t, i, f in GOOD
    ]


def khp_lot(db, today):
    """An invented KHP lot (assay 0.9998, U 0.0004 at k = 2) expiring 300 days after today."""
    return records.create_lot(
        db,
        {
            "substance": "KHP",
            "assay": 0.9998,
            "assay_expanded_u": 0.0004,
            "assay_k": 2,
            "supplier": "Invented Chemicals",
            "supplier_lot": "K-7781",
            "expires_on": (today + dt.timedelta(days=300)).isoformat(),
        },
        "setup",
    )
