"""calc.engine.samples.percentiles: the 16/50/84 % points `--mc` shows are exactly numpy's
(np.percentile, method "linear", Hyndman & Fan 1996 definition 7), found faster."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from calc import Sheet
from calc.engine import samples
from calc.engine.samples import POINTS, percentiles
from conftest import count_calls


def _numpy(data, points=POINTS):
    return np.percentile(data, list(points), axis=0)


@pytest.fixture
def numpy_calls(monkeypatch) -> list[int]:
    """Calls of np.percentile made by calc.engine.samples (its fallback)."""
    calls: list[int] = []
    original = np.percentile

    def counted(*args, **kwargs):
        calls.append(1)
        return original(*args, **kwargs)

    samples._agrees()  # its own check of numpy is not a fallback
    monkeypatch.setattr(samples.np, "percentile", counted)
    return calls


def test_the_fast_way_is_taken_for_many_samples(numpy_calls):
    data = np.random.default_rng(7).standard_normal(100_000)
    points = percentiles(data)
    assert numpy_calls == [], "np.percentile itself ran"
    # the standard normal's 16/50/84 % points are −0.994, 0, 0.994 (Φ⁻¹; common practice);
    # 10^5 samples place them within a few 0.01
    assert points == pytest.approx([-0.9945, 0.0, 0.9945], abs=0.03)


@pytest.mark.parametrize("make", [
    lambda rng: rng.standard_normal(100_000),
    lambda rng: np.exp(rng.standard_normal(50_001)),              # skewed
    lambda rng: np.round(rng.standard_normal(20_000), 1),         # many equal values
    lambda rng: np.full(10_000, 3.25),                            # all equal
    lambda rng: np.sort(rng.standard_normal(30_000)),             # already sorted
    lambda rng: np.sort(rng.standard_normal(30_000))[::-1].copy(),
    lambda rng: np.concatenate([rng.standard_normal(9_000), [np.inf] * 3, [-np.inf] * 2]),
    lambda rng: np.concatenate([rng.standard_normal(9_000), [np.nan]]),
    lambda rng: rng.standard_normal(100),                         # few: numpy's own way
    lambda rng: rng.standard_normal((40_000, 3)),                 # samples of an array
    lambda rng: rng.standard_normal((5_000, 2, 2)),
])
def test_the_same_numbers_as_numpy(make):
    data = make(np.random.default_rng(11))
    expected = _numpy(data)
    got = percentiles(data)
    assert got.shape == expected.shape
    assert np.array_equal(got, expected, equal_nan=True)
    if data.ndim == 1:
        assert np.array_equal(samples._points(data, POINTS), expected, equal_nan=True)


@settings(max_examples=60, deadline=None)
@given(st.integers(4096, 40_000), st.integers(0, 2**32 - 1),
       st.sampled_from(["normal", "uniform", "integers", "lognormal"]),
       st.lists(st.floats(0, 100), min_size=1, max_size=5))
def test_the_same_numbers_as_numpy_for_any_sample(n, seed, kind, points):
    rng = np.random.default_rng(seed)
    data = {"normal": lambda: rng.standard_normal(n) * 1e3 + 5,
            "uniform": lambda: rng.uniform(-1, 1, n),
            "integers": lambda: rng.integers(-5, 5, n).astype(float),
            "lognormal": lambda: rng.lognormal(0, 2, n)}[kind]()
    assert np.array_equal(percentiles(data, points), _numpy(data, points))
    # the fast way itself (percentiles() would fall back to numpy if it ever disagreed)
    assert np.array_equal(samples._points(data, points), _numpy(data, points))


def test_the_fast_way_agrees_with_numpy_here():
    assert samples._agrees()


def test_monte_carlo_shows_numpys_points():
    sheet = Sheet.from_text("m = 1.438 ± 0.01 Msun\nr = 2 ± 0.1 AU\nv = sqrt(const.G * m / r) in km / s\n")
    results = sheet.monte_carlo(20_000, seed=3)
    shown = results["v"]
    assert np.array_equal(shown.percentiles(), _numpy(shown.samples))


def test_interpolation_from_the_upper_neighbour_as_numpy_does():
    # numpy interpolates from the upper value when the fraction is at least 0.5
    # (b − (b − a)(1 − t)); here that differs from a + (b − a) t in the last bit
    a, b = 0.5436249914654229, 0.9350724237877682
    data = np.concatenate([np.full(799, -1.0), [a, b], np.full(5000 - 801, 10.0)])
    np.random.default_rng(5).shuffle(data)
    expected = np.percentile(data, [16])  # rank 799.84: between a and b, t = 0.84
    assert expected[0] != a + (b - a) * 0.8400000000000318
    assert np.array_equal(samples._points(data, (16,)), expected)


def test_a_probe_far_off_only_fills_a_bin(monkeypatch):
    """The probe of every (n / 2048)-th sample is made unrepresentative (those samples are
    moved far up): the bins it places then miss the ranks' neighbourhood, so the ranks fall
    in an end bin with many samples, and the numbers are numpy's all the same, still without
    partitioning every sample."""
    calls = count_calls(monkeypatch, samples, "_partitioned")
    rng = np.random.default_rng(23)
    ordinary = rng.standard_normal(100_000)
    assert np.array_equal(samples._points(ordinary, POINTS), _numpy(ordinary))
    skewed = rng.standard_normal(100_000)
    skewed[::100_000 // samples._PROBE] += 50.0
    assert np.array_equal(samples._points(skewed, POINTS), _numpy(skewed))
    assert calls == []


def test_ranks_among_equal_values_are_found_by_the_whole_partition(monkeypatch):
    """Where the probe sees one value all around the ranks (a sample mostly of one number)
    there is no width to divide into bins: every sample is partitioned, as numpy does."""
    calls = count_calls(monkeypatch, samples, "_partitioned")
    rng = np.random.default_rng(3)
    data = np.where(rng.random(50_000) < 0.9, 2.5, rng.standard_normal(50_000))
    assert np.array_equal(samples._points(data, POINTS), _numpy(data))
    assert calls == [1]


def test_a_probe_off_the_middle_by_chance_still_brackets(monkeypatch):
    """Cells computed from the same inputs share one probe, so a probe somewhat off the middle
    by chance (here 3.3 standard deviations of its count below the median: 75 of its 2,084
    samples moved across) is met by every such cell. The bins it places still hold the ranks
    (the numbers are numpy's, and no whole partition is needed)."""
    calls = count_calls(monkeypatch, samples, "_partitioned")
    data = np.random.default_rng(7).standard_normal(100_000)
    probe = data[::100_000 // samples._PROBE]           # a view: the probe's samples
    above = np.flatnonzero(probe > np.median(data))[:75]
    probe[above] = -probe[above]
    assert np.array_equal(samples._points(data, POINTS), _numpy(data))
    assert calls == []


@pytest.mark.parametrize("odd", [np.nan, np.inf])
def test_shown_samples_with_a_value_that_is_not_finite_get_numpys_points(odd):
    """A shown value skips the scan for nan when its sample mean is finite; a nan or an
    infinite sample makes the mean say otherwise, and the points are numpy's."""
    import astropy.units as u

    from calc.engine.samples import Samples
    from calc.engine.values import shown

    data = np.random.default_rng(11).standard_normal(50_000)
    data[1234] = odd
    with np.errstate(all="ignore"):     # as a sheet evaluates: σ of an infinite sample
        form = shown(Samples(u.Quantity(data, u.km)))
    expected = _numpy(data)
    assert np.array_equal(form.percentiles(), expected, equal_nan=True)


def test_points_asked_ahead_are_found_beside_the_evaluation():
    """Each cell's samples are summarised on a thread as they are ready, and with
    ``points=True`` (as `eval --mc` asks) their percentiles with them; mean, σ and points are
    numpy's numbers all the same (np.mean, np.std with ddof=1, np.percentile), for the cells
    of a record too. Without it the points are found only when asked for."""
    text = ("m = 1.438 ± 0.01 Msun\nr = 2 ± 0.1 AU\nv = sqrt(const.G * m / r) in km / s\n"
            "o = orbit(r, 0.1 ± 0.01)\n")
    ahead = Sheet.from_text(text).monte_carlo(20_000, seed=3, points=True)
    assert ahead["v"]._summary is not None          # found in the background
    for shown in (ahead["v"], ahead["m"], ahead["o"].fields["e"]):
        assert shown.samples is not None and shown._points is not None   # with the summary
        assert np.array_equal(shown.percentiles(), _numpy(shown.samples))
        assert shown.value == np.mean(shown.samples)
        assert shown.sigma == np.std(shown.samples, ddof=1)
    later = Sheet.from_text(text).monte_carlo(20_000, seed=3)
    assert later["v"].samples is not None and later["v"]._points is None
    assert np.array_equal(later["v"].percentiles(), ahead["v"].percentiles())


def test_rows_found_together_are_each_rows_own_numbers():
    """Several cells' samples stacked and summarised together give, row by row, what numpy
    gives for the row alone (np.mean, np.std with ddof=1, np.percentile), to the last bit:
    skewed, heavy-tailed, mostly-one-value and rows with infinite samples included; a row
    whose samples are all one value is exact (no σ, no samples)."""
    from calc.engine.summaries import summarised_together

    rng = np.random.default_rng(17)
    n = 30_000
    rows = [rng.standard_normal(n) * 3e8 + 1e9, rng.standard_cauchy(n),
            np.exp(rng.standard_normal(n) * 2), np.where(rng.random(n) < 0.9, 2.5, rng.random(n)),
            np.concatenate([rng.standard_normal(n - 3), [np.inf, -np.inf, np.inf]]),
            np.full(n, 4.75), np.round(rng.standard_normal(n), 1)]
    stack = np.stack(rows)
    with np.errstate(all="ignore"):
        summaries = summarised_together(stack, points=True)
        for row, summary in zip(rows, summaries):
            assert np.array_equal(summary.mean, np.mean(row), equal_nan=True)
            if np.all(row == row[0]):
                assert summary.spread is None and summary.samples is None
                continue
            assert np.array_equal(summary.spread, np.std(row, ddof=1), equal_nan=True)
            assert np.array_equal(summary.points, _numpy(row), equal_nan=True)


def test_the_summariser_hands_cells_over_a_batch_at_a_time(monkeypatch):
    """Every hand-over wakes the summarising thread, which then takes the GIL from the
    evaluation: cells go over four at a time, and the rest when the run ends. A summary asked
    for before its batch is whole is found all the same (no wait for cells that never come)."""
    import queue as queue_module

    from calc.engine import summary_thread as summaries

    puts: list[int] = []
    original_put = queue_module.SimpleQueue.put

    class Counting(queue_module.SimpleQueue):
        def put(self, item, block=True, timeout=None):
            puts.append(0 if item is None else len(item))
            original_put(self, item, block, timeout)

    monkeypatch.setattr(summaries.queue, "SimpleQueue", Counting)
    rng = np.random.default_rng(2)
    cells = [rng.standard_normal(10_000) + k for k in range(10)]
    summariser = summaries.Summariser(points=True)
    futures = [summariser.submit(cell) for cell in cells]
    assert puts == [4, 4]
    early = futures[9].result(timeout=20)          # its batch of two is not whole yet
    assert np.array_equal(early.points, _numpy(cells[9]))
    summariser.close()
    assert puts == [4, 4, 2, 0]
    for cell, future in zip(cells, futures):
        summary = future.result(timeout=20)
        assert summary.mean == np.mean(cell) and summary.spread == np.std(cell, ddof=1)
        assert np.array_equal(summary.points, _numpy(cell))
