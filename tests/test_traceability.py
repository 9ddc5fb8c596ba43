"""The traceability graph: chains up to the primary lot, what a suspect item reaches, the drawn chain."""

from __future__ import annotations

import datetime as dt
import math
import xml.etree.ElementTree as ET
from collections import deque

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from stockroom import traceability as tr
from stockroom.pdf import chain_drawing
from stockroom.traceability import Edge, Graph, Node, Suspect

D0 = dt.date(2026, 1, 1)  # invented dates throughout


def day(n: int) -> dt.date:
    return D0 + dt.timedelta(days=n)


def release(rid: int, batch: int, released: int, ends: int = 400, molarity: float = 0.1, u: float = 0.0001) -> Node:
    return Node(
        tr.RELEASE,
        rid,
        f"B{batch}",
        detail=f"release {rid}",
        value=molarity,
        u=u,
        batch_id=batch,
        released_on=day(released),
        ends_on=day(ends),
    )


def lot(lid: int, assay: float = 0.9999, u: float = 0.0002) -> Node:
    return Node(tr.LOT, lid, f"LOT-{lid}", detail="KHP (invented)", value=assay, u=u)


def instrument(iid: int) -> Node:
    return Node(tr.INSTRUMENT, iid, f"BUR-{iid}", detail="burette, 50 mL, Class A ±0.05 mL")


def on_lot(rid: int, lid: int, used: int) -> Edge:
    return Edge(f"release:{rid}", f"lot:{lid}", tr.PRIMARY, day(used), run_id=rid)


def on_ref(rid: int, ref: int, used: int) -> Edge:
    return Edge(f"release:{rid}", f"release:{ref}", tr.REFERENCE, day(used), run_id=rid)


def on_kit(rid: int, iid: int, used: int, role: str = "burette") -> Edge:
    return Edge(f"release:{rid}", f"instrument:{iid}", role, day(used), run_id=rid, note="cal. C-1")


def reached(graph: Graph, kind: str, sid: int, since: int = -1000) -> set[str]:
    return set(tr.downstream(graph, Suspect(kind, sid, day(since))))


# ---------------------------------------------------------------------------------------------- fixed cases


@pytest.fixture
def three_links() -> Graph:
    """Lot 1 -> release 1 (batch 1) -> release 2 (batch 2) -> release 3 (batch 3), plus an unrelated release 4."""
    nodes = (
        lot(1),
        lot(2),
        instrument(1),
        instrument(2),
        release(1, 1, 0, u=0.00010),
        release(2, 2, 5, u=0.00013),
        release(3, 3, 9, u=0.00016),
        release(4, 4, 3),
    )
    edges = (
        on_lot(1, 1, 0),
        on_kit(1, 1, 0),
        on_ref(2, 1, 5),
        on_kit(2, 2, 5),
        on_ref(3, 2, 9),
        on_kit(3, 2, 9),
        on_lot(4, 2, 3),
        on_kit(4, 1, 3),
    )
    return Graph(nodes, edges)


def test_chain_of_three_standardizations_recalls_exactly_the_downstream_set(three_links):
    assert reached(three_links, "lot", 1) == {"release:1", "release:2", "release:3"}
    assert reached(three_links, "batch", 2) == {"release:2", "release:3"}
    assert reached(three_links, "batch", 3) == {"release:3"}
    assert reached(three_links, "lot", 2) == {"release:4"}
    # Burette 2 was used by releases 2 and 3 only; burette 1 by releases 1 and 4, and 2, 3 rest on 1.
    assert reached(three_links, "instrument", 2) == {"release:2", "release:3"}
    assert reached(three_links, "instrument", 1) == {"release:1", "release:2", "release:3", "release:4"}
    links = tr.downstream(three_links, Suspect("lot", 1, day(-10)))
    assert [links[f"release:{i}"].depth for i in (1, 2, 3)] == [1, 2, 3]
    assert links["release:3"].via == "release:2" and links["release:1"].via == "lot:1"


def test_the_chain_up_to_the_lot_and_what_each_step_adds(three_links):
    chain = tr.chain_of(three_links, "release:3")
    assert [s.release.id for s in chain.steps] == [3, 2, 1]
    assert chain.origin is not None and chain.origin.key == "lot:1"
    assert [s.role for s in chain.steps] == [tr.REFERENCE, tr.REFERENCE, tr.PRIMARY]
    assert [[n.label for _, n in s.instruments] for s in chain.steps] == [["BUR-2"], ["BUR-2"], ["BUR-1"]]
    # Relative variances add in a product model (GUM, JCGM 100:2008, 5.1.6), so a step adds
    # sqrt(u_rel^2 - u_rel_in^2); worked here by hand from the invented figures.
    u3, u2, u1, ulot = 0.00016 / 0.1, 0.00013 / 0.1, 0.00010 / 0.1, 0.0002 / 0.9999
    assert chain.steps[0].u_rel_added == pytest.approx(math.sqrt(u3**2 - u2**2), rel=1e-12)
    assert chain.steps[1].u_rel_added == pytest.approx(math.sqrt(u2**2 - u1**2), rel=1e-12)
    assert chain.steps[2].u_rel_in == pytest.approx(ulot, rel=1e-12)
    assert chain.steps[2].u_rel_added == pytest.approx(math.sqrt(u1**2 - ulot**2), rel=1e-12)
    assert chain.keys == {"release:3", "release:2", "release:1", "lot:1", "instrument:1", "instrument:2"}


