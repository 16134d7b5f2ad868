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
    "MAX_NODES_DRAWN",
    "MAX_RELEASES",
    "MAX_ROWS",
]

#: Rows of a validation table (after reading, before dropping missing values).
MAX_ROWS = 2_000_000
#: Feature columns after one-hot encoding.
MAX_FEATURES = 1_000
#: Distinct values of one one-hot encoded categorical column.
MAX_CATEGORY_LEVELS = 200
#: Intervals of a cover, per filter dimension.
MAX_INTERVALS = 1_000
#: Nodes of one Mapper graph.
MAX_GRAPH_NODES = 200_000
#: Nodes drawn in the graph view of a page; a larger graph is drawn in part, and says so.
MAX_NODES_DRAWN = 2_000
#: Size of an audit config file.
MAX_CONFIG_BYTES = 1_000_000
#: Releases listed in one config.
MAX_RELEASES = 100
