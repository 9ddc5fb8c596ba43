"""Whether anything was committed to a WAL database, read from SQLite's shared memory without a query.

A cached view (stockroom.web.viewcache) must be exactly what recomputing it would give, so it is keyed
by a version of the database. Asking SQLite for one is a query, and a query in a busy server costs more
than the query: the driver lets go of Python's interpreter lock for it, and the thread then waits its
turn to get the lock back behind the other threads (measured in README, "How far one server goes").

Every connection to a database in WAL mode shares the WAL-index, a memory-mapped file beside it
(`<database>-shm`). Its header, which SQLite keeps twice in a row, changes at every commit by any
connection of any process: a change counter, the last valid frame, the page count and the WAL's salts
and checksums (SQLite's "WAL-mode file format" document, walformat.html, section on the WAL-index header;
processes running different SQLite versions share the file, so the layout is fixed). Reading those
bytes from a read-only mapping is a memory read. When the two copies differ (a commit is being
written) or anything is out of the ordinary, token() says None and the caller asks SQLite instead.

SQLite removes the -shm file when the last connection to the database closes; a watch therefore holds
a connection of its own open for as long as it maps the file, so the mapping is always the live one.
"""

from __future__ import annotations

import mmap
import sqlite3
import threading
from collections import OrderedDict
from pathlib import Path

_HEADER = 48  # bytes of one copy of the WAL-index header
_IS_INIT = 12  # offset of its "initialized" flag
MAX_WATCHED = 8  # database files watched at once (tests open many; a server one)


class _Watch:
    """A read-only mapping of one database's WAL-index and the connection that keeps it in place."""

    def __init__(self, path: str) -> None:
        # mode=rw: a watch never creates a database where there is none.
        self.conn = sqlite3.connect(Path(path).resolve().as_uri() + "?mode=rw", uri=True, check_same_thread=False)
        try:
            mode = self.conn.execute("PRAGMA journal_mode").fetchone()[0]
            if str(mode).lower() != "wal":
                raise OSError(f"{path} is not in WAL mode")
            self.conn.execute("SELECT count(*) FROM sqlite_master").fetchone()  # opens the WAL and its index
            with open(path + "-shm", "rb") as f:
                self.map = mmap.mmap(f.fileno(), 2 * _HEADER, access=mmap.ACCESS_READ)
        except BaseException:
            self.conn.close()
            raise

    def token(self) -> bytes | None:
        try:
            header = self.map[: 2 * _HEADER]
        except ValueError:  # closed by close() in another thread
            return None
        first = header[:_HEADER]
        if first != header[_HEADER:] or not first[_IS_INIT]:
            return None
        return first

    def close(self) -> None:
        self.map.close()
        self.conn.close()


_LOCK = threading.Lock()
_WATCHES: OrderedDict[str, _Watch | None] = OrderedDict()


def token(path: str) -> bytes | None:
    """Bytes that change whenever anything is committed to the database at `path`; None when they cannot be read.

    Two equal tokens read at two moments mean that no transaction committed in between (by any
    connection or process). None (a database not in WAL mode, an in-memory one, a commit being written
    at that instant): ask SQLite.
    """
    if not path:
        return None
    with _LOCK:
        if path in _WATCHES:
            _WATCHES.move_to_end(path)
            watch = _WATCHES[path]
            return watch.token() if watch is not None else None
    try:
        made: _Watch | None = _Watch(path)
    except (OSError, ValueError, sqlite3.Error):
        made = None  # not watchable: callers ask SQLite every time
    with _LOCK:
        if path in _WATCHES:  # another thread made one meanwhile
            if made is not None:
                made.close()
        else:
            _WATCHES[path] = made
            while len(_WATCHES) > MAX_WATCHED:
                _, old = _WATCHES.popitem(last=False)
                if old is not None:
                    old.close()
        watch = _WATCHES[path]
    return watch.token() if watch is not None else None


def forget(path: str) -> None:
    """Stop watching the database at `path`; the next token() maps it anew.

    For a file removed and made again under the same name while this process runs: the watch would
    otherwise keep the old file's index, whose token no longer moves.
    """
    with _LOCK:
        watch = _WATCHES.pop(path, None)
    if watch is not None:
        watch.close()