def test_a_step_stated_more_certain_than_its_reference_adds_nothing_not_a_negative():
    g = Graph((lot(1, u=0.001), release(1, 1, 0, u=0.00005)), (on_lot(1, 1, 0),))
    step = tr.chain_of(g, "release:1").steps[0]
    assert step.u_rel_added == 0.0


def test_diamond_two_batches_against_one_reference():
    """Release 1 is the reference of releases 2 (batch 2) and 3 (batch 3); 4 rests on 2, 5 on 3."""
    nodes = (lot(1), instrument(7), release(1, 1, 0), release(2, 2, 4), release(3, 3, 4), release(4, 4, 8), release(5, 5, 8))
    edges = (on_lot(1, 1, 0), on_ref(2, 1, 4), on_ref(3, 1, 4), on_ref(4, 2, 8), on_ref(5, 3, 8), on_kit(3, 7, 4))
    g = Graph(nodes, edges)
    assert reached(g, "lot", 1) == {f"release:{i}" for i in range(1, 6)}
    assert reached(g, "batch", 1) == {f"release:{i}" for i in range(1, 6)}
    assert reached(g, "batch", 2) == {"release:2", "release:4"}
    assert reached(g, "batch", 3) == {"release:3", "release:5"}
    assert reached(g, "instrument", 7) == {"release:3", "release:5"}
    # Each release is listed once, by its shortest path.
    found = tr.downstream(g, Suspect("lot", 1, day(-5)))
    assert sorted(r.depth for r in found.values()) == [1, 2, 2, 3, 3]


def test_a_date_limited_recall_leaves_earlier_releases_alone():
    """The lot served release 1 on day 10 and release 2 on day 30; each was a reference for another batch."""
    nodes = (lot(1), release(1, 1, 10), release(2, 2, 30), release(3, 3, 40), release(4, 4, 45))
    edges = (on_lot(1, 1, 10), on_lot(2, 1, 30), on_ref(3, 1, 40), on_ref(4, 2, 45))
    g = Graph(nodes, edges)
    assert reached(g, "lot", 1, since=20) == {"release:2", "release:4"}
    assert reached(g, "lot", 1, since=30) == {"release:2", "release:4"}  # the day itself counts
    assert reached(g, "lot", 1, since=31) == set()
    assert reached(g, "lot", 1, since=0) == {f"release:{i}" for i in range(1, 5)}


def test_a_suspect_batch_reaches_its_value_in_force_from_that_day_only():
    """Batch 1: release 1 from day 0 to day 49, release 2 from day 50. Batch 2 used release 1 on day 10,
    batch 3 on day 30, batch 4 used release 2 on day 60. Batch 1 is suspect from day 20."""
    nodes = (
        lot(1),
        release(1, 1, 0, ends=49),
        release(2, 1, 50, ends=300),
        release(3, 2, 10),
        release(4, 3, 30),
        release(5, 4, 60),
    )
    edges = (on_lot(1, 1, 0), on_lot(2, 1, 50), on_ref(3, 1, 10), on_ref(4, 1, 30), on_ref(5, 2, 60))
    g = Graph(nodes, edges)
    found = tr.downstream(g, Suspect("batch", 1, day(20)))
    assert set(found) == {"release:1", "release:2", "release:4", "release:5"}
    assert found["release:1"].suspect_from == day(20) and found["release:1"].depth == 0
    assert found["release:2"].suspect_from is None
    assert found["release:4"].suspect_from is None and found["release:4"].depth == 1
    # Suspect only after release 1 stopped being in force: it is left alone.
    assert set(tr.downstream(g, Suspect("batch", 1, day(55)))) == {"release:2", "release:5"}


def test_graph_refuses_edges_to_nowhere_and_duplicates():
    with pytest.raises(ValueError, match="no such node"):
        Graph((release(1, 1, 0),), (on_lot(1, 9, 0),))
    with pytest.raises(ValueError, match="twice"):
        Graph((lot(1), lot(1)), ())
    with pytest.raises(ValueError, match="only a release"):
        Graph((lot(1), lot(2)), (Edge("lot:1", "lot:2", tr.PRIMARY, D0),))
    with pytest.raises(ValueError, match="a suspect is"):
        tr.downstream(Graph((), ()), Suspect("release", 1, D0))


# ---------------------------------------------------------------------------------------------- the drawing


