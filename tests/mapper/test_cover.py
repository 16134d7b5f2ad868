"""Uniform and balanced covers against a naive row-by-interval reference."""

from __future__ import annotations

import itertools
import re

import numpy as np
import pytest

from topoaudit.errors import ParameterError
from topoaudit.mapper.cover import BalancedCover, CoverElement, UniformCover

TOL = 1e-9  # slack (in units of the range) for rows that lie on an interval's boundary


def naive_intervals(lo: float, hi: float, n: int, g: float) -> list[tuple[float, float]]:
    """The documented intervals: L = (hi - lo) / (n - (n - 1) g), interval i starts at
    lo + i L (1 - g) and has length L."""
    length = (hi - lo) / (n - (n - 1) * g)
    return [(lo + i * length * (1 - g), lo + i * length * (1 - g) + length) for i in range(n)]


def naive_sets(t: np.ndarray, lo: float, hi: float, n: int, g: float, slack: float):
    """For each interval, the rows whose value lies in it (tested one by one), with the
    interval widened (slack > 0) or narrowed (slack < 0) by ``slack * (hi - lo)``."""
    eps = slack * (hi - lo)
    return [
        {r for r, v in enumerate(t) if a - eps <= v <= b + eps}
        for a, b in naive_intervals(lo, hi, n, g)
    ]


def average_rank_positions(values: np.ndarray) -> np.ndarray:
    """(average rank - 1) / (n - 1), counted by hand: rows below plus half the ties."""
    n = values.size
    less = np.array([(values < v).sum() for v in values], dtype=float)
    equal = np.array([(values == v).sum() for v in values], dtype=float)
    return (less + (equal - 1) / 2) / (n - 1)


def as_dict(elements: list[CoverElement]) -> dict[tuple[int, ...], list[int]]:
    return {e.index: e.rows.tolist() for e in elements}


def assert_between_naive_bounds(elements, per_dim_values, bounds, counts, overlaps):
    """Every element of the product cover holds every row that is strictly inside its
    intervals and no row that is outside them (rows on a boundary may go either way)."""
    got = as_dict(elements)
    strict = [
        naive_sets(t, lo, hi, n, g, -TOL)
        for t, (lo, hi), n, g in zip(per_dim_values, bounds, counts, overlaps, strict=True)
    ]
    loose = [
        naive_sets(t, lo, hi, n, g, TOL)
        for t, (lo, hi), n, g in zip(per_dim_values, bounds, counts, overlaps, strict=True)
    ]
    for index in itertools.product(*(range(n) for n in counts)):
        inner = set.intersection(*(strict[j][i] for j, i in enumerate(index)))
        outer = set.intersection(*(loose[j][i] for j, i in enumerate(index)))
        rows = set(got.get(index, []))
        assert inner <= rows <= outer, index
    assert all(rows for rows in got.values()), "empty cover elements are not reported"


DATA = {
    "uniform": lambda rng: rng.uniform(-2, 3, size=300),
    "normal": lambda rng: rng.normal(size=300),
    "skewed": lambda rng: rng.exponential(size=300) ** 2,
}
COUNTS = [1, 2, 5, 10, 17]
OVERLAPS = [0.0, 0.25, 0.5, 0.9]


@pytest.mark.parametrize("overlap", OVERLAPS, ids=[f"g={g}" for g in OVERLAPS])
@pytest.mark.parametrize("n_intervals", COUNTS, ids=[f"n={n}" for n in COUNTS])
@pytest.mark.parametrize("shape", list(DATA))
def test_uniform_cover_matches_the_naive_reference(shape, n_intervals, overlap):
    values = DATA[shape](np.random.default_rng(n_intervals))
    elements = UniformCover(n_intervals, overlap=overlap).fit_transform(values)
    lo, hi = values.min(), values.max()
    assert_between_naive_bounds(elements, [values], [(lo, hi)], [n_intervals], [overlap])


@pytest.mark.parametrize("overlap", OVERLAPS, ids=[f"g={g}" for g in OVERLAPS])
@pytest.mark.parametrize("n_intervals", COUNTS, ids=[f"n={n}" for n in COUNTS])
@pytest.mark.parametrize("shape", list(DATA))
def test_balanced_cover_is_the_naive_cover_of_the_rank_positions(shape, n_intervals, overlap):
    values = DATA[shape](np.random.default_rng(n_intervals))
    elements = BalancedCover(n_intervals, overlap=overlap).fit_transform(values)
    t = average_rank_positions(values)
    assert_between_naive_bounds(elements, [t], [(0.0, 1.0)], [n_intervals], [overlap])


