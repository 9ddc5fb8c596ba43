"""The traceability chain: what each certified value rests on, and everything that rests on a suspect item.

Pure module: frozen dataclasses in and out; no web or database import (stockroom.recall reads the graph
from the records). The graph has three kinds of node:

* release: a batch's certified value (molarity and standard uncertainty u, mol/L at 20 °C), made by
  one accepted certifying run;
* lot: a primary-standard lot (certified assay and its standard uncertainty, mass fractions);
* instrument: a balance, burette or pipette.

An edge says that a release rests on a node: on the lot weighed (a primary standardization), on the
reference release titrated against (a secondary one), or on an instrument the run used, with the
date of the run (used_on). Every release rests on exactly one standard, a lot or a reference release,
so the chain of one release up to its primary lot is a path with the instruments hanging off it.

Downstream of a suspect item ("what rests on it"), from the date it is suspect:

* a lot or an instrument: every release whose run used it on or after that date; then, link by link,
  every release standardized against one of those, whatever the date (the value itself is in doubt);
* a batch: its releases in force on or after that date (the one in force that day is suspect from
  then on, later ones for their whole life); then the releases standardized against them while suspect.

The step a release adds to the uncertainty is √(u_rel² − u_rel,in²): its own relative standard
uncertainty less, in quadrature, that of what it rests on (GUM, JCGM 100:2008, 5.1.6 for a product
model: relative variances add).
"""

from __future__ import annotations

import datetime as dt
import math
from collections import defaultdict, deque
from dataclasses import dataclass, field

RELEASE, LOT, INSTRUMENT, BATCH = "release", "lot", "instrument", "batch"
PRIMARY, REFERENCE = "primary standard", "reference"
STANDARD_ROLES = (PRIMARY, REFERENCE)
INSTRUMENT_ROLES = ("balance", "burette", "pipette")
SUSPECT_KINDS = (LOT, INSTRUMENT, BATCH)


def node_key(kind: str, node_id: int) -> str:
    """The key of a node: kind and record id, e.g. "release:12" (kind one of release, lot, instrument)."""
    return f"{kind}:{node_id}"


@dataclass(frozen=True)
class Node:
    """One thing a certified value can rest on, or a certified value itself.

    kind: release, lot or instrument; id: its record id; label: what people call it (batch ID, lot
    code, instrument ID); detail: a line or two about it (split by "\n"). value and u: a release's molarity and standard
    uncertainty (mol/L), a lot's assay and its standard uncertainty (mass fractions), None for an
    instrument. batch_id, released_on and ends_on (the last day the value was in force: its expiry,
    or the day before the next release or a withdrawal) for releases only.
    """

    kind: str
    id: int
    label: str
    detail: str = ""
    value: float | None = None
    u: float | None = None
    batch_id: int | None = None
    released_on: dt.date | None = None
    ends_on: dt.date | None = None

    @property
    def key(self) -> str:
        """The node's key in its graph ("lot:3")."""
        return node_key(self.kind, self.id)

    @property
    def u_rel(self) -> float | None:
        """u / value (dimensionless), or None when either is unknown."""
        if self.value is None or self.u is None or self.value == 0:
            return None
        return self.u / abs(self.value)


@dataclass(frozen=True)
class Edge:
    """A release resting on a node: release and on are node keys; role is "primary standard",
    "reference", "balance", "burette" or "pipette"; used_on: the date of the run; run_id: the run;
    note: a line or two about the use, split by "\n" (e.g. the calibration in force and its due date)."""

    release: str
    on: str
    role: str
    used_on: dt.date
    run_id: int = 0
    note: str = ""


