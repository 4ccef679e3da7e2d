"""The streamed assessment: each chunk's outputs counted in bins and dropped, so that memory does not grow
with the number of samples; and the binned statistics it rests on."""

from __future__ import annotations

import json
import tracemalloc

import numpy as np
import pytest
from click.testing import CliRunner
from scipy import stats

from landrisk import api
from landrisk.cli import main
from landrisk.errors import LandriskError
from landrisk.testing.testmodels import StoppingDistance
from landrisk.uq import RunningMoments, percentiles, sample
from landrisk.uq.chunked import Histogram

PS = (1.0, 5.0, 50.0, 90.0, 95.0, 99.0, 99.9)


def _stopping_distances(n: int, seed: int) -> np.ndarray:
    model = StoppingDistance()
    return model(sample(model.problem(), n, seed=seed))["distance"]


def _histogram(x: np.ndarray, chunks: int = 7, width: float = 1.0, bins: int = 5000) -> Histogram:
    parts = [Histogram.of(c, width, bins) for c in np.array_split(x, chunks)]
    h = parts[0]
    for p in parts[1:]:
        h = h.merge(p)
    return h


def test_binned_percentiles_are_within_a_bin_of_numpy_and_quantile_test() -> None:
    # The sample quantile of numpy.percentile (linear interpolation, Hyndman & Fan definition 7) and the
    # order-statistic interval of scipy.stats.quantile_test, on the same 200 000 distances counted in
    # 1 m bins over seven chunks: each within one bin width.
    x = _stopping_distances(200_000, seed=5)
    h = _histogram(x)
    assert h.n == x.size
    for p, est in zip(PS, h.percentiles(PS, 0.95), strict=True):
        q = float(np.percentile(x, p))
        assert est.supported and est.value is not None
        assert abs(est.value - q) <= 1.0, p
        ci = stats.quantile_test(x, q=q, p=p / 100).confidence_interval(0.95)
        assert est.lo is not None and est.hi is not None
        assert abs(est.lo - ci.low) <= 1.0 and abs(est.hi - ci.high) <= 1.0, p
        assert est.lo <= ci.low + 1e-9 and est.hi >= ci.high - 1e-9  # widened to the bin edges


def test_binned_percentiles_among_infinite_values_are_flagged_like_the_exact_ones() -> None:
    # 5 % of the outcomes beyond every finite threshold (+inf, a landing that cannot stop): the
    # percentiles above 95 are infinite, as the exact order statistics say.
    x = _stopping_distances(40_000, seed=6)
    x[::20] = np.inf
    exact = percentiles(x, PS, 0.95)
    binned = _histogram(x).percentiles(PS, 0.95)
    for e, b in zip(exact, binned, strict=True):
        assert (b.infinite, b.hi_infinite, b.supported) == (e.infinite, e.hi_infinite, e.supported), e.p
        if e.value is not None:
            assert b.value is not None and abs(b.value - e.value) <= 1.0


def test_binned_exceedance_counts_equal_direct_counts_at_bin_edges() -> None:
    x = _stopping_distances(50_000, seed=7)
    x[:3] = np.inf
    edges, counts = _histogram(x).exceedance(np.array([10.0, 512.3, 700.0, 2e9]))
    assert list(edges[:3]) == [10.0, 513.0, 700.0]
    assert list(counts) == [int(np.count_nonzero(x >= e)) for e in edges]


def test_running_moments_over_chunks_equal_numpy_of_the_finite_values() -> None:
    # numpy's mean and std (ddof = 1) of the finite values; the infinite ones counted as left out.
    x = _stopping_distances(100_000, seed=8) + 1e4  # a large common offset: no cancellation allowed
    x[::1000] = np.inf
    r = RunningMoments()
    for part in np.array_split(x, 9):
        r.add(part)
    m = r.moments(0.95)
    finite = x[np.isfinite(x)]
    assert m.used == finite.size and m.excluded == x.size - finite.size
    assert m.mean == pytest.approx(float(np.mean(finite)), rel=1e-13)
    assert m.sd == pytest.approx(float(np.std(finite, ddof=1)), rel=1e-9)
    half = stats.norm.ppf(0.975) * np.std(finite, ddof=1) / np.sqrt(finite.size)
    assert m.hi - m.mean == pytest.approx(half, rel=1e-9)
    with pytest.raises(ValueError, match="NaN"):
        r.add(np.array([1.0, np.nan]))


def test_streamed_assessment_equals_the_kept_one_within_a_bin() -> None:
    # The same samples (one random stream) assessed with every output kept and with the outputs counted
    # chunk by chunk: the same counts and probabilities, means to rounding, percentiles within 1 m.
    scenario, uncertain = api.load_study()
    kept = api.assess(scenario, uncertain, samples=150_000, seed=4)
    streamed = api.assess(scenario, uncertain, samples=150_000, seed=4, stream_above=40_000)
    assert streamed.streamed and not kept.streamed and streamed.percentile_error_m == 1.0
    assert streamed.outputs == {} and streamed.inputs is None
    assert streamed.p_overrun == kept.p_overrun and streamed.p_beyond_resa == kept.p_beyond_resa
    assert streamed.flags == kept.flags
    assert streamed.overrun_speed == kept.overrun_speed
    assert [c.p_exceed for c in streamed.comparisons] == [c.p_exceed for c in kept.comparisons]
    for name, pcts in kept.percentiles.items():
        assert streamed.moments[name].mean == pytest.approx(kept.moments[name].mean, rel=1e-12)
        assert streamed.moments[name].sd == pytest.approx(kept.moments[name].sd, rel=1e-9)
        for e, b in zip(pcts, streamed.percentiles[name], strict=True):
            for attr in ("value", "lo", "hi"):
                assert abs(getattr(b, attr) - getattr(e, attr)) <= 1.0, (name, e.p, attr)
    assert streamed.convergence["n"][-1] == 150_000
    assert streamed.convergence["p_event"][-1] == pytest.approx(kept.p_overrun.estimate)
    record = api.assessment_record(streamed)
    assert record["streamed"] is True and record["percentile_error_m"] == 1.0
    with pytest.raises(LandriskError, match="streamed"):
        streamed.sorted_total()


def _peak_bytes(samples: int) -> int:
    scenario, uncertain = api.load_study()
    tracemalloc.start()
    api.assess(scenario, uncertain, samples=samples, seed=2, chunk=1 << 14, stream_above=1 << 14)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return peak


def test_streamed_memory_does_not_grow_with_the_sample_count() -> None:
    # Four times the samples, about the same peak (kept, the outputs alone would add 51 B a sample:
    # 23 MB more at 600 000).
    small, large = _peak_bytes(150_000), _peak_bytes(600_000)
    assert large < 1.2 * small + 2e6, (small, large)


def test_stream_above_from_the_command_line() -> None:
    runner = CliRunner()
    args = ["assess", "--samples", "60000", "--stream-above", "20000", "--quiet"]
    res = runner.invoke(main, [*args, "--json"])
    assert res.exit_code == 0, res.output
    rec = json.loads(res.output)
    assert rec["streamed"] is True and rec["percentile_error_m"] == 1.0
    res = runner.invoke(main, args)
    assert res.exit_code == 0 and "streamed: the 60,000 distances were counted in bins of 1 m" in res.output
    res = runner.invoke(main, ["assess", "--method", "importance", "--stream-above", "5"])
    assert res.exit_code == 2 and "--stream-above" in res.output