def test_chain_svg_is_well_formed_escaped_and_styles_nothing_inline(three_links):
    nodes = tuple(
        n
        if n.key != "release:3"
        else Node(tr.RELEASE, 3, "B3 <&>", detail="x < y", value=0.1, u=0.0002, batch_id=3, released_on=day(9), ends_on=day(99))
        for n in three_links.nodes
    )
    g = Graph(nodes, three_links.edges)
    chain = tr.chain_of(g, "release:3")
    svg = chain_drawing.chain_svg(chain, hrefs={"lot:1": "/lots/1"}, suspect=frozenset({"lot:1"}), title="Chain of B3")
    root = ET.fromstring(svg)  # raises on malformed XML or an unescaped "<"
    ns = "{http://www.w3.org/2000/svg}"
    texts = ["".join(t.itertext()) for t in root.iter(f"{ns}text")]
    assert "B3 <&> · certified value" in texts
    assert any(t.startswith("LOT-1 · primary-standard lot") for t in texts)
    assert "SUSPECT" in texts and texts.count("SUSPECT") == 1
    assert sum(1 for t in texts if t.startswith("BUR-")) == 3
    assert "style" not in svg and "<script" not in svg
    links = [a.get("href") for a in root.iter(f"{ns}a")]
    assert links == ["/lots/1"]
    # Four rows (three releases and the lot), one instrument column.
    assert int(root.get("height")) == 2 * 10 + 4 * 84 + 3 * 48


# ---------------------------------------------------------------------------------------------- random DAGs


@st.composite
def random_graphs(draw):
    """A random DAG of releases: each rests on a lot or on an earlier release, and uses some instruments."""
    n_lots, n_kit = draw(st.integers(1, 3)), draw(st.integers(0, 3))
    n = draw(st.integers(1, 14))
    n_batches = draw(st.integers(1, n))
    rel = []
    for i in range(n):
        released = draw(st.integers(0, 60))
        parent = draw(
            st.one_of(
                st.tuples(st.just("lot"), st.integers(0, n_lots - 1)),
                st.tuples(st.just("ref"), st.integers(0, i - 1)) if i else st.nothing(),
            )
        )
        kit = draw(st.sets(st.integers(0, n_kit - 1), max_size=2)) if n_kit else set()
        rel.append(
            {
                "batch": draw(st.integers(0, n_batches - 1)),
                "released": released,
                "ends": released + draw(st.integers(0, 90)),
                "parent": parent,
                "kit": kit,
            }
        )
    nodes = [lot(j) for j in range(n_lots)] + [instrument(j) for j in range(n_kit)]
    nodes += [release(i, r["batch"], r["released"], r["ends"]) for i, r in enumerate(rel)]
    edges = []
    for i, r in enumerate(rel):
        kind, j = r["parent"]
        edges.append(on_lot(i, j, r["released"]) if kind == "lot" else on_ref(i, j, r["released"]))
        edges += [on_kit(i, k, r["released"]) for k in sorted(r["kit"])]
    suspect_kind = draw(st.sampled_from(["lot", "instrument", "batch"] if n_kit else ["lot", "batch"]))
    limit = {"lot": n_lots, "instrument": n_kit, "batch": n_batches}[suspect_kind]
    suspect = Suspect(suspect_kind, draw(st.integers(0, limit - 1)), day(draw(st.integers(-5, 100))))
    return Graph(tuple(nodes), tuple(edges)), rel, suspect


def bfs_reachable(rel, suspect: Suspect) -> set[int]:
    """Independent breadth-first search over states (release, suspect from), written from the rules.

    A state (i, None) means release i is in doubt for its whole life, (i, d) from date d on. From a
    suspect lot or instrument: every release whose run used it on or after the date, whole life. From
    a suspect batch: each of its releases still in force on the date, from the date if released before
    it. A release standardized against a release in doubt at the time of the run is in doubt, whole life.
    """
    children: dict[int, list[int]] = {i: [] for i in range(len(rel))}
    for i, r in enumerate(rel):
        if r["parent"][0] == "ref":
            children[r["parent"][1]].append(i)
    start: list[tuple[int, dt.date | None]] = []
    for i, r in enumerate(rel):
        used = day(r["released"])
        if suspect.kind == "lot" and r["parent"] == ("lot", suspect.id) and used >= suspect.since:
            start.append((i, None))
        if suspect.kind == "instrument" and suspect.id in r["kit"] and used >= suspect.since:
            start.append((i, None))
        if suspect.kind == "batch" and r["batch"] == suspect.id and day(r["ends"]) >= suspect.since:
            start.append((i, suspect.since if used < suspect.since else None))
    seen = set(start)
    queue = deque(start)
    while queue:
        i, since = queue.popleft()
        for c in children[i]:
            if since is None or day(rel[c]["released"]) >= since:
                state = (c, None)
                if state not in seen:
                    seen.add(state)
                    queue.append(state)
    return {i for i, _ in seen}


@settings(max_examples=300, deadline=None)
@given(random_graphs())
def test_recalled_set_is_exactly_what_a_breadth_first_search_reaches(case):
    graph, rel, suspect = case
    found = tr.downstream(graph, suspect)
    assert {int(k.split(":")[1]) for k in found} == bfs_reachable(rel, suspect)
    for key, r in found.items():
        # Every reached release is listed by a path that exists: what brought it in is upstream of it.
        if r.depth > 0:
            assert any(e.on == r.via for e in graph.rests_on(key))