def test_balanced_cover_with_ties_matches_the_naive_reference():
    values = np.random.default_rng(4).integers(0, 12, size=200).astype(float)
    elements = BalancedCover(6, overlap=0.3).fit_transform(values)
    t = average_rank_positions(values)
    assert_between_naive_bounds(elements, [t], [(0.0, 1.0)], [6], [0.3])


@pytest.mark.parametrize(
    ("counts", "overlaps"),
    [((3, 4), (0.2, 0.4)), ((12, 12), (0.9, 0.9)), ((1, 100), (0.0, 0.99))],
    ids=["light", "heavy (memberships enumerated at once)", "one by a hundred"],
)
@pytest.mark.parametrize("cover_cls", [UniformCover, BalancedCover], ids=["uniform", "balanced"])
def test_product_cover_in_two_dimensions_matches_the_naive_product(cover_cls, counts, overlaps):
    rng = np.random.default_rng(9)
    values = np.column_stack([rng.normal(size=250), rng.uniform(size=250)])
    elements = cover_cls(counts, overlap=overlaps).fit_transform(values)
    if cover_cls is UniformCover:
        per_dim = [values[:, 0], values[:, 1]]
        bounds = [(c.min(), c.max()) for c in per_dim]
    else:
        per_dim = [average_rank_positions(values[:, 0]), average_rank_positions(values[:, 1])]
        bounds = [(0.0, 1.0), (0.0, 1.0)]
    assert_between_naive_bounds(elements, per_dim, bounds, list(counts), list(overlaps))
    assert all(len(e.index) == 2 for e in elements)


@pytest.mark.parametrize("cover_cls", [UniformCover, BalancedCover], ids=["uniform", "balanced"])
@pytest.mark.parametrize(
    ("n_intervals", "overlap"),
    [(1, 0.0), (3, 0.0), (10, 0.3), (50, 0.1), (7, 0.95)],
    ids=["one", "three-no-overlap", "ten", "fifty", "seven-heavy-overlap"],
)
def test_every_row_lies_in_an_element_and_the_range_ends_in_the_end_intervals(
    cover_cls, n_intervals, overlap
):
    values = np.random.default_rng(1).gamma(2.0, size=400)
    elements = cover_cls(n_intervals, overlap=overlap).fit_transform(values)
    covered = np.zeros(values.size, dtype=int)
    for e in elements:
        covered[e.rows] += 1
    assert covered.min() >= 1
    got = as_dict(elements)
    assert int(np.argmin(values)) in got[(0,)]
    assert int(np.argmax(values)) in got[(n_intervals - 1,)]


@pytest.mark.parametrize("cover_cls", [UniformCover, BalancedCover], ids=["uniform", "balanced"])
def test_elements_are_sorted_unique_rows_in_lexicographic_index_order(cover_cls):
    rng = np.random.default_rng(2)
    values = rng.normal(size=(200, 2))
    elements = cover_cls((4, 3), overlap=(0.3, 0.5)).fit_transform(values)
    indices = [e.index for e in elements]
    assert indices == sorted(indices)
    assert len(set(indices)) == len(indices)
    for e in elements:
        assert np.all(np.diff(e.rows) > 0)
        assert e.size == e.rows.size > 0


@pytest.mark.parametrize("overlap", [0.0, 0.3, 0.75], ids=["g=0", "g=0.3", "g=0.75"])
def test_uniform_intervals_are_the_documented_formula(overlap):
    values = np.random.default_rng(5).uniform(-4, 9, size=100)
    cover = UniformCover(6, overlap=overlap).fit(values)
    ref = naive_intervals(values.min(), values.max(), 6, overlap)
    np.testing.assert_allclose(cover.intervals_[0], ref, rtol=0, atol=1e-12)
    # the last interval ends exactly at the maximum
    assert cover.intervals_[0][-1, 1] == values.max()


def test_balanced_intervals_are_empirical_quantiles():
    values = np.random.default_rng(6).exponential(size=101)
    cover = BalancedCover(4, overlap=0.2).fit(values)
    # reference: the linear-interpolation sample quantile (Hyndman and Fan, 1996, type 7),
    # computed by hand from the sorted values
    s = np.sort(values)

    def quantile(p: float) -> float:
        h = (s.size - 1) * p
        k = int(np.floor(h))
        return s[k] if k + 1 >= s.size else s[k] + (h - k) * (s[k + 1] - s[k])

    ref = [(quantile(a), quantile(min(b, 1.0))) for a, b in naive_intervals(0, 1, 4, 0.2)]
    np.testing.assert_allclose(cover.intervals_[0], ref, rtol=1e-12, atol=1e-12)


