"""A small in-process cache of computed views, keyed by the audit trail's newest entry.

Every write appends an audit entry, so the newest entry's id is a version of everything recorded: a
cached view computed at that version is exactly what computing it again would give. Pages that many
people open at once (the front page, the lab-day answer) reuse their computation until the next write.
"""

from __future__ import annotations

import threading
import weakref
from collections import OrderedDict
from collections.abc import Callable, Hashable
from typing import Any, TypeVar

import sqlite_utils

T = TypeVar("T")
_LOCK = threading.Lock()
_ENTRIES: OrderedDict[Hashable, Any] = OrderedDict()
MAX_ENTRIES = 128
_FILES: weakref.WeakKeyDictionary[sqlite_utils.Database, str] = weakref.WeakKeyDictionary()


def data_version(db: sqlite_utils.Database) -> int:
    """The id of the newest audit entry (0 for an empty database)."""
    row = db.execute("SELECT max(id) FROM events").fetchone()
    return int(row[0] or 0)


def _file_of(db: sqlite_utils.Database) -> str:
    """The connection's main database file, asked of SQLite once per connection (connections are pooled)."""
    with _LOCK:
        name = _FILES.get(db)
    if name is None:
        name = str(db.conn.execute("PRAGMA database_list").fetchone()[2])
        with _LOCK:
            _FILES[db] = name
    return name


def cached(db: sqlite_utils.Database, key: tuple[Hashable, ...], compute: Callable[[], T]) -> T:
    """compute(), or its result from an earlier call with the same key at the same data version.

    A hit costs one indexed look-up (the newest audit entry's id) and a dictionary read.
    """
    full = (_file_of(db), data_version(db), *key)
    with _LOCK:
        if full in _ENTRIES:
            _ENTRIES.move_to_end(full)
            return _ENTRIES[full]  # type: ignore[no-any-return]
    value = compute()
    with _LOCK:
        _ENTRIES[full] = value
        while len(_ENTRIES) > MAX_ENTRIES:
            _ENTRIES.popitem(last=False)
    return value
