"""The layers of stockroom, lowest first: a module may import its own layer and those below, never above.

tests/test_layers.py reads this table, parses every module with `ast` (imports at module level and inside
functions alike) and fails on an import upward, on a module the table does not place, and on any cycle
among stockroom's modules. A new module is added here, in the layer of what it holds. This module is
data only and imports nothing.
"""

from __future__ import annotations

LAYERS: tuple[tuple[str, tuple[str, ...]], ...] = (
    # Pure computation and plain data: numbers, dataclasses and text in and out; neither Flask nor the
    # database (tests/test_static_checks.py checks that too).
    (
        "pure",
        (
            "stockroom.layers",
            "stockroom.errors",
            "stockroom.settings",
            "stockroom.resources",
            "stockroom.chemistry",
            "stockroom.corrections",
            "stockroom.stats",
            "stockroom.uncertainty",
            "stockroom.standardization",
            "stockroom.drift",
            "stockroom.policy",
            "stockroom.formatting",
            "stockroom.labday",
            "stockroom.preparation",
            "stockroom.traceability",
            "stockroom.hazards",
            "stockroom.csvsafe",
            "stockroom.csvio",
            "stockroom.parsing",
            "stockroom.run_input",
            "stockroom.glassware",
            "stockroom.endpoints",
            "stockroom.stock",
            "stockroom.curve_synth",
            "stockroom.schedule_input",
            "stockroom.prep_plan",
        ),
    ),
    # Connections, pragmas, the per-thread pool, the write lock, queries and the clock.
    ("db", ("stockroom.db", "stockroom.commitwatch")),
    # Versioned migrations with literal data.
    ("schema", ("stockroom.schema",)),
    # One module per table family, and the audit trail with its action registry.
    (
        "records",
        (
            "stockroom.records",
            "stockroom.records.audit",
            "stockroom.records.batches",
            "stockroom.records.class_corrections",
            "stockroom.records.containers",
            "stockroom.records.facts",
            "stockroom.records.hazard_data",
            "stockroom.records.lab_sessions",
            "stockroom.records.label_prints",
            "stockroom.records.lots",
            "stockroom.records.policies",
            "stockroom.records.runs",
            "stockroom.records.registered_in_error",
            "stockroom.records.withdrawals",
        ),
    ),
    # Record families with rules of their own, and the backup of the whole file.
    (
        "services",
        (
            "stockroom.accounts",
            "stockroom.tokens",
            "stockroom.instruments",
            "stockroom.recall",
            "stockroom.tracking",
            "stockroom.backup",
        ),
    ),
    # Batches as people see them: status, pages, history.
    ("readmodel", ("stockroom.readmodel", "stockroom.planning")),
    # The prep room's actions.
    ("workflow", ("stockroom.workflow",)),
    # PDF and SVG.
    (
        "render",
        (
            "stockroom.pdf",
            "stockroom.pdf.certificates",
            "stockroom.pdf.chain_drawing",
            "stockroom.pdf.container_label",
            "stockroom.pdf.curve_drawing",
            "stockroom.pdf.charts",
            "stockroom.pdf.ghs",
            "stockroom.pdf.labday_sheet",
            "stockroom.pdf.labels",
            "stockroom.pdf.layouts",
            "stockroom.pdf.recall_report",
            "stockroom.pdf.tall_rows",
            "stockroom.pdf.typeface",
        ),
    ),
    # Blueprints and their request handling.
    (
        "web",
        (
            "stockroom.web",
            "stockroom.web.app",
            "stockroom.web.access",
            "stockroom.web.account",
            "stockroom.web.admin",
            "stockroom.web.api",
            "stockroom.web.audit",
            "stockroom.web.curves",
            "stockroom.web.batches",
            "stockroom.web.containers",
            "stockroom.web.dashboard",
            "stockroom.web.formatting",
            "stockroom.web.forms",
            "stockroom.web.hazards_admin",
            "stockroom.web.health",
            "stockroom.web.inputs",
            "stockroom.web.instruments",
            "stockroom.web.intake",
            "stockroom.web.labday",
            "stockroom.web.lots",
            "stockroom.web.once",
            "stockroom.web.preview",
            "stockroom.web.printing",
            "stockroom.web.recalls",
            "stockroom.web.runs",
            "stockroom.web.schedule",
            "stockroom.web.viewcache",
        ),
    ),
    # The application factory (stockroom/__init__.py: create_app).
    ("app", ("stockroom",)),
    # Commands and the programs they run: the demo loader, the synthetic history, the benchmark.
    ("cli", ("stockroom.cli", "stockroom.demo", "stockroom.synth", "stockroom.benchmark")),
)


def layer_of() -> dict[str, int]:
    """module name -> the index of its layer in LAYERS (0 is the lowest)."""
    return {module: i for i, (_, modules) in enumerate(LAYERS) for module in modules}