@dataclass(frozen=True)
class Graph:
    """Nodes and the edges between them; raises ValueError for a duplicate node or an edge to nowhere."""

    nodes: tuple[Node, ...]
    edges: tuple[Edge, ...]
    _by_key: dict[str, Node] = field(init=False, repr=False, compare=False)
    _up: dict[str, tuple[Edge, ...]] = field(init=False, repr=False, compare=False)
    _down: dict[str, tuple[Edge, ...]] = field(init=False, repr=False, compare=False)
    _releases: dict[int, tuple[Node, ...]] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        by_key: dict[str, Node] = {}
        releases: dict[int, list[Node]] = defaultdict(list)
        for n in self.nodes:
            if n.key in by_key:
                raise ValueError(f"node {n.key} appears twice")
            by_key[n.key] = n
            if n.kind == RELEASE and n.batch_id is not None:
                releases[n.batch_id].append(n)
        up: dict[str, list[Edge]] = defaultdict(list)
        down: dict[str, list[Edge]] = defaultdict(list)
        for e in self.edges:
            if by_key.get(e.release) is None or by_key[e.release].kind != RELEASE:
                raise ValueError(f"edge from {e.release}: only a release rests on something")
            if e.on not in by_key:
                raise ValueError(f"edge to {e.on}: no such node")
            up[e.release].append(e)
            down[e.on].append(e)
        object.__setattr__(self, "_by_key", by_key)
        object.__setattr__(self, "_up", {k: tuple(v) for k, v in up.items()})
        object.__setattr__(self, "_down", {k: tuple(v) for k, v in down.items()})
        object.__setattr__(
            self,
            "_releases",
            {k: tuple(sorted(v, key=lambda n: (n.released_on or dt.date.min, n.id))) for k, v in releases.items()},
        )

    def get(self, key: str) -> Node | None:
        """The node with this key, or None."""
        return self._by_key.get(key)

    def node(self, key: str) -> Node:
        """The node with this key; KeyError when there is none."""
        return self._by_key[key]

    def rests_on(self, key: str) -> tuple[Edge, ...]:
        """The edges from a release to what it rests on (its standard and instruments)."""
        return self._up.get(key, ())

    def used_by(self, key: str) -> tuple[Edge, ...]:
        """The edges into a node: the releases that rest on it."""
        return self._down.get(key, ())

    def releases_of(self, batch_id: int) -> tuple[Node, ...]:
        """A batch's releases, oldest first."""
        return self._releases.get(batch_id, ())


# ---------------------------------------------------------------------------------------------------------
# Up the chain


@dataclass(frozen=True)
class Step:
    """One link of a chain: a release and the standard it rests on, with the uncertainty the link adds.

    standard: the lot or reference release (None when the records name none); role: "primary standard"
    or "reference"; used_on: the run's date; instruments: (edge, node) pairs of the instruments used.
    u_rel: this release's relative standard uncertainty; u_rel_in: that of what it rests on (the
    reference's, or the lot assay's); u_rel_added: √(u_rel² − u_rel_in²), what this link adds (0 when
    the release is stated no less certain than its standard). All dimensionless, None when unknown.
    """

    release: Node
    standard: Node | None
    role: str
    used_on: dt.date | None
    instruments: tuple[tuple[Edge, Node], ...]
    u_rel: float | None
    u_rel_in: float | None
    u_rel_added: float | None


@dataclass(frozen=True)
class Chain:
    """A release's chain up to its primary-standard lot: steps from the release itself, then origin.

    origin: the primary-standard lot the chain ends at, or None when it breaks (a standard not on record).
    """

    root: Node
    steps: tuple[Step, ...]
    origin: Node | None

    @property
    def keys(self) -> frozenset[str]:
        """Every node key on the chain, instruments included."""
        out = {s.release.key for s in self.steps}
        out |= {n.key for s in self.steps for _, n in s.instruments}
        if self.origin is not None:
            out.add(self.origin.key)
        return frozenset(out)


def added_u_rel(u_rel: float | None, u_rel_in: float | None) -> float | None:
    """√(u_rel² − u_rel_in²), never negative: the relative standard uncertainty one link adds (dimensionless)."""
    if u_rel is None or u_rel_in is None:
        return None
    return math.sqrt(max(0.0, u_rel * u_rel - u_rel_in * u_rel_in))


