"""What leaves a bundle: the public, aggregate-only view of an audit."""

from topoaudit.bundle.view import MIN_CELL_ROWS, is_small, public_graph, public_view

__all__ = ["MIN_CELL_ROWS", "is_small", "public_graph", "public_view"]
