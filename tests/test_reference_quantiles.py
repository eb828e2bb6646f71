"""Exact percentiles of products against numpy.percentile (reference library, ``linear``
method: Hyndman and Fan 1996, definition 7)."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from slopescreen.report.quantiles import percentiles

QS = (0, 1, 10, 25, 50, 75, 90, 99, 100)


def _reference(x, qs):
    fin = x[np.isfinite(x)].astype(np.float64)
    return None if fin.size == 0 else np.percentile(fin, qs)


@settings(max_examples=200, deadline=None)
@given(st.lists(st.one_of(st.floats(width=32, allow_nan=True, allow_infinity=True),
                          st.sampled_from([0.0, -0.0, 1.0, 1.0, 2.5])), min_size=0, max_size=300))
def test_matches_numpy_percentile_on_any_float32_values(values):
    x = np.array(values, dtype=np.float32)
    got = percentiles(x, QS)
    ref = _reference(x, QS)
    if ref is None:
        assert got is None
    else:
        np.testing.assert_allclose(got, ref, rtol=1e-12, atol=1e-300)


def test_matches_numpy_on_a_large_skewed_grid_with_nodata():
    rng = np.random.default_rng(7)
    x = rng.lognormal(3.0, 2.0, size=(700, 900)).astype(np.float32)   # SCA-like, heavy tail
    x[rng.random(x.shape) < 0.2] = np.nan
    np.testing.assert_allclose(percentiles(x, QS), _reference(x, QS), rtol=1e-12)


def test_other_dtypes_and_bad_percentiles():
    assert percentiles(np.array([1, 2, 3, 4]), [50]) == (2.5,)
    with pytest.raises(ValueError):
        percentiles(np.ones(3, dtype=np.float32), [101])