def chain_of(graph: Graph, release_key: str) -> Chain:
    """The chain of one release (a node key) up to its primary lot; KeyError when the release is unknown."""
    root = graph.node(release_key)
    steps: list[Step] = []
    seen: set[str] = set()
    key: str | None = release_key
    origin = None
    order = {r: i for i, r in enumerate(INSTRUMENT_ROLES)}
    while key is not None and key not in seen:
        seen.add(key)
        node = graph.node(key)
        edges = graph.rests_on(key)
        standard_edge = next((e for e in edges if e.role in STANDARD_ROLES), None)
        standard = graph.get(standard_edge.on) if standard_edge else None
        kit = tuple(
            sorted(
                ((e, graph.node(e.on)) for e in edges if e.role not in STANDARD_ROLES),
                key=lambda pair: (order.get(pair[0].role, 9), pair[1].label),
            )
        )
        u_in = standard.u_rel if standard else None
        steps.append(
            Step(
                release=node,
                standard=standard,
                role=standard_edge.role if standard_edge else "",
                used_on=standard_edge.used_on if standard_edge else None,
                instruments=kit,
                u_rel=node.u_rel,
                u_rel_in=u_in,
                u_rel_added=added_u_rel(node.u_rel, u_in),
            )
        )
        key = None
        if standard is not None and standard.kind == LOT:
            origin = standard
        elif standard is not None and standard.kind == RELEASE:
            key = standard.key
    return Chain(root=root, steps=tuple(steps), origin=origin)


# ---------------------------------------------------------------------------------------------------------
# Down from a suspect item


@dataclass(frozen=True)
class Suspect:
    """An item marked suspect: kind (lot, instrument or batch), its record id, and the date from which."""

    kind: str
    id: int
    since: dt.date


@dataclass(frozen=True)
class Reached:
    """A release that rests, at some remove, on a suspect item.

    key: the release's node key; via: the key of what brought it in (the suspect item, a reached
    release, or "batch:<id>" for a suspect batch's own release); depth: 0 for a suspect batch's own
    release, 1 for a release resting directly on the suspect item, one more per link after that;
    suspect_from: None when its whole life is in doubt, or the date from which it is (a suspect batch's
    release that was in force on the day the batch became suspect).
    """

    key: str
    via: str
    depth: int
    suspect_from: dt.date | None


def _wider(new: dt.date | None, old: dt.date | None) -> bool:
    """Whether suspicion from `new` covers more of a release's life than from `old` (None: all of it)."""
    if old is None:
        return False
    return new is None or new < old


def downstream(graph: Graph, suspect: Suspect) -> dict[str, Reached]:
    """Every release resting on a suspect item, transitively through secondary standardizations.

    graph: the traceability graph; suspect: the item and the date it is suspect from. Returns release
    key -> Reached (the rules are in the module docstring). An item the graph does not hold reaches nothing.
    """
    if suspect.kind not in SUSPECT_KINDS:
        raise ValueError(f"a suspect is a lot, an instrument or a batch, not {suspect.kind!r}")
    reached: dict[str, Reached] = {}
    queue: deque[str] = deque()

    def reach(key: str, via: str, depth: int, since: dt.date | None) -> None:
        old = reached.get(key)
        if old is not None:
            if not _wider(since, old.suspect_from):
                return
            # Suspicion only ever widens, so a release is queued at most twice.
            if old.depth <= depth:
                via, depth = old.via, old.depth
        reached[key] = Reached(key, via, depth, since)
        queue.append(key)

    if suspect.kind == BATCH:
        for n in graph.releases_of(suspect.id):
            if n.ends_on is None or n.ends_on >= suspect.since:
                since = suspect.since if n.released_on is not None and n.released_on < suspect.since else None
                reach(n.key, node_key(BATCH, suspect.id), 0, since)
    else:
        root = node_key(suspect.kind, suspect.id)
        for e in graph.used_by(root):
            if e.used_on >= suspect.since:
                reach(e.release, root, 1, None)
    while queue:
        key = queue.popleft()
        r = reached[key]
        for e in graph.used_by(key):
            if e.role == REFERENCE and (r.suspect_from is None or e.used_on >= r.suspect_from):
                reach(e.release, key, r.depth + 1, None)
    return reached
