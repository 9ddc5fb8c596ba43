"""A released batch for the dispensing tests, made through the same paths the prep room uses.

Invented figures: five replicates near 0.1 mol/L NaOH against KHP (as tests/test_races.py uses).
"""

from __future__ import annotations

import datetime as dt

from stockroom import records, run_input, workflow

MASSES = (0.8012, 0.8107, 0.8203, 0.8301, 0.8398)
TITRES = (39.32, 39.80, 40.27, 40.73, 41.24)


def released_batch(conn, config, *, prepared_on: dt.date, volume_l: float = 20.0, reagent: str = "NaOH", actor: str = "test"):
    """Register, standardize and release a batch on `prepared_on`; (batch row, release id)."""
    lot = records.create_lot(
        conn,
        {
            "substance": "KHP",
            "assay": 1.0,
            "assay_expanded_u": 0.0002,
            "assay_k": 2,
            "expires_on": (prepared_on + dt.timedelta(days=700)).isoformat(),
            "dried_on": prepared_on.isoformat(),
            "dried_at_c": 120,
        },
        actor,
    )
    batch = records.create_batch(
        conn,
        {
            "reagent": reagent,
            "nominal_molarity": 0.1,
            "volume_l": volume_l,
            "prepared_on": prepared_on.isoformat(),
            "prepared_by": "t",
        },
        actor,
    )
    data = {
        "method": "primary",
        "purpose": "certify",
        "standard_lot_id": lot["id"],
        "performed_on": prepared_on.isoformat(),
        "analyst": "Ana",
        "burette_capacity_ml": 50.0,
        "replicates": [{"mass_g": m, "initial_ml": 0.10, "final_ml": t + 0.10} for m, t in zip(MASSES, TITRES, strict=True)],
    }
    run = run_input.parse_run(data, today=max(prepared_on, dt.date.today()), prepared_on=prepared_on)
    run_id, _ = workflow.record_run(conn, config, batch, run, actor)
    release_id = workflow.accept(conn, run_id, actor, released_on=prepared_on)
    return records.batch_by_code(conn, batch["code"]), release_id
