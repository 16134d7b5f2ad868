"""topoaudit: where a predictive model falls short, organised by the shape of the data."""

from topoaudit.errors import TopoauditError

__all__ = ["TopoauditError", "__version__"]

__version__ = "0.1.0"
