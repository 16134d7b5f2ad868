"""The Mapper graph engine: filter functions, covers, clustering, the nerve, invariants.

It knows rows and numbers only, nothing of models, audits or pages.
"""

from topoaudit.mapper.clustering import (
    CLUSTERERS,
    AutoDBSCAN,
    Clusterer,
    EstimatorClusterer,
    HDBSCANClusterer,
    SilhouetteKMedoids,
    SingleLinkage,
    make_clusterer,
)
from topoaudit.mapper.cover import BalancedCover, CoverElement, UniformCover
from topoaudit.mapper.executor import ProcessExecutor, SerialExecutor, make_executor
from topoaudit.mapper.filters import FILTERS, Filter, make_filter
from topoaudit.mapper.graph import ClusteringError, MapperBuilder, MapperGraph, nerve
from topoaudit.mapper.topology import Invariants, component_labels, invariants, row_components

__all__ = [
    "CLUSTERERS",
    "FILTERS",
    "AutoDBSCAN",
    "BalancedCover",
    "Clusterer",
    "ClusteringError",
    "CoverElement",
    "EstimatorClusterer",
    "Filter",
    "HDBSCANClusterer",
    "Invariants",
    "MapperBuilder",
    "MapperGraph",
    "ProcessExecutor",
    "SerialExecutor",
    "SilhouetteKMedoids",
    "SingleLinkage",
    "UniformCover",
    "component_labels",
    "invariants",
    "make_clusterer",
    "make_executor",
    "make_filter",
    "nerve",
    "row_components",
]
