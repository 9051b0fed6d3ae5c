"""Working in bounded blocks: chunked and unchunked runs agree, and the memory bounds hold.

Every expectation here is an invariant of our own design (docs/scale.md): no published number is
involved. Every model works element by element (the speed-coupling fixed point stops element by
element), so chunked and unchunked runs agree bit for bit.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_array_equal

from models import operation, scenario
from models.bill_savings import site_savings, site_setups
from models.case import load_case
from models.estimate import ESTIMATE_MARGIN
from models.exports import csv_bytes, run_tables
from models.operation import (CHUNK_ELEMENTS, SiteIntervalStore, asset_blocks, case_index, interval_bytes, operate,
                              operate_site, options_with_baseline, site_case, site_partition)

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))
from synthetic_fleet import write_fleet  # noqa: E402


@pytest.fixture(scope="module")
def fleet(tmp_path_factory):
    folder = write_fleet(tmp_path_factory.mktemp("fleet"), 14, n_sites=3, seed=7)
    case, problems = load_case(folder)
    assert case is not None, problems
    return case


@pytest.fixture(scope="module")
def whole(fleet):
    return operate(fleet)


@pytest.fixture(scope="module")
def whole_physics(fleet):
    return scenario.physics(fleet, 35.0)


class TestAssetBlocks:
    def test_blocks_cover_every_asset_once_within_the_size(self):
        blocks = asset_blocks(10, 8760, chunk_assets=4)
        assert [len(b) for b in blocks] == [4, 4, 2]
        assert np.array_equal(np.concatenate(blocks), np.arange(10))

    def test_default_block_holds_at_most_chunk_elements(self):
        for n_steps in (8760, 35040, 1):
            blocks = asset_blocks(100_000, n_steps)
            assert max(len(b) for b in blocks) * n_steps <= max(CHUNK_ELEMENTS, n_steps)

    def test_zero_chunk_raises(self):
        with pytest.raises(ValueError, match="chunk_assets"):
            asset_blocks(10, 8760, chunk_assets=0)


class TestSiteCase:
    def test_site_case_keeps_one_site_and_what_it_uses(self, fleet):
        site_id, rows = site_partition(fleet)[1]
        sub = site_case(fleet, site_id)
        assert list(sub.assets["asset_id"]) == list(fleet.assets["asset_id"].iloc[rows])
        assert list(sub.sites["site_id"]) == [site_id]
        assert set(sub.profiles) == set(sub.assets["profile_id"].dropna()) & set(fleet.profiles)
        assert set(sub.tariffs) == set(sub.sites["tariff_file"])

    def test_operate_site_refuses_two_sites(self, fleet):
        with pytest.raises(ValueError, match="one-site case"):
            operate_site(fleet, case_index(fleet))


class TestChunkedAgreesWithUnchunked:
    def test_operate(self, fleet, whole):
        chunked = operate(fleet, chunk_assets=3)
        for name in ("p_kw", "q_kvar", "energy_kwh", "shaft_energy_kwh", "losses_kwh", "mean_speed_rpm",
                     "lagging_kvarh", "leading_kvarh"):
            assert_array_equal(getattr(chunked, name), getattr(whole, name), err_msg=name)
        assert np.array_equal(chunked.applies, whole.applies)
        assert chunked.flags.equals(whole.flags)

    def test_blocks_never_exceed_the_chunk(self, fleet, monkeypatch):
        sizes = []
        real = operation._operate_block

        def spy(case, index, rows, *args, **kwargs):
            sizes.append(len(rows))
            return real(case, index, rows, *args, **kwargs)

        monkeypatch.setattr(operation, "_operate_block", spy)
        operate(fleet, chunk_assets=3)
        assert sizes and max(sizes) <= 3

    def test_bill_blocks_are_exact(self, fleet):
        # each scenario row of a bill is priced on its own: blocks of 3 give the very same savings
        index = case_index(fleet)
        site_id, _ = site_partition(fleet)[0]
        sub = site_case(fleet, site_id)
        op = operate_site(sub, index)
        setup = site_setups(sub, index)[site_id]
        args = (setup, index, op.interval_h, op.p_kw, op.q_kvar, op.applies, op.technologies, 35.0)
        one, blocks = site_savings(*args), site_savings(*args, block_scenarios=3)
        for name in one:
            assert np.array_equal(one[name], blocks[name], equal_nan=True), name

    def test_physics(self, fleet, whole_physics):
        chunked = scenario.physics(fleet, 35.0, chunk_assets=3)
        assert_array_equal(chunked.savings.saving, whole_physics.savings.saving)
        assert_array_equal(chunked.savings.reactive_saving, whole_physics.savings.reactive_saving)


class TestCompactIntervalStore:
    def test_store_holds_today_only_and_gives_the_dense_values(self, fleet):
        dense = operate(fleet, chunk_assets=2)
        compact = operate(fleet, chunk_assets=2, dense=False)
        n_o, n_a, n_t = dense.p_kw.shape
        assert isinstance(compact.p_kw, SiteIntervalStore) and compact.p_kw.shape == (n_o, n_a, n_t)
        assert compact.p_kw.nbytes == n_a * n_t * 8  # today's motors only, float64
        rng = np.random.default_rng(3)
        choice, rows = rng.integers(0, n_o, n_a), np.arange(n_a)
        assert np.array_equal(compact.p_kw[choice, rows], dense.p_kw[choice, rows])
        assert np.array_equal(compact.q_kvar[choice, rows], dense.q_kvar[choice, rows])
        assert np.array_equal(compact.p_kw[:, 4], dense.p_kw[:, 4])
        assert np.array_equal(compact.q_kvar[2, 3:9, 10:20], dense.q_kvar[2, 3:9, 10:20])
        assert np.array_equal(np.asarray(compact.p_kw), dense.p_kw)

    def test_store_refuses_ellipsis(self, whole_physics):
        store = SiteIntervalStore(whole_physics.operation.p_kw[0], 2, None, "p_kw")
        with pytest.raises(IndexError):
            store[..., 0]

    def test_dense_is_chosen_only_within_the_budget(self, fleet, whole):
        n_o = len(whole.option_ids)
        assert interval_bytes(len(fleet.assets), n_o, 8760) <= operation.DENSE_INTERVAL_BUDGET_BYTES
        assert isinstance(whole.p_kw, np.ndarray)
        # 10,000 assets x 11 options x 8,760 steps: 15.4 GB of float64, far above the budget
        assert interval_bytes(10_000, 11, 8760) > operation.DENSE_INTERVAL_BUDGET_BYTES

    def test_run_tables_identical_with_the_compact_store(self, fleet, whole_physics):
        dense = scenario.economics(fleet, whole_physics, fleet.finance, with_risk=False)
        compact = scenario.economics(fleet, scenario.physics(fleet, 35.0, dense=False), fleet.finance, with_risk=False)
        a, b = run_tables(dense), run_tables(compact)
        for name in a:
            assert csv_bytes(a[name]) == csv_bytes(b[name]), name


class TestSiteThreads:
    """Sites worked in threads write disjoint rows and are gathered in register order: the same physics."""

    @pytest.mark.parametrize("threads, chunk_assets", [(2, None), (3, 2)])
    def test_threads_give_the_single_thread_physics_bit_for_bit(self, fleet, threads, chunk_assets):
        one = scenario.physics(fleet, 35.0, threads=1, chunk_assets=chunk_assets)
        many = scenario.physics(fleet, 35.0, threads=threads, chunk_assets=chunk_assets)
        a, b = one.operation, many.operation
        for name in ("p_kw", "q_kvar", "energy_kwh", "losses_kwh", "lagging_kvarh", "mean_speed_rpm"):
            assert np.array_equal(np.asarray(getattr(a, name)), np.asarray(getattr(b, name)), equal_nan=True), name
        assert np.array_equal(one.savings.saving, many.savings.saving)
        assert a.flags.equals(b.flags)
        pd.testing.assert_frame_equal(one.savings.baseline_bills, many.savings.baseline_bills)

    def test_stage_times_add_up_to_the_wall_time_with_threads(self, fleet):
        import time

        timer = {}
        t0 = time.perf_counter()
        scenario.physics(fleet, 35.0, threads=2, timer=timer)
        wall = time.perf_counter() - t0
        assert set(timer) == {"machines", "site bills"} and 0 < sum(timer.values()) <= wall


class TestEstimate:
    def test_estimate_follows_the_memory_model(self, fleet, whole):
        from models.estimate import BASE_BYTES, estimate_run

        est = estimate_run(fleet)
        n_o, n_a, n_t = whole.p_kw.shape
        # the dense store of this small fleet is part of the peak (docs/scale.md, memory model)
        assert est.peak_bytes > BASE_BYTES + interval_bytes(n_a, n_o, n_t)
        assert est.seconds > 0 and "every option's per-interval power" in est.note
        # a local Dask cluster of two workers runs the physics slower than two local threads (DASK_WORKER_COST
        # 2.43 per worker, measured on the 2-core machine: docs/performance.md); more workers, up to one per
        # site, are faster
        n_sites = fleet.assets["site_id"].nunique()
        assert n_sites >= 3
        assert est.seconds < estimate_run(fleet, workers=2).seconds
        assert estimate_run(fleet, workers=n_sites).seconds < estimate_run(fleet, workers=2).seconds
        assert estimate_run(fleet, workers=n_sites + 5).seconds == estimate_run(fleet, workers=n_sites).seconds
        single = estimate_run(fleet, threads=1)
        double = estimate_run(fleet, threads=2)
        # two site threads: 1.7x the speed (THREAD_GAIN, measured) and two sites' blocks in memory
        assert double.seconds < single.seconds and double.peak_bytes >= single.peak_bytes

    def test_curve_books_are_counted_above_the_dense_budget(self, fleet, monkeypatch):
        # above the dense budget a run keeps the sites' curve books (BOOK_BYTES_PER_ASSET_STEP per
        # asset-step, at most KEPT_BOOKS_BUDGET_BYTES), the local engine's own and those Dask workers send back
        from models import estimate

        monkeypatch.setattr(operation, "DENSE_INTERVAL_BUDGET_BYTES", 0)
        local, dask = estimate.estimate_run(fleet, threads=1), estimate.estimate_run(fleet, workers=2)
        n_a, n_t = len(fleet.assets), len(case_index(fleet))
        books = estimate.BOOK_BYTES_PER_ASSET_STEP * n_a * n_t
        assert "compact table per motor" in local.note and "compact table per motor" in dask.note
        monkeypatch.setattr(operation, "KEPT_BOOKS_BUDGET_BYTES", 0)
        none = estimate.estimate_run(fleet, threads=1)
        assert "compact table per motor" not in none.note
        # without books the plan's rows are kept instead (at most today's power, one row per asset) and a block of
        # every option is recomputed where the plan reads a site (the largest site's assets here, fewer than a
        # block of CHUNK_ELEMENTS asset-steps holds: 59 on an hourly year), with its temporaries, in each of the
        # plan's bills' threads (one here)
        largest = int(fleet.assets["site_id"].value_counts().max())
        block = interval_bytes(largest, 11, n_t) + estimate.BLOCK_TEMP_BYTES_PER_ELEMENT * largest * n_t
        assert largest < 59 and len(options_with_baseline(fleet.options)) == 11
        assert books - interval_bytes(n_a, 1, n_t) - block - 2 <= local.peak_bytes - none.peak_bytes <= books + 2

    def test_todays_power_beyond_its_budget_is_counted_at_the_budget(self, fleet, monkeypatch):
        # above the dense budget the peak holds today's power; beyond TODAY_IN_MEMORY_BUDGET_BYTES it goes
        # to a temporary file (docs/scale.md, memory model): the peak counts the budget, the note the file
        from models import estimate

        monkeypatch.setattr(operation, "DENSE_INTERVAL_BUDGET_BYTES", 0)
        in_memory = estimate.estimate_run(fleet)
        monkeypatch.setattr(operation, "TODAY_IN_MEMORY_BUDGET_BYTES", 1024)
        spilled = estimate.estimate_run(fleet)
        n_a, n_t = len(fleet.assets), len(case_index(fleet))
        assert in_memory.peak_bytes - spilled.peak_bytes == interval_bytes(n_a, 1, n_t) - 1024
        assert "temporary file" in spilled.note and "temporary file" not in in_memory.note

    def test_dask_workers_on_this_machine_count_in_the_peak(self, fleet):
        # each worker of a local cluster holds its interpreter (WORKER_BASE_BYTES) and one site's physics, which
        # on this dense run includes the site's every-option power it sends back; a scheduler elsewhere keeps the
        # workers' memory off this machine's peak, and the note says each worker's need
        from models import estimate

        n_o, n_t = len(options_with_baseline(fleet.options)), len(case_index(fleet))
        largest = int(fleet.assets["site_id"].value_counts().max())
        here = estimate.estimate_run(fleet, workers=2)
        away = estimate.estimate_run(fleet, workers=2, workers_here=False)
        local = estimate.estimate_run(fleet, threads=1)
        least_per_worker = estimate.WORKER_BASE_BYTES + interval_bytes(largest, n_o, n_t)
        n_a = len(fleet.assets)
        assert here.peak_bytes >= estimate.BASE_BYTES + interval_bytes(n_a, n_o, n_t) + 2 * least_per_worker
        assert away.peak_bytes < estimate.BASE_BYTES + interval_bytes(n_a, n_o, n_t) + least_per_worker
        assert here.peak_bytes > local.peak_bytes > away.peak_bytes
        assert "2 Dask workers on this machine" in here.note and "each worker about" in here.note
        assert "peak on this machine (each worker about" in away.note

    def test_a_curve_block_is_counted_above_the_dense_budget(self, fleet, monkeypatch):
        # the physics of a run above the dense budget holds one curve block per thread: CURVE_BLOCK_BYTES_PER_ELEMENT
        # per asset-step of it; doubling that constant raises the physics' share of the peak by the block's bytes
        from models import estimate

        monkeypatch.setattr(operation, "DENSE_INTERVAL_BUDGET_BYTES", 0)
        monkeypatch.setattr(estimate, "ECONOMICS_BYTES_PER_PAIR", 0)  # (so that the physics is the larger part)
        # the fleet's largest site has fewer assets than a curve block holds on an hourly year (2**23 asset-steps
        # / 8,760 steps = 957 assets), so one block is the whole site: its assets x 8,760 steps
        n_t = len(case_index(fleet))
        largest = int(fleet.assets["site_id"].value_counts().max())
        assert n_t == 8760 and largest < 957
        block = largest * 8760
        one = estimate.estimate_run(fleet, threads=1)
        per_element = estimate.CURVE_BLOCK_BYTES_PER_ELEMENT
        monkeypatch.setattr(estimate, "CURVE_BLOCK_BYTES_PER_ELEMENT", 2 * per_element)
        two = estimate.estimate_run(fleet, threads=1)
        assert two.peak_bytes - one.peak_bytes == per_element * block

    def test_books_and_rows_not_kept_cost_their_measured_time(self):
        # the benchmark's fleet (10,000 assets x 11 options x 8,760 steps, 20 sites): its measured runs are the
        # expected values (docs/performance.md). Without books: the plan 24.6 s and its bills 1.8 s against 20.1
        # and 0.8 s with them ("2026-12-04, night": +5.5 s); with neither books nor rows kept: 43.6 and 3.3 s
        # ("2026-12-04: a run within a memory limit": +20.5 s more). The 1 GiB of rows kept by default holds every
        # row the plan reads (about 6,000 chosen assets' rows, 0.8 GiB)
        from dataclasses import replace

        from models import estimate

        size = estimate._RunSize(n_a=10_000, n_o=11, n_t=8760, n_sites=20, largest=534)
        b = operation.default_budgets()
        booked = estimate._estimate(size, 1, None, True, None, b).seconds
        unbooked = estimate._estimate(size, 1, None, True, None, replace(b, kept_books_bytes=0)).seconds
        unkept = estimate._estimate(size, 1, None, True, None, replace(b, kept_books_bytes=0, kept_rows_bytes=0)).seconds
        assert unbooked - booked == pytest.approx(24.6 + 1.8 - 20.1 - 0.8, rel=1e-9)
        assert unkept - unbooked == pytest.approx(43.6 + 3.3 - 24.6 - 1.8, rel=1e-9)

    def test_each_named_scenario_adds_the_economics_and_a_plan(self):
        # a named scenario runs the economics (4.3 s per 10,000 assets) and solves its own plan (the larger of
        # 14.7 s per 10,000 assets and 16.8 s per 1,000 of the first 1,000, docs/performance.md, plus each plan's own
        # 9.0 / 4 - 82 x 0.0168 = 0.8724 s from the demo's four plans; at most 130 s): three scenarios of a
        # 10,000-asset fleet add 3 x (4.3 + 16.8 + 0.8724) = 65.9172 s (hand calculation), and the note says they
        # are counted
        from dataclasses import replace

        from models import estimate

        size = estimate._RunSize(n_a=10_000, n_o=11, n_t=8760, n_sites=20, largest=534)
        alone = estimate._estimate(size, 1, 2, True, None, None)
        three = estimate._estimate(replace(size, n_scenarios=3), 1, 2, True, None, None)
        assert three.seconds - alone.seconds == pytest.approx(65.9172, rel=1e-9)
        assert "(the plans of its 3 named scenarios included)" in three.note and "scenario" not in alone.note

    def test_the_physics_time_is_the_benchmarks(self):
        # the benchmark fleet's machines and site bills took 8.9 and 6.3 s with two site threads (docs/performance.md,
        # "2026-12-04, night": a slow state of the host); as many assets with twice the options take that much more
        # (hand calculation: 8.9 + 6.3 = 15.2 s; nothing else of the estimate's time counts the options)
        from dataclasses import replace

        from models import estimate

        size = estimate._RunSize(n_a=10_000, n_o=11, n_t=8760, n_sites=20, largest=534, profile_intervals=400 * 8760)
        a = estimate._estimate(size, 1, 2, True, None, None)
        b = estimate._estimate(replace(size, n_o=22), 1, 2, True, None, None)
        assert b.seconds - a.seconds == pytest.approx(8.9 + 6.3, rel=1e-9)

    def test_a_profile_per_motor_is_counted_in_the_load_time_and_the_peak(self):
        # the benchmark's fleet with 400 shared hourly profiles loaded in 1.9 s, with a profile per motor at 15-minute
        # steps (350.4 million intervals) in 24.4 s, and with one per motor hourly (87.6 million) in 7.3 s
        # (docs/performance.md, "2026-12-04, after the last"); each interval held takes its value and its timestamp,
        # 8 bytes each
        from dataclasses import replace

        from models import estimate

        shared = estimate._RunSize(n_a=10_000, n_o=11, n_t=8760, n_sites=20, largest=534, profile_intervals=400 * 8760)
        metered = replace(shared, profile_intervals=10_000 * 35_040)
        hourly = replace(shared, profile_intervals=10_000 * 8760)
        a = estimate._estimate(shared, 1, None, True, None, None)
        b = estimate._estimate(metered, 1, None, True, None, None)
        c = estimate._estimate(hourly, 1, None, True, None, None)
        assert b.seconds - a.seconds == pytest.approx(24.4 - 1.9, rel=1e-9)
        assert c.seconds - a.seconds == pytest.approx(7.3 - 1.9, abs=0.1)  # (measured, not the fit's own points)
        assert b.peak_bytes - a.peak_bytes == 16 * (350.4e6 - 3.504e6)
        # the demo's 19 hourly profiles of one year (data/demo/profiles.parquet)
        demo, _ = load_case(Path(__file__).resolve().parents[1] / "data" / "demo")
        assert estimate._RunSize.of(demo).profile_intervals == 19 * 8760
        # held: 19 x 8,760 values of 8 bytes, and one timestamp index of 8,760 x 8 bytes that the 19 profiles on
        # one hourly grid share (hand calculation)
        assert estimate._RunSize.of(demo).profile_bytes == 19 * 8760 * 8 + 8760 * 8

    def test_estimate_refuses_no_workers(self, fleet):
        from models.estimate import estimate_run

        with pytest.raises(ValueError, match="workers"):
            estimate_run(fleet, workers=0)


class TestMemoryPlan:
    """Budgets fitted to a memory limit (models.estimate.budgets_within, memory_plan)."""

    def test_the_defaults_are_kept_when_they_fit(self, fleet):
        from models.estimate import budgets_within, estimate_run

        est = estimate_run(fleet)
        # a limit is kept with the estimate's margin of 15 % (ESTIMATE_MARGIN, from the measured spread of the
        # estimate: docs/performance.md)
        least = math.ceil(est.peak_bytes * ESTIMATE_MARGIN)
        plan = budgets_within(fleet, least)
        assert plan.fits and plan.given_up == () and plan.note == "" and plan.least_limit_bytes == least
        assert budgets_within(fleet, least - 1).given_up != ()
        assert plan.budgets == operation.default_budgets() and plan.estimate == est

    def test_a_fleet_kept_in_full_first_gives_up_every_options_power(self, fleet):
        # this small fleet's every-option power fits the dense budget: a limit just below what its peak needs
        # with the margin gives it up (its rows are then recomputed where read, the same numbers)
        from models.estimate import budgets_within, estimate_run

        limit = int(estimate_run(fleet).peak_bytes * ESTIMATE_MARGIN)  # just below what the defaults need with the margin
        plan = budgets_within(fleet, limit)
        assert plan.fits and plan.estimate.peak_bytes * ESTIMATE_MARGIN <= limit
        assert plan.budgets.dense_bytes == 0 and plan.given_up[0] == "every option's per-interval power"
        assert "The numbers are the same" in plan.note

    def test_books_are_given_up_before_the_plans_rows_and_only_as_far_as_needed(self):
        # the benchmark's fleet (10,000 assets x 11 options x 8,760 steps on 20 sites, the largest of 600 assets),
        # estimated at 5.8 GiB with the defaults: within 5 GiB its books go (their sites are recomputed where the
        # plan reads them) and the plan's rows kept in their place are cut to what fits
        from dataclasses import replace

        from models import estimate

        size = estimate._RunSize(n_a=10_000, n_o=11, n_t=8760, n_sites=20, largest=600)
        limit = int(5 * 2**30 * ESTIMATE_MARGIN)  # an estimated peak of 5 GiB with the margin
        plan = estimate._budgets_within(size, limit, 1, None, True, None)
        b = plan.budgets
        assert plan.fits and plan.estimate.peak_bytes <= 5 * 2**30
        assert b.dense_bytes == operation.DENSE_INTERVAL_BUDGET_BYTES  # (this fleet is not kept in full anyway)
        assert b.kept_books_bytes == 0 and 0 < b.kept_rows_bytes < operation.KEPT_ROWS_BUDGET_BYTES
        assert b.curve_chunk_elements == operation.CURVE_CHUNK_ELEMENTS
        assert [g.split(" (")[0] for g in plan.given_up] == ["the sites' curve books", "plan rows kept"]
        # the largest that fits: 1 MiB more of rows would not
        more = replace(b, kept_rows_bytes=b.kept_rows_bytes + 2**20)
        assert estimate._estimate(size, 1, None, True, None, more).peak_bytes > 5 * 2**30
        assert "The numbers are the same" in plan.note
        # books are given up whole (a site is read through its books only when all of them are kept): a limit just
        # below the defaults' need drops every book, and the rows kept are then left alone if that is enough
        full = estimate._estimate(size, 1, None, True, None, operation.default_budgets()).peak_bytes
        just_below = estimate._budgets_within(size, int(full * ESTIMATE_MARGIN) - 2**20, 1, None, True, None)
        assert just_below.budgets.kept_books_bytes == 0 and just_below.given_up == ("the sites' curve books",)

    def test_a_limit_below_the_least_run_keeps_the_least_and_says_so(self, fleet):
        from dataclasses import replace

        from models import estimate
        from models.estimate import budgets_within

        plan = budgets_within(fleet, 1)
        b = plan.budgets
        assert not plan.fits and plan.estimate.peak_bytes > 1
        assert b.dense_bytes == 0 and b.curve_chunk_elements == operation.CURVE_CHUNK_ELEMENTS  # (not a budget fitted)
        # each budget is brought to its least, or left alone where giving it up would not lower the peak (on this
        # small fleet one site's physics per thread sets it, and the books cost less than the block of every
        # option recomputed without them)
        size = estimate._RunSize.of(fleet)
        for name, least in (("kept_books_bytes", 0), ("kept_rows_bytes", 0)):
            at_least = estimate._estimate(size, 1, None, True, None, replace(b, **{name: least}))
            assert getattr(b, name) == least or at_least.peak_bytes >= plan.estimate.peak_bytes, name
        assert "needs at least about" in plan.note
        with pytest.raises(ValueError, match="limit"):
            budgets_within(fleet, 0)

    def test_the_machines_free_memory_sets_the_limit_only_when_the_run_would_not_fit(self, fleet):
        from models.estimate import AVAILABLE_SHARE, estimate_run, memory_plan

        peak = estimate_run(fleet).peak_bytes
        roomy = memory_plan(fleet, free_bytes=10 * peak)
        assert roomy.limit_bytes is None and roomy.given_up == () and roomy.note == ""
        # 80 % of the free memory (AVAILABLE_SHARE, common practice) is below the peak with its margin: fitted; the
        # same with just enough room for it: the defaults
        tight = memory_plan(fleet, free_bytes=peak)
        assert tight.limit_bytes == int(AVAILABLE_SHARE * peak) and tight.given_up
        assert "this machine has free" in tight.note
        enough = memory_plan(fleet, free_bytes=math.ceil(math.ceil(peak * ESTIMATE_MARGIN) / AVAILABLE_SHARE) + 1)
        assert enough.limit_bytes is None and enough.given_up == ()
        asked = memory_plan(fleet, max_bytes=peak, free_bytes=10 * peak)  # below the defaults' need with the margin
        assert asked.limit_bytes == peak and "(as asked)" in asked.note
