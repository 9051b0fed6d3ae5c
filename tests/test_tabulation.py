"""Machine curves tabulated per asset: the grid, the interpolation, and the machines run on it.

Expected numbers: hand calculations in docs/derivations/tabulated-machine-curves.md (cases T1, T2).
The machine-level tests compare the tabulated run with the reference run that evaluates every interval
(``models.operation.TABULATE = False``): an invariant of our own design, the tolerance being the one the
run promises (``TABLE_TOLERANCE_FRAC`` of each asset's rated input power).
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose, assert_array_equal

from models import operation, tabulation
from models.case import load_case
from models.operation import case_index, operate_site, site_case, site_partition

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))
from synthetic_fleet import write_fleet  # noqa: E402


def _random_loads(seed: int, n_rows: int, n_steps: int):
    """(generator, loads [kW], running) of random rows: a fifth of the intervals stopped, the first row
    never running or constant."""
    rng = np.random.default_rng(seed)
    p = rng.uniform(0.0, 1e3, (n_rows, n_steps)) ** rng.uniform(0.5, 3.0)
    p[rng.random(p.shape) < 0.2] = 0.0
    p[0, :] = 0.0 if seed % 3 == 0 else p[0, 0]
    return rng, p, p > 0


class TestGrid:
    def test_two_nodes_between_one_and_eight_kw(self):
        # hand calculation T1: nodes at u = 1, 2 (p = 1, 8), midpoint u = 1.5 (p = 3.375)
        p = np.array([[1.0, 8.0, 3.375]])
        g = tabulation.locate(p, p > 0, 0.25, 2)
        assert_allclose(g.p_grid_kw, [[1.0, 3.375, 8.0]], rtol=1e-15)
        assert g.cell.tolist() == [[0, 0, 0]]
        assert_allclose(g.position_frac, [[0.0, 1.0, 0.5]], rtol=1e-15)

    def test_interpolating_the_load_itself(self):
        # hand calculation T1: b_0 = 1, r_0 = 7; values 1, 8, 4.5; midpoint error 1.125 kW
        p = np.array([[1.0, 8.0, 3.375]])
        g = tabulation.locate(p, p > 0, 0.25, 2)
        base, rise = tabulation.tables(g.p_grid_kw)
        assert_allclose(tabulation.interpolate(g, base, rise), [[1.0, 8.0, 4.5]], rtol=1e-15)
        assert_allclose(tabulation.midpoint_error(g.p_grid_kw), [1.125], rtol=1e-15)

    def test_a_curve_linear_in_the_grid_variable_is_exact(self):
        # hand calculation T1: f = p^(1/3) gives 1.5 at p = 3.375 and no midpoint error
        p = np.array([[1.0, 8.0, 3.375]])
        g = tabulation.locate(p, p > 0, 0.25, 2)
        f = np.cbrt(g.p_grid_kw)
        base, rise = tabulation.tables(f)
        assert_allclose(tabulation.interpolate(g, base, rise), [[1.0, 2.0, 1.5]], rtol=1e-15)
        assert_allclose(tabulation.midpoint_error(f), [0.0], atol=1e-15)

    def test_yearly_sum_from_the_cells(self):
        # hand calculation T1: 0.25 h x (1 + 8 + 4.5) = 3.375 kWh; H_0 = 0.75 h, M_0 = 0.375 h
        p = np.array([[1.0, 8.0, 3.375]])
        g = tabulation.locate(p, p > 0, 0.25, 2)
        assert_allclose(g.hours_h[:, 0], [0.75], rtol=1e-15)
        assert_allclose(g.moment_h[:, 0], [0.375], rtol=1e-15)
        base, rise = tabulation.tables(g.p_grid_kw)
        assert_allclose(tabulation.weighted_sums(g, base, rise), [3.375], rtol=1e-15)

    def test_stopped_interval_and_constant_load(self):
        # hand calculation T2: values 0, 5, 5, 5; H = 3 h at node 0, none elsewhere
        p = np.array([[0.0, 5.0, 5.0, 5.0]])
        g = tabulation.locate(p, p > 0, 1.0, 3)
        base, rise = tabulation.tables(g.p_grid_kw)
        assert_allclose(tabulation.interpolate(g, base, rise), [[0.0, 5.0, 5.0, 5.0]], rtol=1e-14)
        assert_allclose(g.hours_h, [[3.0, 0.0, 0.0]])
        assert g.cell[0, 0] == 2  # the zero cell

    def test_an_asset_that_never_runs_gives_zeros(self):
        p = np.zeros((2, 5))
        p[1] = [1.0, 2.0, 3.0, 0.0, 4.0]
        g = tabulation.locate(p, p > 0, 1.0, 4)
        base, rise = tabulation.tables(g.p_grid_kw * 2.0)
        out = tabulation.interpolate(g, base, rise)
        assert_array_equal(out[0], 0.0)
        assert out[1, 3] == 0.0

    def test_rows_of_the_grid_give_the_same_values_as_the_whole(self):
        rng = np.random.default_rng(3)
        p = rng.uniform(0.0, 50.0, (5, 40))
        p[p < 5.0] = 0.0
        g = tabulation.locate(p, p > 0, 1.0, 9)
        f = g.p_grid_kw ** 2
        base, rise = tabulation.tables(f)
        whole = tabulation.interpolate(g, base, rise)
        rows = np.array([1, 3, 4])
        part = tabulation.interpolate(g, base[rows], rise[rows], rows=rows)
        assert_array_equal(part, whole[rows])
        assert_array_equal(tabulation.weighted_sums(g, base[rows], rise[rows], rows=rows),
                           tabulation.weighted_sums(g, base, rise)[rows])

    def test_a_pair_written_into_chosen_rows(self):
        # kW and kVAr of grid rows 1, 3, 4 written into rows 5, 0, 2 of larger arrays: the same values as
        # each quantity interpolated alone, the other rows untouched, the kVAr parts summed per row
        rng = np.random.default_rng(4)
        p = rng.uniform(0.0, 50.0, (5, 40))
        p[p < 5.0] = 0.0
        g = tabulation.locate(p, p > 0, 1.0, 9)
        kw, kvar = tabulation.tables(g.p_grid_kw * 1.1), tabulation.tables(g.p_grid_kw - 20.0)
        rows, out_rows = np.array([1, 3, 4]), np.array([5, 0, 2])
        out_a, out_b = np.full((6, 40), -7.0), np.full((6, 40), -7.0)
        pair = tabulation.interpolate_pair(g, kw[0][rows], kw[1][rows], kvar[0][rows], kvar[1][rows],
                                           out_a=out_a, out_b=out_b, rows=rows, out_rows=out_rows)
        assert pair.a is out_a and pair.b is out_b
        assert_array_equal(out_a[out_rows], tabulation.interpolate(g, *kw)[rows])
        alone_b = tabulation.interpolate(g, *kvar)[rows]
        assert_array_equal(out_b[out_rows], alone_b)
        assert (out_a[[1, 3, 4]] == -7.0).all() and (out_b[[1, 3, 4]] == -7.0).all()
        assert_allclose(pair.b_positive_sum, np.maximum(alone_b, 0).sum(axis=1), rtol=1e-12)
        assert_allclose(pair.b_negative_sum, np.maximum(-alone_b, 0).sum(axis=1), rtol=1e-12)

    @settings(max_examples=60, deadline=None)
    @given(st.integers(0, 2**32 - 1), st.integers(2, 300), st.integers(1, 4), st.integers(1, 50))
    def test_placing_is_the_numpy_rule(self, seed, n_nodes, n_rows, n_steps):
        # the compiled pass against the rule written out in numpy (an invariant of our own design), rows that
        # never run and constant rows included; its cube root is within 4 units in the last place of
        # numpy.cbrt's (test_cube_root_row), so an interval's coordinate x = cell + position agrees to
        # 1e-9 and its cell wherever x is not within that of a cell boundary
        rng, p, running = _random_loads(seed, n_rows, n_steps)
        g = tabulation.locate(p, running, 0.5, n_nodes)
        u = np.cbrt(p)
        u_lo = np.where(running, u, np.inf).min(axis=1)
        u_hi = np.where(running, u, -np.inf).max(axis=1)
        none = ~np.isfinite(u_lo)
        u_lo, u_hi = np.where(none, 0.0, u_lo), np.where(none, 0.0, u_hi)
        step = (u_hi - u_lo) / (n_nodes - 1)
        safe = np.where(step > 0, step, 1.0)
        x = np.clip((u - u_lo[:, None]) / safe[:, None], 0.0, n_nodes - 1)
        j = np.minimum(x.astype(int), n_nodes - 2)
        assert_array_equal(g.cell[~running], n_nodes - 1)
        assert_array_equal(g.position_frac[~running], 0.0)
        assert_allclose((g.cell + g.position_frac)[running], x[running], rtol=0, atol=1e-9)
        clear = running & (np.abs(x - np.round(x)) > 1e-9)
        assert_array_equal(g.cell[clear], j[clear])
        g_exact = tabulation.locate(p, running, 0.5, n_nodes)  # the same loads placed again: the same bits
        assert_array_equal(g_exact.cell, g.cell)
        assert_array_equal(g_exact.position_frac, g.position_frac)
        u_lo, u_hi = np.cbrt(g.p_grid_kw[:, 0]), np.cbrt(g.p_grid_kw[:, -1])
        step = (u_hi - u_lo) / (n_nodes - 1)
        cols = np.arange(2 * n_nodes - 1) / 2.0
        u_grid = u_lo[:, None] + cols[None, :] * step[:, None]
        u_grid[:, -1] = u_hi
        assert_allclose(g.p_grid_kw, u_grid ** 3, rtol=1e-12)
        assert_array_equal(g.position_finite, np.ones(n_rows, dtype=bool))
        cells = g.cell.astype(int)
        for i in range(n_rows):
            hours = np.bincount(cells[i], minlength=n_nodes) * 0.5
            hours[-1] = 0.0
            assert_array_equal(g.hours_h[i], hours)
            moment = np.bincount(cells[i], weights=np.where(running[i], g.position_frac[i], 0.0), minlength=n_nodes) * 0.5
            assert_allclose(g.moment_h[i, :-1], moment[:-1], rtol=1e-13, atol=1e-13)

    def test_cube_root_row(self):
        # numpy.cbrt as reference (exact to the last place): within 4 units in the last place over 600
        # decades of positive loads, and numpy.cbrt's own value for zero, negative, subnormal, huge and
        # non-finite values
        rng = np.random.default_rng(7)
        p = 10.0 ** rng.uniform(-299, 299, 200_000)
        p = np.concatenate([p, [0.0, -0.0, -8.0, 5e-310, 1e-300, 1e300, 1.7e308, np.inf, -np.inf, np.nan, 1.0, 8.0,
                                3.375, 27.0, 1e-3]])
        out = np.empty_like(p)
        tabulation.cube_root_row(p, out)
        expected = np.cbrt(p)
        finite = np.isfinite(expected)
        assert np.abs(out[finite].view(np.int64) - expected[finite].view(np.int64)).max() <= 4
        assert_array_equal(np.isnan(out), np.isnan(expected))
        assert_array_equal(out[~finite & ~np.isnan(expected)], expected[~finite & ~np.isnan(expected)])
        assert_allclose(out[-5:], [1.0, 2.0, 1.5, 3.0, 0.1], rtol=1e-15)  # hand calculation: exact cubes

    @settings(max_examples=60, deadline=None)
    @given(st.integers(0, 2**32 - 1), st.integers(1, 5), st.integers(1, 70), st.booleans())
    def test_tables_and_midpoint_errors_are_the_numpy_rule_bit_for_bit(self, seed, n_rows, n_cols, with_nan):
        # compiled passes against the rule written out in numpy (an invariant of our own design); a row
        # broadcast from one value per asset, and NaN (which must fail the row, as numpy's max does)
        rng = np.random.default_rng(seed)
        values = rng.normal(0.0, 100.0, (n_rows, 2 * n_cols - 1))
        if with_nan:
            values[rng.integers(n_rows), rng.integers(values.shape[1])] = np.nan
        for v in (values, np.broadcast_to(values[:, :1], values.shape)):
            nodes = v[:, 0::2]
            base, rise = tabulation.tables(v)
            assert_array_equal(base[:, :-1], nodes[:, :-1])
            assert_array_equal(rise[:, :-1], nodes[:, 1:] - nodes[:, :-1])
            assert_array_equal(base[:, -1], 0.0)
            assert_array_equal(rise[:, -1], 0.0)
            expected = (np.abs(v[:, 1::2] - 0.5 * (nodes[:, :-1] + nodes[:, 1:])).max(axis=1) if n_cols > 1
                        else np.zeros(n_rows))
            assert_array_equal(tabulation.midpoint_error(v), expected)

    def test_an_infinite_load_marks_its_row_not_finite(self):
        # the row is flagged (so the bills read it the careful way) and its interval reads NaN, never
        # another cell's value; the other row is untouched
        p = np.array([[1.0, np.inf, 8.0], [1.0, 2.0, 8.0]])
        g = tabulation.locate(p, p > 0, 1.0, 3)
        assert g.position_finite.tolist() == [False, True]
        assert g.cell[0, 1] == 2 and np.isnan(g.position_frac[0, 1])
        base, rise = tabulation.tables(g.p_grid_kw)
        assert np.isnan(tabulation.interpolate(g, base, rise)[0, 1])
        assert_array_equal(g.p_grid_kw[1], tabulation.locate(p[1:], p[1:] > 0, 1.0, 3).p_grid_kw[0])
        # a row whose every running load is infinite is flagged too
        g = tabulation.locate(np.array([[0.0, np.inf]]), np.array([[False, True]]), 1.0, 3)
        assert g.position_finite.tolist() == [False] and np.isnan(g.position_frac[0, 1])

    def test_one_node_is_refused(self):
        with pytest.raises(ValueError, match="two nodes"):
            tabulation.locate(np.ones((1, 3)), np.ones((1, 3), bool), 1.0, 1)

    @settings(max_examples=60, deadline=None)
    @given(st.lists(st.floats(0.0, 1e4, allow_nan=False), min_size=1, max_size=60), st.integers(2, 40))
    def test_nodes_are_exact_and_error_within_the_midpoint_bound(self, loads, n_nodes):
        # the interpolation passes through the nodes, and its error anywhere stays within twice the largest
        # midpoint error (docs/derivations/tabulated-machine-curves.md: for f = u^3 on a cell [a, a + h],
        # the error (x - a)(a + h - x)(x + 2a + h) peaks at most 4/3 of its midpoint value)
        p = np.array([loads])
        g = tabulation.locate(p, p > 0, 1.0, n_nodes)
        base, rise = tabulation.tables(g.p_grid_kw)
        out = tabulation.interpolate(g, base, rise)
        err = np.abs(out - np.where(p > 0, p, 0.0)).max()
        bound = 2.0 * tabulation.midpoint_error(g.p_grid_kw).max()
        assert err <= bound + 1e-9 * max(1.0, p.max())
        nodes = g.p_grid_kw[:, 0::2]
        assert_allclose(tabulation.interpolate(tabulation.locate(nodes, nodes > 0, 1.0, n_nodes), base, rise),
                        np.where(nodes > 0, nodes, 0.0), rtol=1e-12, atol=1e-9)


# ---------------------------------------------------------------------------------------------------
# The machines on their grids
# ---------------------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def fleet(tmp_path_factory):
    folder = write_fleet(tmp_path_factory.mktemp("tabfleet"), 40, n_sites=2, seed=11)
    case, problems = load_case(folder)
    assert case is not None, problems
    return case


def _both(case, site_id, monkeypatch, **settings_):
    index = case_index(case)
    one = site_case(case, site_id)
    monkeypatch.setattr(operation, "TABULATE", False)
    exact = operate_site(one, index)
    monkeypatch.setattr(operation, "TABULATE", True)
    for name, value in settings_.items():
        monkeypatch.setattr(operation, name, value)
    return one, exact, operate_site(one, index)


def _assert_within_tolerance(one, exact, tab, tol_frac):
    a = one.assets
    rated_in = (a["rated_p_kw"] / (a["rated_efficiency_pct"] / 100.0)).to_numpy()
    scale = tol_frac * rated_in[None, :, None]
    assert (np.abs(tab.p_kw - exact.p_kw) <= scale).all()
    assert (np.abs(tab.q_kvar - exact.q_kvar) <= scale).all()
    hours = len(exact.index) * exact.interval_h
    for name in ("energy_kwh", "shaft_energy_kwh", "lagging_kvarh", "leading_kvarh"):
        assert (np.abs(getattr(tab, name) - getattr(exact, name)) <= tol_frac * rated_in[:, None] * hours).all(), name
    assert (np.abs(tab.losses_kwh - exact.losses_kwh) <= tol_frac * rated_in[:, None, None] * hours).all()
    sync = a["sync_speed_rpm"].to_numpy()[:, None]
    assert (np.abs(tab.mean_speed_rpm - exact.mean_speed_rpm) <= tol_frac * sync).all()
    assert_array_equal(tab.running_h, exact.running_h)
    assert_array_equal(tab.applies, exact.applies)
    assert sorted(map(tuple, tab.flags.to_numpy().tolist())) == sorted(map(tuple, exact.flags.to_numpy().tolist()))


class TestTabulatedMachines:
    def test_synthetic_sites_within_the_promised_tolerance(self, fleet, monkeypatch):
        for site_id, _ in site_partition(fleet):
            one, exact, tab = _both(fleet, site_id, monkeypatch)
            _assert_within_tolerance(one, exact, tab, operation.TABLE_TOLERANCE_FRAC)

    def test_demo_sites_within_the_promised_tolerance(self, demo_case, monkeypatch):
        assert len(case_index(demo_case)) >= operation.TABLE_MIN_STEPS  # the demo is tabulated
        for site_id, _ in site_partition(demo_case):
            one, exact, tab = _both(demo_case, site_id, monkeypatch)
            _assert_within_tolerance(one, exact, tab, operation.TABLE_TOLERANCE_FRAC)

    def test_the_tabulated_run_differs_from_the_reference(self, fleet, monkeypatch):
        # the switch really changes the path (a test that could not fail otherwise)
        site_id = site_partition(fleet)[0][0]
        _, exact, tab = _both(fleet, site_id, monkeypatch)
        assert not np.array_equal(tab.p_kw, exact.p_kw)

    def test_no_row_within_tolerance_gives_the_reference_bit_for_bit(self, fleet, monkeypatch):
        site_id = site_partition(fleet)[0][0]
        _, exact, tab = _both(fleet, site_id, monkeypatch, TABLE_TOLERANCE_FRAC=-1.0)
        for name in ("p_kw", "q_kvar", "energy_kwh", "losses_kwh", "lagging_kvarh", "leading_kvarh", "mean_speed_rpm"):
            assert_array_equal(getattr(tab, name), getattr(exact, name), err_msg=name)

    def test_rows_over_tolerance_fall_back_while_the_others_are_tabulated(self, fleet, monkeypatch):
        # a tolerance between the rows' errors: some rows of each option are tabulated, the rest exact
        site_id = site_partition(fleet)[0][0]
        seen = []
        holds = operation._tabulation_holds

        def spy(pt, arr):
            ok = holds(pt, arr)
            seen.append((ok.sum(), ok.size))
            return ok

        monkeypatch.setattr(operation, "_tabulation_holds", spy)
        one, exact, tab = _both(fleet, site_id, monkeypatch, TABLE_NODES=17, TABLE_TOLERANCE_FRAC=3e-4)
        passed = sum(s for s, _ in seen)
        total = sum(n for _, n in seen)
        assert 0 < passed < total
        _assert_within_tolerance(one, exact, tab, 3e-4)

    def test_a_finer_grid_takes_rows_the_first_one_could_not(self, fleet, monkeypatch):
        # rows failing on the 129-node grid are tried on the 513-node one: some pass there (a drive's
        # minimum speed is a kink, whose error falls with the cell width), all within the tolerance
        seen = {"first": [0, 0], "finer": [0, 0]}
        holds = operation._tabulation_holds

        def spy(pt, arr):
            ok = holds(pt, arr)
            level = "finer" if pt.p_kw.shape[1] == 2 * operation.FINE_TABLE_NODES - 1 else "first"
            seen[level][0] += int(ok.sum())
            seen[level][1] += ok.size
            return ok

        monkeypatch.setattr(operation, "_tabulation_holds", spy)
        for site_id, _ in site_partition(fleet):
            one, exact, tab = _both(fleet, site_id, monkeypatch)
            _assert_within_tolerance(one, exact, tab, operation.TABLE_TOLERANCE_FRAC)
        assert seen["first"][0] < seen["first"][1] == seen["first"][0] + seen["finer"][1]
        assert 0 < seen["finer"][0]

    def test_rows_failing_the_finer_grid_are_evaluated_only_in_their_failing_cells(self, fleet, monkeypatch):
        # a row still failing on the 513-node grid fails there in a cell or two (a kink: a drive's minimum
        # speed, zero or full flow); its intervals in those cells are evaluated one by one, the others read
        # from the grid, all within the tolerance; only the wound-field machines (which follow the site
        # interval by interval) are still evaluated over every interval of a year
        cells, widths = [], []
        hold, evaluate = operation._cells_hold, operation._evaluate

        def spy_cells(pt, arr):
            ok = hold(pt, arr)
            cells.append((int(ok.sum()), ok.size))
            return ok

        def spy_evaluate(option, arr, existing, load, site_other=None):
            if operation.TABULATE:  # (not the reference run)
                widths.append((option["technology"], load.p_ref_kw.shape[1]))
            return evaluate(option, arr, existing, load, site_other)

        monkeypatch.setattr(operation, "_cells_hold", spy_cells)
        monkeypatch.setattr(operation, "_evaluate", spy_evaluate)
        for site_id, _ in site_partition(fleet):
            one, exact, tab = _both(fleet, site_id, monkeypatch)
            _assert_within_tolerance(one, exact, tab, operation.TABLE_TOLERANCE_FRAC)
        assert cells and all(0 < good < size for good, size in cells)
        n_steps = len(case_index(fleet))
        assert {tech for tech, width in widths if width == n_steps} <= {"wound_field"}, widths
        assert any(width == 1 for _, width in widths)  # intervals in failing cells, each on its own

    def test_short_profiles_are_not_tabulated(self, fleet, monkeypatch):
        site_id = site_partition(fleet)[0][0]
        _, exact, tab = _both(fleet, site_id, monkeypatch, TABLE_MIN_STEPS=10**6)
        assert_array_equal(tab.p_kw, exact.p_kw)


# ---------------------------------------------------------------------------------------------------
# Lagging and leading sums by cell, and pairs read through a curve book
# ---------------------------------------------------------------------------------------------------
def _t3_grid():
    # docs/derivations/tabulated-machine-curves.md, case T3: x = 0, 1, 1, 0.5 in one cell, 0.5 h intervals
    p = np.array([[1.0, 8.0, 8.0, 3.375]])
    return tabulation.locate(p, p > 0, 0.5, 2)


class TestSignedSums:
    def test_a_cell_that_stays_lagging_by_hand(self):
        # hand calculation T3 (a): 4.5 kVArh lagging, none leading
        up, down = tabulation.signed_sums(_t3_grid(), *tabulation.tables(np.array([[1.0, 2.0, 3.0]])), 0.5)
        assert_allclose(up, [4.5], rtol=1e-15)
        assert_array_equal(down, [0.0])

    def test_a_cell_that_changes_sign_by_hand(self):
        # hand calculation T3 (b): 4.5 kVArh lagging, 1.0 leading
        up, down = tabulation.signed_sums(_t3_grid(), *tabulation.tables(np.array([[-2.0, 1.0, 4.0]])), 0.5)
        assert_allclose(up, [4.5], rtol=1e-15)
        assert_allclose(down, [1.0], rtol=1e-15)

    @settings(max_examples=60, deadline=None)
    @given(st.integers(0, 2**32 - 1), st.integers(2, 40), st.floats(0.1, 2.0))
    def test_equal_to_the_per_interval_sums(self, seed, n_nodes, interval_h):
        # against the numpy rule on the interpolated values: h x sum max(v, 0) and h x sum max(-v, 0) per
        # row, for rows with lagging, leading and mixed cells, stopped intervals and chosen rows
        rng = np.random.default_rng(seed)
        p = rng.uniform(0.0, 100.0, (6, 50))
        p[p < 15.0] = 0.0
        g = tabulation.locate(p, p > 0, interval_h, n_nodes)
        values = rng.normal(size=g.p_grid_kw.shape) + rng.choice([-3.0, 0.0, 3.0], size=(6, 1))
        base, rise = tabulation.tables(values)
        v = tabulation.interpolate(g, base, rise)
        rows = np.array([4, 0, 5, 2])
        up, down = tabulation.signed_sums(g, base[rows], rise[rows], interval_h, rows=rows)
        assert_allclose(up, interval_h * np.maximum(v[rows], 0.0).sum(axis=1), rtol=1e-12, atol=1e-12)
        assert_allclose(down, interval_h * np.maximum(-v[rows], 0.0).sum(axis=1), rtol=1e-12, atol=1e-12)

    def test_a_nan_value_adds_to_neither_sum(self):
        # as the per-interval rule: NaN > 0 and NaN < 0 are both false
        up, down = tabulation.signed_sums(_t3_grid(), *tabulation.tables(np.array([[np.nan, 0.0, 3.0]])), 0.5)
        assert_array_equal(up, [0.0])
        assert_array_equal(down, [0.0])


class TestCurveBook:
    @staticmethod
    def _grids():
        rng = np.random.default_rng(8)
        p = rng.uniform(0.0, 60.0, (5, 30))
        p[p < 6.0] = 0.0
        coarse = tabulation.locate(p, p > 0, 1.0, 9)  # uint8 cells
        fine = tabulation.locate(p[[1, 3]], p[[1, 3]] > 0, 1.0, 300)  # int32 cells
        return p, coarse, fine

    def test_pairs_read_as_the_interpolation_writes_them(self):
        # two options of five rows: rows of option 1 on the coarse grid, rows of option 2 on the fine grid
        # and the coarse one; option 2 of row 4 read from the arrays; option 1 of rows 0 and 2 repeats
        # today's (option 0) rows; every pair the same bits as interpolate_pair writes
        p, coarse, fine = self._grids()
        arrays_p, arrays_q = np.full((3, 5, 30), np.nan), np.full((3, 5, 30), np.nan)
        arrays_p[0], arrays_q[0] = p, -p
        arrays_p[2, 4], arrays_q[2, 4] = 7.0, 8.0
        book = tabulation.CurveBook(3, 5)
        expected_p, expected_q = arrays_p.copy(), arrays_q.copy()

        def put(option, rows, grid, grid_rows, scale):
            values = grid.p_grid_kw[grid_rows] * scale
            kw, kvar = tabulation.tables(values), tabulation.tables(values - 10.0)
            book.add(option, rows, grid, grid_rows, kw, kvar)
            tabulation.interpolate_pair(grid, *kw, *kvar, out_a=expected_p[option], out_b=expected_q[option],
                                        rows=grid_rows, out_rows=rows)

        put(1, np.array([1, 3, 4]), coarse, np.array([1, 3, 4]), 1.1)
        put(2, np.array([1, 3]), fine, np.array([0, 1]), 0.9)
        put(2, np.array([0, 2]), coarse, np.array([0, 2]), 1.2)
        book.repeat(1, np.array([0, 2]))
        expected_p[1, [0, 2]], expected_q[1, [0, 2]] = p[[0, 2]], -p[[0, 2]]
        assert book.tabulated(1).tolist() == [False, True, False, True, True]
        assert book.tabulated(2).tolist() == [True, True, True, True, False]
        for option in range(3):
            out_p, out_q = np.full((5, 30), -1.0), np.full((5, 30), -1.0)
            book.fill(option, np.arange(5), arrays_p, arrays_q, out_p, out_q)
            assert_array_equal(out_p, expected_p[option], err_msg=str(option))
            assert_array_equal(out_q, expected_q[option], err_msg=str(option))

    def test_rows_of_its_own_beside_tables_with_todays_rows_only_in_the_arrays(self):
        # the arrays hold option 0 only (shape (1, 5, 30)); option 1 keeps rows 0 and 3 as rows of its own
        # (one per interval, one a constant, e.g. a load-state asset's mean) and row 2 as tables; rows 1
        # and 4 repeat today's; option 2 keeps two more own rows (a second add_rows call)
        p, coarse, _ = self._grids()
        today_p, today_q = p[None].copy(), -p[None].copy()
        book = tabulation.CurveBook(3, 5)
        own = np.stack([p[0] * 0.5, np.full(30, 7.25)])
        book.add_rows(1, np.array([0, 3]), own, -own)
        kw, kvar = tabulation.tables(coarse.p_grid_kw[[2]] * 2.0), tabulation.tables(coarse.p_grid_kw[[2]])
        book.add(1, np.array([2]), coarse, np.array([2]), kw, kvar)
        book.repeat(1, np.array([1, 4]))
        book.add_rows(2, np.array([4, 1]), np.ones((2, 30)), np.zeros((2, 30)))
        out_p, out_q = np.full((5, 30), np.nan), np.full((5, 30), np.nan)
        book.fill(1, np.arange(5), today_p, today_q, out_p, out_q)
        assert_array_equal(out_p[[0, 3]], own)
        assert_array_equal(out_q[[0, 3]], -own)
        assert_array_equal(out_p[[1, 4]], p[[1, 4]])
        assert_array_equal(out_p[2], tabulation.interpolate_pair(coarse, *kw, *kvar, rows=np.array([2])).a[0])
        out_p2, out_q2 = np.zeros((2, 30)), np.zeros((2, 30))
        book.fill(2, np.array([1, 4]), today_p, today_q, out_p2, out_q2)
        assert (out_p2 == 1.0).all() and (out_q2 == 0.0).all()
        slot, finite = book.arrays()[2], book.arrays()[13]
        assert sorted(slot.tolist()) == [0, 2, 2, 2, 2] and finite.all()

    def test_todays_rows_shifted_for_a_terminal_capacitor(self):
        # hand calculation: today's rows p = [10, 0, 4, 0.5] kW, q = [6, 0, 3, 2] kVAr (stopped in the 2nd
        # interval); a 2.5 kVAr capacitor switched with the motor: q = [3.5, 0, 0.5, -0.5], p unchanged;
        # a second row with a 1 kVAr bank: q = [-1, -1, -1, -1] from q = 0 with p = 1 throughout
        today_p = np.array([[[10.0, 0.0, 4.0, 0.5], [1.0, 1.0, 1.0, 1.0]]])
        today_q = np.array([[[6.0, 0.0, 3.0, 2.0], [0.0, 0.0, 0.0, 0.0]]])
        book = tabulation.CurveBook(2, 2)
        book.shift(1, np.array([0, 1]), np.array([2.5, 1.0]))
        out_p, out_q = np.full((2, 4), np.nan), np.full((2, 4), np.nan)
        book.fill(1, np.arange(2), today_p, today_q, out_p, out_q)
        assert_array_equal(out_p, today_p[0])
        assert_array_equal(out_q, [[3.5, 0.0, 0.5, -0.5], [-1.0, -1.0, -1.0, -1.0]])
        # the same values as the engine's own rule, and the entries marked for the general readers
        assert_array_equal(out_q, operation.capacitor_rows_kvar(today_p[0], today_q[0], np.array([2.5, 1.0])))
        slot, finite = book.arrays()[2], book.arrays()[13]
        assert slot.tolist() == [3, 3] and not finite.any()

    def test_several_grids_in_one_slot_and_chosen_output_rows(self):
        # two uint8 grids stacked in one slot; pairs written to chosen rows of the output
        p, coarse, _ = self._grids()
        other = tabulation.locate(p[::-1].copy(), p[::-1] > 0, 1.0, 5)
        book = tabulation.CurveBook(2, 4)
        kw_a, kvar_a = tabulation.tables(coarse.p_grid_kw[[2, 0]]), tabulation.tables(-coarse.p_grid_kw[[2, 0]])
        kw_b, kvar_b = tabulation.tables(other.p_grid_kw[[1, 4]]), tabulation.tables(other.p_grid_kw[[1, 4]] + 1.0)
        book.add(1, np.array([0, 1]), coarse, np.array([2, 0]), kw_a, kvar_a)
        book.add(1, np.array([2, 3]), other, np.array([1, 4]), kw_b, kvar_b)
        assert book.arrays()[5].shape == (10, 30)  # both grids' cells in the uint8 slot
        out_p, out_q = np.zeros((6, 30)), np.zeros((6, 30))
        book.fill(1, np.array([3, 0]), np.zeros((2, 4, 30)), np.zeros((2, 4, 30)), out_p, out_q,
                  out_rows=np.array([5, 1]))
        assert_array_equal(out_p[5], tabulation.interpolate_pair(other, *kw_b, *kvar_b, rows=np.array([1, 4])).a[1])
        assert_array_equal(out_q[1], tabulation.interpolate_pair(coarse, *kw_a, *kvar_a, rows=np.array([2, 0])).b[0])
        assert (out_p[[0, 2, 3, 4]] == 0.0).all()


class TestBlocksReadThroughTheirBook:
    YEARLY = ("energy_kwh", "shaft_energy_kwh", "losses_kwh", "lagging_kvarh", "leading_kvarh", "mean_speed_rpm",
              "running_h", "applies")

    def test_a_block_read_through_its_book_equals_the_written_block(self, fleet):
        # site_blocks with curves keeps the tabulated options as tables, the others as rows of the book's
        # own (its arrays hold today's motors only), and makes options that do not apply repeat today's
        # rows; read through the book, every option's rows are the bits the written run holds, and the
        # yearly values are the same
        index = case_index(fleet)
        held = own = repeated = 0
        for site_id, _ in site_partition(fleet):
            one = site_case(fleet, site_id)
            written = [(rows, {name: np.array(getattr(block, name)) for name in ("p_kw", "q_kvar") + self.YEARLY})
                       for rows, block, _ in operation.site_blocks(one, index, 7)]
            booked = operation.site_blocks(one, index, 7, curves=True)
            for (rows, values), (rows_b, block, _) in zip(written, booked, strict=True):
                assert_array_equal(rows, rows_b)
                book = block.curves
                n_o, n_a, n_t = values["p_kw"].shape
                for o in range(n_o):
                    p, q = np.empty((n_a, n_t)), np.empty((n_a, n_t))
                    book.fill(o, np.arange(n_a), block.p_kw, block.q_kvar, p, q)
                    assert_array_equal(p, values["p_kw"][o], err_msg=f"{site_id} option {o}")
                    assert_array_equal(q, values["q_kvar"][o], err_msg=f"{site_id} option {o}")
                    if o:
                        repeated += int(((book.source[o] == 0) & ~block.applies[:, o]).sum())
                assert block.p_kw.shape == (1, n_a, n_t)  # today's motors only; the rest is in the book
                slots = book.arrays()[2]
                held += int((slots < 2).sum())
                own += int((slots == 2).sum())
                for name in self.YEARLY:
                    assert_array_equal(getattr(block, name), values[name], err_msg=name)
        # every kind of pair was read through the book: tables, rows of its own, today's repeated
        assert held > 0 and own > 0 and repeated > 0

    def test_site_physics_through_the_book_equals_the_written_arrays(self, fleet):
        # the physics path (site_blocks with curves, SiteSavings reading the book, the fleet's arrays filled
        # through it) against site_savings on the written arrays of the same blocks: the same bits
        from models.bill_savings import site_savings, site_setups
        from models.scenario import site_physics

        index = case_index(fleet)
        for site_id, _ in site_partition(fleet):
            one = site_case(fleet, site_id)
            op, part = site_physics(one, index, 35.0, chunk_assets=7)
            written = operate_site(one, index, chunk_assets=7)
            assert_array_equal(op.p_kw, written.p_kw)
            assert_array_equal(op.q_kvar, written.q_kvar)
            setup = site_setups(one, index)[site_id]
            expected = site_savings(setup, index, written.interval_h, written.p_kw, written.q_kvar, written.applies,
                                    written.technologies, 35.0)
            for name, values in expected.items():
                assert np.array_equal(part[name], values, equal_nan=True), f"{site_id} {name}"


class TestRefine:
    @settings(max_examples=60, deadline=None)
    @given(st.integers(0, 2**32 - 1), st.integers(2, 70), st.sampled_from([1, 2, 4, 8]), st.integers(1, 5),
           st.integers(1, 60))
    def test_refined_placing_is_a_fresh_placing_bit_for_bit(self, seed, n_nodes, factor, n_rows, n_steps):
        # placing the same loads afresh on the finer grid is the reference (an invariant of our own design)
        rng, p, running = _random_loads(seed, n_rows, n_steps)
        coarse = tabulation.locate(p, running, 0.25, n_nodes)
        rows = np.flatnonzero(rng.random(n_rows) < 0.7)
        fine = tabulation.refine(coarse, rows, factor, 0.25)
        fresh = tabulation.locate(p[rows], running[rows], 0.25, factor * (n_nodes - 1) + 1)
        for name in ("p_grid_kw", "cell", "position_frac", "hours_h", "moment_h", "position_finite"):
            assert_array_equal(getattr(fine, name), getattr(fresh, name), err_msg=name)
        assert fine.cell.dtype == fresh.cell.dtype

    def test_not_refined_without_what_it_needs(self):
        p = np.array([[1.0, np.inf, 8.0], [1.0, 2.0, 3.0]])
        g = tabulation.locate(p, p > 0, 1.0, 5)
        assert tabulation.refine(g, np.array([0]), 4, 1.0) is None  # an infinite load
        assert tabulation.refine(g, np.array([1]), 3, 1.0) is None  # not a power of 2
        assert tabulation.refine(g, np.array([1]), 4, 1.0) is not None


def test_interpolation_is_the_numpy_rule_bit_for_bit():
    # the compiled pass of tabulation.interpolate against its rule written in plain numpy here:
    # out[i, t] = base[i, cell[i, t]] + rise[i, cell[i, t]] * position[i, t]
    rng = np.random.default_rng(11)
    p = rng.uniform(0.0, 50.0, (6, 300))
    p[p < 4.0] = 0.0
    g = tabulation.locate(p, p > 0, 1.0, 17)
    base, rise = tabulation.tables(np.sqrt(g.p_grid_kw) * 3.3 - 1.0)
    expected = (np.take_along_axis(base, g.cell.astype(np.intp), axis=1)
                + np.take_along_axis(rise, g.cell.astype(np.intp), axis=1) * g.position_frac)
    assert_array_equal(tabulation.interpolate(g, base, rise), expected)
