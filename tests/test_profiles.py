"""Validation record for models.profiles.conform: placing a profile on the analysis index.

Expected values are the inputs themselves or hand calculations written beside them.
"""

import numpy as np
import pytest
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

    def test_a_year_from_july_to_june_keeps_every_measured_month(self):
        # hourly, Europe/Berlin, 1 Jul 2025 to 30 Jun 2026: 100 kW in 2025, 200 kW in 2026; the analysis year is
        # 2025 (4,417 of the 8,760 stamps fall in it, 4,343 in 2026). Hand calculation of the placing:
        # - each 2026 stamp moves back 52 weeks (364 days): Thu 1 Jan 2026 -> Thu 2 Jan 2025, so 2 Jan to
        #   30 Jun 2025 hold 200 kW: 180 days x 24 h - 1 h (30 Mar 2025, clocks forward) = 4,319 h;
        # - 30 Jun 2026 moves onto 1 Jul 2025, measured in 2025 already: the measured 100 kW stays;
        # - 1 Jul to 31 Dec 2025 hold 100 kW: 184 days x 24 h + 1 h (26 Oct 2025, clocks back) = 4,417 h;
        # - 1 Jan 2025 (24 h) is measured in neither: filled from the typical week, 24 / 8,760 of the year
        from models.profiles import analysis_index

        stamps = pd.date_range("2025-07-01", "2026-07-01", freq="h", tz="Europe/Berlin", inclusive="left")
        series = pd.Series(np.where(stamps.year == 2025, 100.0, 200.0), index=stamps)
        index = analysis_index({"p": series}, "Europe/Berlin")
        assert index[0] == pd.Timestamp("2025-01-01", tz="Europe/Berlin") and len(index) == 8760
        values, filled = conform(series, index)
        on = pd.Series(values, index=index)
        assert (on["2025-01-02":"2025-06-30"] == 200.0).all() and int((values == 200.0).sum()) == 4319
        assert (on["2025-07-01":"2025-12-31"] == 100.0).all() and int((values == 100.0).sum()) == 4417
        assert filled == 24 / 8760
        assert ((on["2025-01-01"] > 100.0) & (on["2025-01-01"] < 200.0)).all()  # a mean of both halves' Wednesdays

    def test_a_profile_of_another_year_keeps_its_clock_times_in_the_weeks_between_two_clock_changes(self):
        # hand calculation: a 2023 profile of Europe/Berlin whose value is the local hour of day, placed on 2024. The
        # clocks went forward on 26 Mar 2023 and 31 Mar 2024, so Mon 27 Mar 2023 08:00 (summer time) moved 52 weeks
        # lands on Mon 25 Mar 2024 08:00 (winter time): by the clock, 8; an hour earlier (7) had it moved by
        # absolute time. Likewise the week between 29 Oct 2023 and 27 Oct 2024 the other way. Every interval of 2024
        # therefore reads its own hour of day (those no 2023 stamp reaches are filled from the typical week, whose
        # slot means are the hours themselves)
        stamps = pd.date_range("2023-01-01", "2024-01-01", freq="h", tz="Europe/Berlin", inclusive="left")
        series = pd.Series(stamps.hour.to_numpy(dtype=float), index=stamps)
        index = pd.date_range("2024-01-01", "2025-01-01", freq="h", tz="Europe/Berlin", inclusive="left")
        values, _ = conform(series, index)
        on = pd.Series(values, index=index)
        assert on[pd.Timestamp("2024-03-25 08:00", tz="Europe/Berlin")] == 8.0
        assert_array_equal(values, index.hour.to_numpy(dtype=float))

    def test_a_short_campaign_is_repeated_week_by_week_keeping_its_peaks(self):
        # hand calculation: two weeks logged from Monday 3 March 2025 (UTC, hourly), 100 kW in the first and 200 kW in
        # the second, with a 400 kW hour on Wednesday 12 March 10:00 (the second week). Placed on 2025, the year
        # repeats the two weeks in turn from 3 March, backwards and forwards: 17 March starts the first again, 24
        # March the second; 24 February (one week before) is a second week, 17 February a first; day d of the year
        # (1 January = 0, 3 March = 61) is of a second week where (d - 61) mod 14 >= 7: 1 January (9) and 31 December
        # (303 mod 14 = 9) both are. So the 400 kW hour recurs every two weeks, on Wednesday 10:00 of each second week:
        # days 0, 14, ..., 364 (both Wednesdays), 27 of them. The mean of each weekday and hour (150, with 250 at
        # Wednesday 10:00) would have flattened the peak to 250 kW
        start = pd.Timestamp("2025-03-03", tz="UTC")
        stamps = pd.date_range(start, periods=14 * 24, freq="h")
        values = np.where(np.arange(len(stamps)) < 168, 100.0, 200.0)
        values[stamps.get_loc(pd.Timestamp("2025-03-12 10:00", tz="UTC"))] = 400.0
        index = pd.date_range("2025-01-01", "2026-01-01", freq="h", tz="UTC", inclusive="left")
        placed, filled = conform(pd.Series(values, index=stamps), index)
        on = pd.Series(placed, index=index)
        assert filled == (8760 - 14 * 24) / 8760
        for day, kw in (("2025-03-17", 100.0), ("2025-03-24", 200.0), ("2025-02-24", 200.0), ("2025-02-17", 100.0),
                        ("2025-01-01", 200.0), ("2025-12-31", 200.0)):
            assert on[pd.Timestamp(f"{day} 05:00", tz="UTC")] == kw, day
        peaks = on[on == 400.0].index
        assert len(peaks) == 27 and set(peaks.day_of_week) == {2} and set(peaks.hour) == {10}
        assert on.max() == 400.0

    def test_a_winter_campaign_across_the_new_year_is_repeated_too(self):
        # hand calculation: 8 weeks logged from Monday 2 December 2024 (UTC, hourly) at 100 kW, with a 400 kW hour on
        # Tuesday 17 December 10:00. The profile is centred on 2024, so it is moved 52 weeks onto the analysis year 2025
        # (2 December 2024 -> 1 December 2025, the peak -> Tuesday 16 December 2025), its January part back onto
        # January 2025. The rest of 2025 repeats the 8 weeks from 1 December 2025 backwards: the peak every 56 days,
        # 21 October, 26 August, 1 July, 6 May, 11 March (14 January 2025 is measured, 100 kW: the campaign's own 14
        # January). Six 400 kW hours; the means of each weekday and hour would have given none but the measured one
        stamps = pd.date_range("2024-12-02", periods=8 * 168, freq="h", tz="UTC")
        values = np.full(len(stamps), 100.0)
        values[stamps.get_loc(pd.Timestamp("2024-12-17 10:00", tz="UTC"))] = 400.0
        index = pd.date_range("2025-01-01", "2026-01-01", freq="h", tz="UTC", inclusive="left")
        on = pd.Series(conform(pd.Series(values, index=stamps), index)[0], index=index)
        peaks = [str(t.date()) for t in on[on == 400.0].index]
        assert peaks == ["2025-03-11", "2025-05-06", "2025-07-01", "2025-08-26", "2025-10-21", "2025-12-16"]
        assert set(on[on == 400.0].index.hour) == {10}

    def test_a_blank_first_reading_does_not_shorten_the_weeks_repeated(self):
        # four weeks from Monday 3 March 2025 (UTC, hourly), each week its own level (100, 200, 300, 400 kW): with the
        # first reading blank the span is a reading short of four weeks, still four weeks repeated (a day short counts)
        stamps = pd.date_range("2025-03-03", periods=4 * 168, freq="h", tz="UTC")
        values = np.repeat([100.0, 200.0, 300.0, 400.0], 168)
        index = pd.date_range("2025-01-01", "2026-01-01", freq="h", tz="UTC", inclusive="left")
        whole = conform(pd.Series(values, index=stamps), index)[0]
        blank = values.copy()
        blank[0] = np.nan
        short = conform(pd.Series(blank, index=stamps), index)[0]
        later = index >= pd.Timestamp("2025-03-31", tz="UTC")  # past the span: repeated weeks
        # the repeats of the blank reading (Monday 00:00 of every first week) take the mean of Monday 00:00 over the
        # weeks that measured it, (200 + 300 + 400) / 3 = 300; every other interval is as without the blank
        of_blank = np.asarray((index - stamps[0]) % pd.Timedelta(weeks=4) == pd.Timedelta(0))
        assert_array_equal(short[later & ~of_blank], whole[later & ~of_blank])
        assert (short[later & of_blank] == 300.0).all() and (later & of_blank).sum() == 10
        on = pd.Series(whole, index=index)
        assert on[pd.Timestamp("2025-04-14 05:00", tz="UTC")] == 300.0  # six weeks on: the third week

    def test_a_gap_inside_a_short_campaign_keeps_the_mean(self):
        # two weeks from Monday 3 March 2025 at 100 then 200 kW, one blank hour in the second week (Tuesday 11 March
        # 05:00): it is a gap, filled by the mean of its weekday and hour over the weeks measured, the first week's
        # 100 kW alone (150 would need the blank hour)
        stamps = pd.date_range("2025-03-03", periods=2 * 168, freq="h", tz="UTC")
        values = np.repeat([100.0, 200.0], 168)
        gap = stamps.get_loc(pd.Timestamp("2025-03-11 05:00", tz="UTC"))
        values[gap] = np.nan
        index = pd.date_range("2025-01-01", "2026-01-01", freq="h", tz="UTC", inclusive="left")
        on = pd.Series(conform(pd.Series(values, index=stamps), index)[0], index=index)
        assert on[pd.Timestamp("2025-03-11 05:00", tz="UTC")] == 100.0
        assert on[pd.Timestamp("2025-03-26 05:00", tz="UTC")] == 200.0  # two weeks on, outside the span: week 2's
        # Wednesday; its Tuesday 05:00 repeats the blank hour, so the repeat gives nothing there and the mean, 100, stands
        assert on[pd.Timestamp("2025-03-25 05:00", tz="UTC")] == 100.0

    def test_a_profile_shorter_than_a_week_is_extended_by_its_means(self):
        # five days (Mon-Fri) at 80 kW with a 100 kW hour on Tuesday 09:00: less than a week to repeat, so each weekday
        # and hour takes its mean, and the weekend (never measured) the profile's mean
        stamps = pd.date_range("2025-03-03", periods=5 * 24, freq="h", tz="UTC")
        values = np.full(len(stamps), 80.0)
        values[33] = 100.0  # Tuesday 09:00
        index = pd.date_range("2025-01-01", "2026-01-01", freq="h", tz="UTC", inclusive="left")
        on = pd.Series(conform(pd.Series(values, index=stamps), index)[0], index=index)
        assert on[pd.Timestamp("2025-03-11 09:00", tz="UTC")] == 100.0
        assert on[pd.Timestamp("2025-03-15 09:00", tz="UTC")] == pytest.approx(values.mean())

    def test_an_interval_measured_in_the_year_is_never_replaced_by_a_moved_one(self):
        # two weeks of 2025 at 50 kW (so the profile is centred on 2025) and the first of them again in 2026 (52
        # weeks later, same weekdays) at 70 kW: the analysis index of that 2025 week keeps 50 kW; the 2026 values
        # land on the same instants and are not used
        week = pd.date_range("2025-03-03", periods=168, freq="h", tz="Europe/Berlin")
        two_weeks = pd.date_range("2025-03-03", periods=336, freq="h", tz="Europe/Berlin")
        later = week + pd.Timedelta(days=364)
        series = pd.concat([pd.Series(50.0, index=two_weeks), pd.Series(70.0, index=later)])
        values, filled = conform(series, week)
        assert (values == 50.0).all() and filled == 0.0

    def test_a_profile_longer_than_a_year_fills_its_gaps_from_the_typical_week_at_any_step(self):
        # July 2024 to December 2025: 999 kW in 2024, 100 kW in 2025, with a week missing in September 2025. Of a
        # profile longer than a year the analysis year (2025) alone is used: the gap takes the typical week of the
        # profile's own data (a mean over both years' same weekday and hour, not 2024's September), and so it
        # does when the analysis runs at 15 minutes
        from models.profiles import analysis_index

        stamps = pd.date_range("2024-07-01", "2026-01-01", freq="h", tz="Europe/Berlin", inclusive="left")
        series = pd.Series(np.where(stamps.year == 2024, 999.0, 100.0), index=stamps)
        gap = (stamps >= pd.Timestamp("2025-09-08", tz="Europe/Berlin")) & (stamps < pd.Timestamp("2025-09-15", tz="Europe/Berlin"))
        series = series[~gap]
        hourly = analysis_index({"p": series}, "Europe/Berlin")
        assert hourly[0].year == 2025
        quarter = pd.date_range("2025-01-01", "2026-01-01", freq="15min", tz="Europe/Berlin", inclusive="left")
        for index, n_gap in ((hourly, 7 * 24), (quarter, 7 * 96)):
            values, filled = conform(series, index)
            on = pd.Series(values, index=index)["2025-09-08":"2025-09-14"]
            assert len(on) == n_gap and (on < 999.0).all() and (on > 100.0).all()
            assert filled == n_gap / len(index)
