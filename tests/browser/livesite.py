"""What the browser tests share besides fixtures: the demo's password and a free loopback port.

A module of its own (not conftest) so that test modules can import it by a name no other folder uses.
"""

from __future__ import annotations

import socket

DEMO_PASSWORD = "invented lantern for browser tests"


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]
