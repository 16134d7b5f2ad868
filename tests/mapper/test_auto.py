"""Settings chosen from the data, piece by piece, against independent computations.

The rule is that of Carrière, Michel and Oudot, "Statistical analysis and parameter
selection for Mapper", JMLR 19 (2018): subsamples of ``n / (log n)^(1 + β)`` rows, the
neighbourhood scale as the mean Hausdorff distance from the data to them, the interval
length as the largest filter difference over rows within that scale divided by the gain.
References here: the formula itself (computed with :mod:`math`), scipy's
``directed_hausdorff`` and ``pdist`` (brute force), and the cover's own intervals.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.spatial.distance import directed_hausdorff, pdist, squareform

from topoaudit.mapper.auto import (
    DEFAULT_GAIN,
    MAX_AUTO_INTERVALS,
    choose_settings,
    filter_spread,
    intervals_for_length,
    neighbourhood_scale,
    subsample_size,
)
from topoaudit.mapper.clustering import SingleLinkage
from topoaudit.mapper.cover import UniformCover
from topoaudit.mapper.graph import MapperBuilder


def formula(n: int, base: float = math.e, beta: float = 0.001) -> int:
    """``floor(n / (log_base n)^(1 + β))``, kept between 1 and ``n - 1``."""
    return min(max(math.floor(n / (math.log(n) / math.log(base)) ** (1 + beta)), 1), n - 1)


SIZES = [3, 10, 150, 1000, 2000, 10_000, 123_457]


@pytest.mark.parametrize("n", SIZES, ids=[f"n={n}" for n in SIZES])
def test_subsample_size_is_n_over_log_n_to_the_power_1_001(n):
    assert subsample_size(n) == formula(n)
    assert subsample_size(n, constant=10.0) == formula(n, base=10.0)


@pytest.mark.parametrize("n", [0, 1, 2], ids=["n=0", "n=1", "n=2"])
def test_subsample_size_of_fewer_than_three_rows_is_one(n):
    assert subsample_size(n) == 1


def _circle(n: int, seed: int = 0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    angle = rng.uniform(0, 2 * np.pi, n)
    return np.column_stack([np.cos(angle), np.sin(angle)]) + rng.normal(0, 0.05, (n, 2))


DATA = {
    "circle-2d": lambda: _circle(300),
    "blob-5d": lambda: np.random.default_rng(1).normal(size=(250, 5)),
    "repeated-rows": lambda: np.repeat(np.random.default_rng(2).normal(size=(60, 3)), 3, axis=0),
    "integer-grid": lambda: (
        np.array(np.meshgrid(np.arange(12), np.arange(9))).reshape(2, -1).T * 1.0
    ),
}


@pytest.mark.parametrize("name", list(DATA), ids=list(DATA))
def test_neighbourhood_scale_is_the_mean_hausdorff_distance_to_the_subsamples(name):
    X = DATA[name]()
    scale, m = neighbourhood_scale(X, n_subsamples=7, random_state=5)
    assert m == formula(X.shape[0])
    # the subsamples drawn as documented (a seeded generator, m rows without replacement
    # per draw); the distance from the data to each by scipy, brute force
    rng = np.random.default_rng(5)
    distances = [
        directed_hausdorff(X, X[np.sort(rng.choice(X.shape[0], size=m, replace=False))])[0]
        for _ in range(7)
    ]
    # ours are blocked distances by the expansion |a|² + |b|² - 2ab: equal to rounding
    assert scale == pytest.approx(np.mean(distances), rel=1e-9)


def brute_spread(X: np.ndarray, values: np.ndarray, scale: float) -> np.ndarray:
    values = values.reshape(X.shape[0], -1)
    near = squareform(pdist(X)) <= scale
    np.fill_diagonal(near, False)
    best = np.zeros(values.shape[1])
    for i, j in zip(*np.nonzero(near), strict=True):
        best = np.maximum(best, np.abs(values[i] - values[j]))
    return best


SPREADS = [
    ("circle-2d", "height", 0.2),
    ("circle-2d", "two-columns", 0.35),
    ("blob-5d", "height", 1.5),
    ("repeated-rows", "height", 0.5),
    ("integer-grid", "height", 1.0),  # grid neighbours exactly at the scale count
    ("integer-grid", "height", 0.0),
    ("blob-5d", "two-columns", 100.0),  # every pair: the whole range
]


@pytest.mark.parametrize(
    ("name", "values", "scale"), SPREADS, ids=[f"{a}-{b}-{c}" for a, b, c in SPREADS]
)
def test_filter_spread_is_the_largest_filter_difference_within_the_scale(name, values, scale):
    X = DATA[name]()
    f = X[:, 1] if values == "height" else X[:, :2] * np.array([1.0, -3.0])
    got = filter_spread(X, f, scale)
    np.testing.assert_allclose(got, brute_spread(X, f, scale), rtol=0, atol=0)


LENGTHS = [(10.0, 2.0, 0.4), (1.0, 0.3, 0.35), (7.3, 0.11, 0.45), (2.0, 2.0, 0.4), (5.0, 9.0, 0.4)]


@pytest.mark.parametrize(
    ("span", "length", "gain"), LENGTHS, ids=[f"span={a}-r={b}-g={c}" for a, b, c in LENGTHS]
)
def test_intervals_for_length_is_the_most_intervals_of_the_cover_at_least_that_long(
    span, length, gain
):
    k = intervals_for_length(span, length, gain)
    values = np.linspace(0.0, span, 50)

    def cover_length(count: int) -> float:
        bounds = UniformCover(count, overlap=gain).fit(values).intervals_[0]
        return float(bounds[0, 1] - bounds[0, 0])

    assert cover_length(k) >= length * (1 - 1e-12) or k == 1
    assert cover_length(k + 1) < length


def test_choose_settings_puts_the_pieces_together_and_caps_the_count():
    X = _circle(400, seed=3)
    values = X[:, 1]
    choice = choose_settings(X, values, random_state=11)
    scale, m = neighbourhood_scale(X, quantile=0.99, random_state=np.random.default_rng(11))
    assert (choice.scale, choice.subsample_rows) == (pytest.approx(scale), m)
    assert choice.quantile == 0.99
    (spread,) = filter_spread(X, values, choice.scale, quantile=0.99)
    assert choice.filter_spread == (pytest.approx(spread),)
    assert choice.gain == (DEFAULT_GAIN,)
    assert choice.interval_length == (pytest.approx(spread / DEFAULT_GAIN),)
    expected = intervals_for_length(np.ptp(values), spread / DEFAULT_GAIN, DEFAULT_GAIN)
    assert choice.n_intervals == (min(expected, MAX_AUTO_INTERVALS),)
    assert choice.capped is (expected > MAX_AUTO_INTERVALS)
    assert choice.sample_rows == 400

    # a long dense line: the filter changes little between neighbours against its span,
    # so the length asks for more intervals than the cap
    line = np.linspace(0.0, 1.0, 4000).reshape(-1, 1)
    wide = choose_settings(line, line, random_state=11)
    span_over_length = 1.0 / wide.interval_length[0]
    assert (span_over_length - DEFAULT_GAIN) / (1 - DEFAULT_GAIN) > MAX_AUTO_INTERVALS + 1
    assert wide.n_intervals == (MAX_AUTO_INTERVALS,)
    assert wide.capped


def test_choose_settings_keeps_what_was_given_and_samples_large_data():
    X = np.random.default_rng(4).normal(size=(3000, 3))
    given = choose_settings(X, X[:, :2], gain=(0.3, 0.45), n_intervals=(7, 9), max_rows=1000)
    assert given.gain == (0.3, 0.45)
    assert given.n_intervals == (7, 9)
    assert given.interval_length == tuple(
        s / g for s, g in zip(given.filter_spread, (0.3, 0.45), strict=True)
    )
    assert (given.sample_rows, given.subsample_rows) == (1000, formula(1000))


@pytest.mark.parametrize(
    ("params", "auto_chosen"),
    [
        ({"n_intervals": 6, "overlap": 0.3, "clusterer": "single_linkage"}, False),
        ({"n_intervals": 6, "overlap": 0.3}, True),  # the clusterer's scale is auto
        ({}, True),
    ],
    ids=["all-given", "clusterer-auto", "all-auto"],
)
def test_builder_uses_given_numbers_and_reports_what_it_chose(params, auto_chosen):
    X = _circle(500)
    builder = MapperBuilder("coordinate", filter_params={"columns": 1}, **params).fit(X)
    assert (builder.auto_ is not None) is auto_chosen
    if "n_intervals" in params:
        assert (builder.n_intervals_, builder.overlap_) == ((6,), (0.3,))
    else:
        assert builder.n_intervals_ == builder.auto_.n_intervals
        assert builder.overlap_ == (DEFAULT_GAIN,)
    if auto_chosen:
        assert builder.graph_.settings["auto"] == builder.auto_.as_dict()
        assert isinstance(builder.clusterer_, SingleLinkage)
        if "clusterer" not in params:
            assert builder.clusterer_.cut == builder.auto_.scale
    else:
        assert "auto" not in builder.graph_.settings


def test_the_same_data_give_the_same_choice():
    X = _circle(600, seed=8)
    first = MapperBuilder().fit(X).auto_
    second = MapperBuilder().fit(X.copy()).auto_
    assert first == second


def test_partial_hausdorff_scale_is_the_quantile_of_distances_to_each_subsample():
    # Source: the partial Hausdorff distance (Huttenlocher, Klanderman and Rucklidge, IEEE
    # PAMI 15(9), 1993) is a quantile of the directed distances; computed here by brute force
    X = np.random.default_rng(5).normal(size=(300, 3))
    got, m = neighbourhood_scale(X, n_subsamples=4, quantile=0.9, random_state=7)
    rng = np.random.default_rng(7)
    want = []
    for _ in range(4):
        picked = np.sort(rng.choice(300, size=m, replace=False))
        dist = squareform(pdist(X))[:, picked].min(axis=1)
        want.append(np.quantile(dist, 0.9))
    assert got == pytest.approx(np.mean(want), rel=1e-9)


def test_filter_spread_quantile_is_within_one_histogram_bin_of_the_order_statistic():
    X = np.random.default_rng(6).normal(size=(250, 2))
    values = X @ np.array([0.6, 0.8])
    d = squareform(pdist(X))
    near = (d <= 0.7) & ~np.eye(250, dtype=bool)
    diffs = np.abs(values[:, None] - values[None, :])[near]
    (top,) = filter_spread(X, values, 0.7)
    (got,) = filter_spread(X, values, 0.7, quantile=0.99)
    assert top == pytest.approx(diffs.max(), rel=1e-9)
    # the order statistic of rank ceil(0.99 n), read off a histogram: within one bin
    rank = math.ceil(0.99 * diffs.size) - 1
    assert abs(got - np.sort(diffs)[rank]) <= top / 4096 + 1e-12
