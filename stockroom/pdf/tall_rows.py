"""Table rows that may grow taller than a page, cut into several rows so reportlab can split between them.

reportlab splits a Table only between rows: a row whose cell is taller than the frame cannot be laid out
at all (LayoutError), which is what a batch under two hundred open recalls used to do to the lab-day
sheet. A tall row is therefore given as cells of short pieces (a list of flowables each) and laid out as
a group of rows: the first carries the first pieces of every cell, the next rows the rest.
"""

from __future__ import annotations

from collections.abc import Sequence

PIECES_PER_ROW = 6  # short paragraphs per cell and row: well under a page at the sizes the sheets use


def split_row(cells: Sequence[Sequence[object]], per_row: int = PIECES_PER_ROW) -> list[list[list[object]]]:
    """One logical row (each cell a list of flowables) as one or more table rows of at most `per_row` pieces a cell."""
    if per_row < 1:
        raise ValueError("per_row must be at least 1")
    height = max(1, *(-(-len(c) // per_row) for c in cells)) if cells else 1
    return [[list(c[i * per_row : (i + 1) * per_row]) for c in cells] for i in range(height)]


def group_ends(groups: Sequence[int], first_row: int = 1) -> list[int]:
    """Table row index of the last row of each group (sizes in rows), counting from `first_row` (after a header)."""
    ends, at = [], first_row - 1
    for size in groups:
        at += size
        ends.append(at)
    return ends
