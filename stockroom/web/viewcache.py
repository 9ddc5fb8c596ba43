"""A small in-process cache of computed views, keyed by the audit trail's newest entry.

Every write appends an audit entry, so the newest entry's id is a version of everything recorded: a
cached view computed at that version is exactly what computing it again would give. Pages that many
people open at once (the front page, the lab-day answer) reuse their computation until the next write.

Reading that id is a query, and in a busy server a query costs the thread a wait for Python's
interpreter lock behind the others. A hit is therefore first looked up by the commit token of
stockroom.commitwatch (bytes of SQLite's shared memory that change at every commit, read without
calling SQLite): the same token means nothing was committed since the view was kept. Only when the
token has moved (or cannot be read) is the newest entry's id asked for.
"""

from __future__ import annotations

import threading
import weakref
from collections import OrderedDict
from collections.abc import Callable, Hashable
from typing import Any, TypeVar

import sqlite_utils

from stockroom import commitwatch

T = TypeVar("T")
_LOCK = threading.Lock()
_ENTRIES: OrderedDict[Hashable, Any] = OrderedDict()
_BY_TOKEN: OrderedDict[Hashable, Any] = OrderedDict()  # the same views, keyed by (file, commit token, key)
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


def _keep(entries: OrderedDict[Hashable, Any], full: Hashable, value: Any) -> None:
    entries[full] = value
    while len(entries) > MAX_ENTRIES:
        entries.popitem(last=False)


def cached(db: sqlite_utils.Database, key: tuple[Hashable, ...], compute: Callable[[], T]) -> T:
    """compute(), or its result from an earlier call with the same key at the same data version.

    A hit costs a read of the commit token and a dictionary read; after a commit, one indexed look-up
    (the newest audit entry's id) and, when a write changed it, the computation.
    """
    file = _file_of(db)
    # Read before anything else: whatever is computed or found below is at least as new as this token,
    # so a later request holding the same token (nothing committed since) may be given it.
    token = commitwatch.token(file)
    by_token = (file, token, *key)
    if token is not None:
        with _LOCK:
            if by_token in _BY_TOKEN:
                _BY_TOKEN.move_to_end(by_token)
                return _BY_TOKEN[by_token]  # type: ignore[no-any-return]
    full = (file, data_version(db), *key)
    with _LOCK:
        found = full in _ENTRIES
        if found:
            _ENTRIES.move_to_end(full)
            value = _ENTRIES[full]
    if not found:
        value = compute()
        with _LOCK:
            _keep(_ENTRIES, full, value)
    if token is not None:
        with _LOCK:
            _keep(_BY_TOKEN, by_token, value)
    return value  # type: ignore[no-any-return]
