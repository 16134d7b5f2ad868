"""Two interleaved spirals (Lang and Witbrock, 1988, "Learning to tell two spirals apart").

The benchmark's two classes wind around each other, so no linear rule and no single
coordinate separates them; both are one-dimensional curves that never touch. Here each
spiral has 1,000 noisy points over 1.5 turns (the original had 97 points per spiral;
denser sampling keeps the check about the graph, not about sampling gaps), with the
eccentricity filter. Every node must hold one spiral only, and the two spirals must lie
in different components.
"""

from __future__ import annotations

import numpy as np

from reference_checks._case import Data, ReferenceCase, describe, groups_apart, nodes_pure
from topoaudit.mapper.topology import invariants


def make_data(n: int = 1000, turns: float = 1.5, noise: float = 0.02, seed: int = 0) -> Data:
    rng = np.random.default_rng(seed)
    t = np.sqrt(rng.uniform(0.04, 1.0, n)) * turns * 2 * np.pi
    r = t / (turns * 2 * np.pi)
    one = np.column_stack([r * np.cos(t), r * np.sin(t)])
    X = np.vstack([one, -one]) + rng.normal(0.0, noise, (2 * n, 2))
    return Data(X, np.repeat([0, 1], n))


def check(graph, data, setting):
    inv = invariants(graph)
    pure = nodes_pure(graph, data.labels)
    apart, _ = groups_apart(graph, data.labels)
    got = describe(inv) + f"; nodes {'pure' if pure else 'mixed'}"
    return pure and apart, got + ("; spirals apart" if apart else "; spirals joined")


CASE = ReferenceCase(
    name="two_spirals",
    title="Two interleaved spirals, eccentricity filter",
    source="Lang and Witbrock (1988), the two-spirals benchmark",
    expected="every node pure in one spiral; the spirals in different components",
    make_data=make_data,
    params={
        "filter": "eccentricity",
        "n_intervals": 10,
        "overlap": 0.3,
        "clusterer": "single_linkage",
    },
    neighbourhood={"n_intervals": [8, 9, 10, 11, 12], "overlap": [0.2, 0.3, 0.4]},
    check=check,
)
