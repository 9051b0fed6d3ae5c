"""Validation record for models.profiles.conform: placing a profile on the analysis index.

Expected values are the inputs themselves or hand calculations written beside them.
"""

import numpy as np
import pandas as pd
from numpy.testing import assert_array_equal

from models.profiles import conform

INDEX = pd.date_range("2025-01-06", periods=24 * 14, freq="h", tz="Europe/Berlin")  # two weeks, Monday first


def _weekly(values_per_hour_of_week: np.ndarray, index=INDEX) -> pd.Series:
    return pd.Series(values_per_hour_of_week[np.arange(len(index)) % 168], index=index)


class TestConform:
    def test_a_profile_on_the_index_is_taken_as_it_is(self):
        # the analysis index and the profile hold the same instants: the values are the profile's own
        series = _weekly(np.arange(168, dtype=float))
        values, filled = conform(series, INDEX)
        assert_array_equal(values, series.to_numpy())
        assert filled == 0.0

    def test_the_same_instants_in_another_zone_are_the_same_profile(self):
        series = _weekly(np.arange(168, dtype=float)).tz_convert("UTC")
        values, filled = conform(series, INDEX)
        assert_array_equal(values, np.arange(len(INDEX)) % 168)
        assert filled == 0.0

    def test_agrees_with_the_general_path(self):
        # one hour more than the index: the general path (reindexing) drops it and must give the same values
        longer = pd.date_range(INDEX[0], periods=len(INDEX) + 1, freq="h", tz="Europe/Berlin")
        rng = np.random.default_rng(3)
        raw = rng.uniform(10, 90, len(longer))
        on_index, _ = conform(pd.Series(raw[:-1], index=INDEX), INDEX)
        general, _ = conform(pd.Series(raw, index=longer), INDEX)
        assert_array_equal(on_index, general)

    def test_a_gap_is_filled_from_the_typical_week(self):
        # hand calculation: hour of week 5 is 5.0 in week 1 and missing in week 2 -> filled with the mean of
        # that slot over the weeks that have it, 5.0; 1 of 336 intervals filled = 0.2976 %
        pattern = np.arange(168, dtype=float)
        series = _weekly(pattern)
        series.iloc[168 + 5] = np.nan
        values, filled = conform(series, INDEX)
        assert values[168 + 5] == 5.0
        assert filled == 1 / 336
