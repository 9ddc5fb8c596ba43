"""A container's label as PDF: its code, fill date, expiry and destination with its parent batch's value and hazards.

    pdf = container_label_pdf(db, config, container, batch, on)

The layout is data (labels/containers/*.toml, purpose = "container") drawn by stockroom.pdf.labels like
a batch's label. The value printed is the parent's certified value in force on the day of printing;
when the container may not be used that day (expired, taken out of use, its batch withdrawn or on
hold) it prints NOT FOR USE and why instead. The hazard elements are the batch's (same solution).
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from typing import Any
from urllib.parse import quote

import sqlite_utils

from stockroom import readmodel, stock
from stockroom.pdf import labels
from stockroom.pdf import layouts as layout_files
from stockroom.policy import status_on

DEFAULT_LAYOUT = "bench-bottle"


def container_url(base_url: str, code: str) -> str:
    """The container page's address, as the QR code carries it."""
    return f"{base_url.rstrip('/')}/containers/{quote(code, safe='')}"


def container_content(
    db: sqlite_utils.Database, config: Mapping[str, Any], container: Mapping[str, Any], batch: Mapping[str, Any], on: dt.date
) -> labels.LabelContent:
    """What a container's label says when printed on `on` (the lab's date)."""
    base = labels.label_content(db, config, batch, on)
    facts = readmodel.batch_facts(db, int(batch["id"]))
    state = stock.container_state(
        status_on(facts, on),
        dt.date.fromisoformat(container["filled_on"]),
        dt.date.fromisoformat(container["expires_on"]),
        dt.date.fromisoformat(container["disposed_on"]) if container.get("disposed_on") else None,
        on,
    )
    certified, released = base.certified, base.released
    if not state.status.usable:
        certified, released = f"{labels.NOT_FOR_USE} {labels.DASH} {state.status.label.lower()}: {state.reason}", False
    return labels.with_content(
        base,
        certified=certified,
        released=released,
        url=container_url(labels.qr_base_url(config.get("BASE_URL"), config.get("REQUEST_ROOT")), container["code"]),
        extra={
            "container_code": container["code"],
            "container_kind": container["kind"],
            "filled_on": container["filled_on"],
            "container_volume": f"{float(container['volume_l']):g} L",
            "container_expires_on": container["expires_on"],
            "destination": stock.Destination.of(container).words(),
        },
    )


def container_label_pdf(
    db: sqlite_utils.Database,
    config: Mapping[str, Any],
    container: Mapping[str, Any],
    batch: Mapping[str, Any],
    on: dt.date,
    layout: str = DEFAULT_LAYOUT,
) -> bytes:
    """One label for a container on the container layout `layout` (labels/containers/<layout>.toml)."""
    chosen = layout_files.get(layout, layout_files.container_layouts_folder())
    return labels.build_labels(
        container_content(db, config, container, batch, on), chosen, copies=1, title=f"Label of container {container['code']}"
    )