def test_balanced_intervals_hold_about_equal_numbers_of_rows():
    values = np.random.default_rng(3).lognormal(size=1000)
    n, g = 10, 0.3
    sizes = [e.size for e in BalancedCover(n, overlap=g).fit_transform(values)]
    assert len(sizes) == n
    # derived from the documented construction: an interval spans L (n_rows - 1) rank
    # steps with L = 1 / (n - (n - 1) g), so it holds that many rows, plus or minus one
    expected = (1000 - 1) / (n - (n - 1) * g)
    assert all(abs(s - expected) <= 1.5 for s in sizes), sizes
    # a uniform cover of the same skewed values is far from balanced
    uniform_sizes = [e.size for e in UniformCover(n, overlap=g).fit_transform(values)]
    assert max(uniform_sizes) > 3 * expected


def test_balanced_cover_of_a_block_of_ties_counts_rows_by_hand():
    values = np.r_[np.zeros(6), np.linspace(10, 100, 6)]
    elements = BalancedCover(3, overlap=0.0).fit_transform(values)
    # hand computation: the six zeros share average rank 3.5, position 2.5 / 11 = 0.23,
    # in [0, 1/3]; ranks 7..12 give positions 6/11 = 0.55 and 7/11 = 0.64 in [1/3, 2/3],
    # and 8/11 .. 11/11 in [2/3, 1]
    assert as_dict(elements) == {(0,): [0, 1, 2, 3, 4, 5], (1,): [6, 7], (2,): [8, 9, 10, 11]}


@pytest.mark.parametrize("cover_cls", [UniformCover, BalancedCover], ids=["uniform", "balanced"])
def test_tied_values_always_share_their_elements(cover_cls):
    rng = np.random.default_rng(8)
    values = rng.choice([0.0, 0.5, 1.3, 2.0, 7.0], size=150, p=[0.4, 0.1, 0.2, 0.2, 0.1])
    for e in cover_cls(8, overlap=0.4).fit_transform(values):
        inside = np.isin(values, values[e.rows])
        assert np.flatnonzero(inside).tolist() == e.rows.tolist()


@pytest.mark.parametrize("cover_cls", [UniformCover, BalancedCover], ids=["uniform", "balanced"])
@pytest.mark.parametrize("n_intervals", [1, 4, 10], ids=["n=1", "n=4", "n=10"])
def test_a_constant_filter_gives_one_element_with_every_row(cover_cls, n_intervals):
    elements = cover_cls(n_intervals, overlap=0.3).fit_transform(np.full(40, 2.5))
    assert len(elements) == 1
    assert elements[0].rows.tolist() == list(range(40))


@pytest.mark.parametrize("cover_cls", [UniformCover, BalancedCover], ids=["uniform", "balanced"])
def test_a_constant_second_dimension_does_not_split_the_first(cover_cls):
    values = np.column_stack([np.linspace(0, 1, 50), np.full(50, -1.0)])
    two_d = cover_cls((5, 5), overlap=0.2).fit_transform(values)
    one_d = cover_cls(5, overlap=0.2).fit_transform(values[:, 0])
    assert [e.rows.tolist() for e in two_d] == [e.rows.tolist() for e in one_d]
    assert {e.index[1] for e in two_d} == {0}


def test_uniform_cover_example_with_values_on_the_overlap():
    cover = UniformCover(2, overlap=0.5)
    # hand computation: L = 1 / (2 - 0.5) = 2/3, intervals [0, 2/3] and [1/3, 1]
    got = as_dict(cover.fit_transform([0.0, 0.4, 0.6, 1.0]))
    assert got == {(0,): [0, 1, 2], (1,): [1, 2, 3]}


def test_a_single_row_gives_one_element():
    for cover_cls in (UniformCover, BalancedCover):
        assert as_dict(cover_cls(5).fit_transform([3.0])) == {(0,): [0]}


def test_one_parameter_per_dimension_must_match_the_filter():
    with pytest.raises(
        ParameterError,
        match=re.escape("UniformCover got 2 values (3, 4) for a filter with 1 dimension"),
    ):
        UniformCover((3, 4)).fit_transform(np.arange(5.0))


def test_filter_values_with_three_columns_are_refused():
    with pytest.raises(
        ParameterError, match=re.escape("needs filter values of shape (n_rows, 1 or 2); got (5, 3)")
    ):
        BalancedCover(3).fit(np.zeros((5, 3)))


def test_transform_takes_only_the_values_fitted():
    cover = UniformCover(3).fit(np.arange(10.0))
    with pytest.raises(ParameterError, match=r"transform\(\) takes the values fitted"):
        cover.transform(np.arange(4.0))
