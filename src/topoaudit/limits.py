"""The documented size limits of topoaudit, in one place.

Each bound is far above what a validation set needs and far below what would exhaust a
24 GB machine; a request past one is refused with a :class:`~topoaudit.errors.LimitError`
that names the input, the value asked for and the bound, before any large allocation.
The README's "Limits" table is written from these constants.
"""

from __future__ import annotations

__all__ = [
    "MAX_CATEGORY_LEVELS",
    "MAX_CONFIG_BYTES",
    "MAX_FEATURES",
    "MAX_GRAPH_NODES",
    "MAX_INTERVALS",
    "MAX_MAGNITUDE",
    "MAX_MEMBERSHIPS",
    "MAX_NODES_DRAWN",
    "MAX_RELEASES",
    "MAX_ROWS",
    "MAX_SEGMENT_LEVELS",
    "MAX_STABILITY_OFFSETS",
    "MAX_WORKERS",
    "MIN_CELL_ROWS",
]

#: Rows of a validation table (after reading, before dropping missing values).
MAX_ROWS = 2_000_000
#: Feature columns after one-hot encoding.
MAX_FEATURES = 1_000
#: Distinct values of one one-hot encoded categorical column.
MAX_CATEGORY_LEVELS = 200
#: Distinct values of one declared segment column (``audit.segments``): each is a row of a
#: table on the page and a test of its own, so a column of more is binned first.
MAX_SEGMENT_LEVELS = 50
#: Largest magnitude accepted in the data and in filter values. Squared distances of values
#: up to 1e150 apart, summed over a thousand columns, and sums of millions of them stay
#: far below the largest float (about 1.8e308); larger values overflow to infinity.
MAX_MAGNITUDE = 1e150
#: Intervals of a cover, per filter dimension.
MAX_INTERVALS = 1_000
#: Row memberships of one cover (a row in k elements counts k times): 25 per row of the
#: largest table, what a 2-D cover with an overlap of 0.75 reaches. Forming the elements
#: takes about 60 bytes per membership at its peak (measured), so at most about 3 GB.
MAX_MEMBERSHIPS = 25 * MAX_ROWS
#: Nodes of one Mapper graph.
MAX_GRAPH_NODES = 200_000
#: Fewest rows behind a statistic that leaves a bundle (pages, diffs, the site): a smaller
#: node, region, bin or half shows its size only (small-cell suppression).
MIN_CELL_ROWS = 10
#: Nodes drawn in the graph view of a page; a larger graph is drawn in part, and says so.
MAX_NODES_DRAWN = 2_000
#: Size of an audit config file.
MAX_CONFIG_BYTES = 1_000_000
#: Releases listed in one config.
MAX_RELEASES = 100
#: Entries of each of the config's stability offset lists (the grid reruns the graph
#: search once per pair, so 10 x 10 offsets already mean 100 reruns).
MAX_STABILITY_OFFSETS = 10
#: Local worker processes of one audit (``[compute] workers``); each holds a rerun's
#: working copy of the rows, so the bound is far above the cores of one machine.
MAX_WORKERS = 256
