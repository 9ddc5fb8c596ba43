"""The record layer: reads and appends of stockroom's record tables, one module per table family.

Every write is one atomic, attributed row plus its audit entry (audit.record_row). Derived views of
batches (status, pages, history) live one layer up, in stockroom.readmodel.
"""

from __future__ import annotations

from stockroom.db import utc_now
from stockroom.records.audit import (
    ACTIONS,
    GENESIS_HASH,
    Action,
    UnregisteredAction,
    action,
    action_label,
    append_event,
    record_row,
    unaudited_records,
    verify_chain,
    verify_chain_since_last_check,
)
from stockroom.records.batches import (
    AMENDABLE_BATCH_FIELDS,
    BATCH_FIELDS,
    amend_batch,
    batch_by_code,
    batch_by_id,
    create_batch,
    next_batch_code,
    preparation_of,
    with_amendments,
)
from stockroom.records.class_corrections import correction_by_id, corrections_with_release, record_correction
from stockroom.records.facts import recorded_facts
from stockroom.records.hazard_data import (
    classification_from_row,
    classification_rows,
    classifications,
    record_classification,
)
from stockroom.records.label_prints import next_serial, record_print
from stockroom.records.lots import LOT_FIELDS, create_lot, list_lots, lot_by_code, lot_by_id
from stockroom.records.policies import add_policy, policies, policy_for, policy_history
from stockroom.records.registered_in_error import mark_registered_in_error, registration_in_error_of
from stockroom.records.runs import (
    REPLICATE_FIELDS,
    RUN_FIELDS,
    decide_run,
    exclude_replicate,
    latest_results,
    record_run,
    release_labels,
    release_number,
    release_numbers,
    run_by_id,
    undecided_runs,
)
from stockroom.records.withdrawals import withdraw_batch, withdrawal_of

__all__ = [
    "ACTIONS",
    "AMENDABLE_BATCH_FIELDS",
    "BATCH_FIELDS",
    "GENESIS_HASH",
    "LOT_FIELDS",
    "REPLICATE_FIELDS",
    "RUN_FIELDS",
    "Action",
    "UnregisteredAction",
    "action",
    "action_label",
    "add_policy",
    "amend_batch",
    "append_event",
    "batch_by_code",
    "batch_by_id",
    "classification_from_row",
    "classification_rows",
    "classifications",
    "correction_by_id",
    "corrections_with_release",
    "create_batch",
    "create_lot",
    "decide_run",
    "exclude_replicate",
    "latest_results",
    "list_lots",
    "lot_by_code",
    "lot_by_id",
    "next_batch_code",
    "next_serial",
    "policies",
    "policy_for",
    "policy_history",
    "preparation_of",
    "record_classification",
    "record_correction",
    "record_print",
    "record_row",
    "record_run",
    "release_labels",
    "release_number",
    "release_numbers",
    "recorded_facts",
    "run_by_id",
    "unaudited_records",
    "undecided_runs",
    "utc_now",
    "verify_chain",
    "verify_chain_since_last_check",
    "with_amendments",
    "mark_registered_in_error",
    "registration_in_error_of",
    "withdraw_batch",
    "withdrawal_of",
]
