"""Validation record for models.plan: exact plan vs brute force, greedy shortfall, budgets, MAC curve.

Hand calculations are in docs/derivations/finance-plan.md; the brute force below enumerates every
feasible plan of small random fleets (an independent check, no solver).
"""

import itertools

import numpy as np
import pytest
from numpy.testing import assert_allclose

from models import plan

# The exact plan stops at a relative gap of 1e-4 by default; tests ask for a proof (gap 0).
EXACT = dict(mip_rel_gap=0.0)


def brute_force(assets, value, spend, budget, rate):
    """Best total NPV over every choice of (no project) or (one project, one start year) per asset."""
    years = len(budget)
    by_asset = {}
    for i, a in enumerate(assets):
        by_asset.setdefault(a, []).append(i)
    choices = [[None] + [(i, s) for i in members for s in range(years)] for members in by_asset.values()]
    best = 0.0
    for combo in itertools.product(*choices):
        used = np.zeros(years)
        total = 0.0
        for pick in combo:
            if pick is None:
                continue
            i, s = pick
            for k in range(spend.shape[1]):
                if s + k < years:
                    used[s + k] += spend[i, k]
            total += value[i] / (1 + rate) ** s
        if np.all(used <= budget + 1e-9) and total > best:
            best = total
    return best


def _sixty_assets() -> tuple:
    """plan_exact's arguments for a seeded fleet of 60 assets x 3 options, budgets of 800 in 3 plan years."""
    rng = np.random.default_rng(5)
    assets = np.repeat([f"a{k}" for k in range(60)], 3)
    ids = [f"{a}/{i}" for i, a in enumerate(assets)]
    value = rng.uniform(1, 100, assets.size)
    spend = rng.uniform(10, 100, (assets.size, 1))
    return ids, assets, value, spend, [800.0, 800.0, 800.0], 0.08


class TestExactPlan:
    def test_options_exclude_each_other(self):
        result = plan.plan_exact(["a/1", "a/2", "b/1"], ["a", "a", "b"], [60.0, 90.0, 50.0],
                                 [50.0, 100.0, 50.0], [100.0], 0.08, **EXACT)
        # Hand calculation, finance-plan.md section 2: {a/1, b/1} = 110.
        assert sorted(result.chosen["project_id"]) == ["a/1", "b/1"]
        assert_allclose(result.total_npv, 110.0, rtol=1e-12)
        assert result.status == "optimal" and result.method == "exact"

    def test_delayed_start_discounted(self):
        result = plan.plan_exact(["p"], ["a"], [100.0], [100.0], [0.0, 100.0], 0.08, **EXACT)
        # Hand calculation, finance-plan.md section 3: 100/1.08.
        assert result.chosen["start_yr"].tolist() == [1]
        assert_allclose(result.total_npv, 92.592593, atol=5e-7)
        assert_allclose(result.spend_by_year, [0.0, 100.0])

    def test_capital_spread_over_years(self):
        spend = np.array([[60.0, 60.0], [60.0, 60.0]])
        result = plan.plan_exact(["p", "q"], ["a", "b"], [10.0, 10.0], spend, [100.0, 100.0], 0.08, **EXACT)
        # Hand calculation, finance-plan.md section 4: only one fits; it starts in year 0.
        assert len(result.chosen) == 1 and result.chosen["start_yr"].tolist() == [0]
        assert_allclose(result.spend_by_year, [60.0, 60.0])
        assert_allclose(result.total_npv, 10.0)

    def test_zero_budget(self):
        result = plan.plan_exact(["p", "free"], ["a", "b"], [10.0, 5.0], [100.0, 0.0], [0.0, 0.0], 0.08, **EXACT)
        # Hand calculation, finance-plan.md section 5: only the zero-capital project fits.
        assert result.chosen["project_id"].tolist() == ["free"]
        assert_allclose(result.total_npv, 5.0)

    def test_zero_budget_nothing_fits(self):
        result = plan.plan_exact(["p"], ["a"], [10.0], [100.0], [0.0], 0.08, **EXACT)
        assert result.status == "empty" and result.chosen.empty and result.total_npv == 0.0
        assert_allclose(result.spend_by_year, [0.0])

    def test_no_budget_takes_best_positive_option_per_asset(self):
        result = plan.plan_exact(["a/1", "a/2", "b/1"], ["a", "a", "b"], [60.0, 90.0, -5.0], [50.0, 100.0, 1.0],
                                 None, 0.08)
        assert result.status == "unconstrained" and result.chosen["project_id"].tolist() == ["a/2"]

    def test_empty_inputs(self):
        result = plan.plan_exact([], [], [], np.zeros((0, 3)), [100.0], 0.08)
        assert result.chosen.empty and result.total_npv == 0.0 and result.status == "empty"

    def test_all_negative_npv(self):
        result = plan.plan_exact(["p"], ["a"], [-1.0], [1.0], [100.0], 0.08)
        assert result.status == "empty" and result.chosen.empty

    @pytest.mark.parametrize("kwargs, message", [
        (dict(budget_per_yr=[-1.0]), "budget"),
        (dict(npv=[1.0, 2.0]), "one entry per project"),
        (dict(project_id=["p", "p", "q"]), "unique"),
        (dict(capital_by_year=[1.0, np.nan, 1.0]), "finite"),
    ])
    def test_invalid_raises(self, kwargs, message):
        args = dict(project_id=["p", "q", "r"], asset_id=["a", "b", "c"], npv=[1.0, 2.0, 3.0],
                    capital_by_year=[1.0, 1.0, 1.0], budget_per_yr=[10.0], discount_rate_frac=0.08)
        args.update(kwargs)
        with pytest.raises(ValueError, match=message):
            plan.plan_exact(**args)


class TestStartAndLimits:
    """A start plan speeds the proof but never changes what is proven; the proven gap is reported."""

    IDS, ASSETS = ["a/1", "a/2", "b/1"], ["a", "a", "b"]
    NPV, CAPITAL = [60.0, 90.0, 50.0], [50.0, 100.0, 50.0]

    @pytest.mark.parametrize("start", [
        {"a/2": 0, "b/1": 0},                       # over budget (150 > 100): repaired by dropping
        {"a/1": 0, "a/2": 0},                       # two options of one asset: one kept
        {"zzz/9": 0, "b/1": 7, "a/1": "x"},         # unknown label, year out of range, not a year
        {"a/1": 0, "b/1": 0},                       # the optimum itself
    ])
    def test_any_start_gives_the_proven_optimum(self, start):
        result = plan.plan_exact(self.IDS, self.ASSETS, self.NPV, self.CAPITAL, [100.0], 0.08, start=start, **EXACT)
        # Hand calculation, finance-plan.md section 2: {a/1, b/1} = 110 whatever the start.
        assert sorted(result.chosen["project_id"]) == ["a/1", "b/1"]
        assert_allclose(result.total_npv, 110.0, rtol=1e-12)
        assert result.status == "optimal" and result.gap_frac == 0.0

    def test_start_plans_agree_with_brute_force(self):
        # Independent check (brute_force above) on seeded random fleets, each solved from a random start.
        rng = np.random.default_rng(99)
        for trial in range(15):
            n_assets = int(rng.integers(2, 6))
            assets = np.repeat([f"a{k}" for k in range(n_assets)], rng.integers(1, 4, n_assets))
            ids = [f"{a}/{i}" for i, a in enumerate(assets)]
            value = np.round(rng.normal(40, 40, assets.size), 2)
            spend = np.round(rng.uniform(0, 60, (assets.size, 2)), 2)
            budget = np.round(rng.uniform(0, 150, 2), 2)
            start = {ids[i]: int(rng.integers(0, 2)) for i in rng.choice(assets.size, 3)}
            result = plan.plan_exact(ids, assets, value, spend, budget, 0.08, start=start, **EXACT)
            # Exact arithmetic on a handful of terms: 1e-9 relative covers rounding only.
            assert_allclose(result.total_npv, brute_force(assets, value, spend, budget, 0.08), rtol=1e-9, atol=1e-9,
                            err_msg=f"trial {trial}")
            assert np.all(result.spend_by_year <= budget + 1e-6)

    def test_gap_is_reported_and_within_the_asked_gap(self):
        # Seeded fleet of 60 assets x 3 options x 3 years, solved to a 1 % gap: the plan is never
        # worse than the greedy one, and its proven gap is at most the gap asked for.
        args = _sixty_assets()
        loose = plan.plan_exact(*args, mip_rel_gap=0.01)
        greedy = plan.plan_greedy(*args)
        assert loose.status == "optimal" and 0.0 <= loose.gap_frac <= 0.01
        assert loose.total_npv >= greedy.total_npv - 1e-9
        assert np.isnan(greedy.gap_frac)  # a rule of thumb proves nothing

    @pytest.mark.parametrize("kwargs, message", [
        (dict(time_limit_s=0.0), "time_limit_s"), (dict(time_limit_s=float("nan")), "time_limit_s"),
        (dict(mip_rel_gap=-0.1), "mip_rel_gap"),
    ])
    def test_invalid_solver_limits_raise(self, kwargs, message):
        with pytest.raises(ValueError, match=message):
            plan.plan_exact(self.IDS, self.ASSETS, self.NPV, self.CAPITAL, [100.0], 0.08, **kwargs)


def random_small_fleet(rng, max_assets: int = 6, zero_spend_share: float = 0.2):
    """A seeded random fleet of 1 to max_assets - 1 assets x 1-3 options, capital over the two years after
    the start (a share of it zero), two budget years: (ids, assets, value, spend, budget)."""
    n_assets = int(rng.integers(1, max_assets))
    options = rng.integers(1, 4, n_assets)
    assets = np.repeat([f"a{k}" for k in range(n_assets)], options)
    n = assets.size
    ids = [f"{a}/{i}" for i, a in enumerate(assets)]
    value = np.round(rng.normal(40, 40, n), 2)
    spend = np.round(rng.uniform(0, 60, (n, 2)) * (rng.random((n, 2)) < 1.0 - zero_spend_share), 2)
    budget = np.round(rng.uniform(0, 150, 2), 2)
    return ids, assets, value, spend, budget


class TestAgainstBruteForce:
    def test_random_small_fleets(self):
        # Independent check: exhaustive enumeration (brute_force above) on seeded random fleets of up to
        # 5 assets x 3 options x 2 plan years, capital spread over two years after the start.
        rng = np.random.default_rng(2024)
        for trial in range(25):
            ids, assets, value, spend, budget = random_small_fleet(rng)
            rate = 0.08
            exact = plan.plan_exact(ids, assets, value, spend, budget, rate, **EXACT)
            greedy = plan.plan_greedy(ids, assets, value, spend, budget, rate)
            best = brute_force(assets, value, spend, budget, rate)
            # Exact arithmetic on a handful of terms: 1e-9 relative covers rounding only.
            assert_allclose(exact.total_npv, best, rtol=1e-9, atol=1e-9, err_msg=f"trial {trial}")
            # Invariants: budgets never exceeded; greedy never beats the optimum; one project per asset.
            for result in (exact, greedy):
                assert np.all(result.spend_by_year <= budget + 1e-6)
                assert result.chosen["asset_id"].is_unique
            assert greedy.total_npv <= exact.total_npv + 1e-9

    def test_relaxation_by_interior_point_gives_the_same_plans(self, monkeypatch):
        # the relaxation of a large plan is solved by the interior-point method with crossover; forced on small
        # random fleets it ends at a vertex (at most one fractional asset per budget row, so at most two
        # fractional columns per row: H. Kellerer, U. Pferschy and D. Pisinger, Knapsack Problems, Springer
        # 2004, Sec. 11.2) and the exact plans are the brute force's
        rng = np.random.default_rng(99)
        calls = []
        real = plan._relaxation

        def spy(model, time_limit_s):
            relaxed = real(model, time_limit_s)
            calls.append((model.num_row_, relaxed))
            return relaxed

        monkeypatch.setattr(plan, "INTERIOR_POINT_MIN_COLUMNS", 0)
        monkeypatch.setattr(plan, "_relaxation", spy)
        for trial in range(12):
            ids, assets, value, spend, budget = random_small_fleet(rng, zero_spend_share=0.0)
            exact = plan.plan_exact(ids, assets, value, spend, budget, 0.08, **EXACT)
            assert_allclose(exact.total_npv, brute_force(assets, value, spend, budget, 0.08), rtol=1e-9, atol=1e-9,
                            err_msg=f"trial {trial}")
        relaxed = [r for _, r in calls if r is not None]
        assert len(relaxed) >= 10
        for rows, r in calls:
            if r is not None:
                fractional = ((r.x > 1e-9) & (r.x < 1 - 1e-9)).sum()
                assert fractional <= 2 * 2  # two budget rows (two plan years), a pair per row at most

    def test_six_assets_three_options_two_years(self):
        # Largest size asked for: 6 assets x 3 options x 2 years (7^6 = 117,649 plans enumerated).
        rng = np.random.default_rng(7)
        assets = np.repeat([f"a{k}" for k in range(6)], 3)
        ids = [f"p{i}" for i in range(18)]
        value = np.round(rng.normal(50, 30, 18), 2)
        spend = np.round(rng.uniform(10, 80, (18, 1)), 2)
        budget = np.array([120.0, 90.0])
        exact = plan.plan_exact(ids, assets, value, spend, budget, 0.1, **EXACT)
        assert_allclose(exact.total_npv, brute_force(assets, value, spend, budget, 0.1), rtol=1e-9)


class TestProofByRelaxation:
    """A first plan within the asked gap of the linear relaxation's NPV is proven without branching; on
    fleets larger than the core, a core programme improves the first plan."""

    @staticmethod
    def counting_runs(monkeypatch):
        runs = []
        original = plan.highspy.Highs.run

        def run(self):
            runs.append(1)
            return original(self)

        monkeypatch.setattr(plan.highspy.Highs, "run", run)
        return runs

    def test_whole_relaxation_is_proven_by_its_own_bound(self, monkeypatch):
        # Hand calculation, finance-plan.md "The relaxation's bound": budget 100 holds a/1 (60, 50) and
        # b/1 (50, 50) whole; the relaxation's optimum is that plan, 110 = its own bound, gap 0.
        runs = self.counting_runs(monkeypatch)
        result = plan.plan_exact(["a/1", "b/1"], ["a", "b"], [60.0, 50.0], [50.0, 50.0], [100.0], 0.08)
        assert sorted(result.chosen["project_id"]) == ["a/1", "b/1"]
        assert_allclose(result.total_npv, 110.0, rtol=1e-12)
        assert result.status == "optimal" and result.gap_frac == 0.0 and result.message == "optimal plan"
        assert len(runs) == 1  # the relaxation only: no branch and bound

    def test_fractional_relaxation_goes_on_to_branching(self, monkeypatch):
        # Hand calculation, finance-plan.md "The relaxation's bound": budget 120 holds a/1 and b/1 whole
        # (100 of capital, NPV 110) and 20/50 of the step from a/1 to a/2 (+30 NPV for +50 capital):
        # bound 110 + 0.4 x 30 = 122 > 110, so proving {a/1, b/1} optimal needs branch and bound.
        runs = self.counting_runs(monkeypatch)
        result = plan.plan_exact(["a/1", "a/2", "b/1"], ["a", "a", "b"], [60.0, 90.0, 50.0], [50.0, 100.0, 50.0],
                                 [120.0], 0.08, **EXACT)
        assert_allclose(result.total_npv, 110.0, rtol=1e-12)
        assert result.status == "optimal" and result.gap_frac == 0.0
        assert len(runs) == 2  # the relaxation, then branch and bound

    def test_reported_gap_is_honest(self):
        # Independent check: the optimum proven by branch and bound (gap 0); the loose plan's reported gap
        # must cover its real distance to that optimum.
        args = _sixty_assets()
        best = plan.plan_exact(*args, **EXACT).total_npv
        for gap in (1e-2, 1e-3, 1e-4):
            loose = plan.plan_exact(*args, mip_rel_gap=gap)
            assert 0.0 <= loose.gap_frac <= gap
            assert (best - loose.total_npv) / loose.total_npv <= loose.gap_frac + 1e-12

    def test_core_programme_on_a_fleet_larger_than_the_core(self, monkeypatch):
        # A core of 10 assets on a seeded fleet of 80 assets x 3 options x 3 plan years, capital spread
        # over two years: the core step runs, its plan keeps every budget, and the plan is within the
        # asked gap of the optimum proven by branch and bound (gap 0, no core step).
        rng = np.random.default_rng(11)
        assets = np.repeat([f"a{k}" for k in range(80)], 3)
        ids = [f"{a}/{i}" for i, a in enumerate(assets)]
        value = rng.uniform(1, 100, assets.size)
        spend = rng.uniform(10, 100, (assets.size, 2))
        budget = np.array([1000.0, 1000.0, 600.0])
        args = (ids, assets, value, spend, budget, 0.08)
        best = plan.plan_exact(*args, **EXACT).total_npv
        calls = []
        original = plan._core_plan

        def core_plan(*a, **k):
            calls.append(original(*a, **k))
            return calls[-1]

        monkeypatch.setattr(plan, "CORE_ASSETS", 10)
        monkeypatch.setattr(plan, "_core_plan", core_plan)
        result = plan.plan_exact(*args, mip_rel_gap=1e-3)
        assert len(calls) == 1 and calls[0] is not None
        assert np.all(result.spend_by_year <= budget + 1e-6)
        assert result.chosen["asset_id"].is_unique
        assert (best - result.total_npv) / result.total_npv <= result.gap_frac + 1e-12 <= 1e-3 + 1e-12

    def test_relative_gap(self):
        # hand calculation: (110 - 100) / 100 = 0.1; a plan at its bound has gap 0; bound 5 over a plan
        # worth 0 is an infinite relative gap
        assert plan._relative_gap(110.0, 100.0) == pytest.approx(0.1, rel=1e-12)
        assert plan._relative_gap(100.0, 100.0) == 0.0
        assert plan._relative_gap(5.0, 0.0) == float("inf")


class TestDominatedOptions:
    def test_dominated_options_are_found(self):
        # hand calculation: asset a has (NPV, capital) a/1 (60, 50), a/2 (50, 50), a/3 (60, 40), a/4 (90, 100);
        # a/1 is beaten by a/3 (same NPV, less capital), a/2 by a/1 and a/3; a/4 is the only one with NPV 90;
        # b/1 (10, 5) and b/2 (10, 5) are equal: neither beats the other
        data = plan._prepare(["a/1", "a/2", "a/3", "a/4", "b/1", "b/2"], ["a", "a", "a", "a", "b", "b"],
                             [60.0, 50.0, 60.0, 90.0, 10.0, 10.0], [50.0, 50.0, 40.0, 100.0, 5.0, 5.0], [100.0], 0.08)
        assert plan._dominated(data).tolist() == [True, True, False, False, False, False]

    def test_spend_in_a_later_year_counts(self):
        # hand calculation: x/1 spends (10, 0), x/2 (5, 20): cheaper first, dearer second year: neither beats
        data = plan._prepare(["x/1", "x/2"], ["x", "x"], [30.0, 40.0], [[10.0, 0.0], [5.0, 20.0]], [50.0, 50.0], 0.08)
        assert not plan._dominated(data).any()

    def test_fleets_full_of_dominated_options_agree_with_brute_force(self):
        # Independent check: each asset's extra options are copies of another with less NPV or more capital,
        # so many are dominated; the plan must still match exhaustive enumeration.
        rng = np.random.default_rng(99)
        for trial in range(15):
            n_assets = int(rng.integers(2, 6))
            value, spend, assets = [], [], []
            for k in range(n_assets):
                v0, c0 = rng.normal(40, 30), rng.uniform(5, 60, 2)
                for _ in range(int(rng.integers(1, 4))):
                    value.append(round(v0 - rng.uniform(0, 10) * (rng.random() < 0.7), 2))
                    spend.append(np.round(c0 + rng.uniform(0, 15, 2) * (rng.random(2) < 0.6), 2))
                    assets.append(f"a{k}")
            value, spend, assets = np.array(value), np.array(spend), np.array(assets)
            ids = [f"{a}/{i}" for i, a in enumerate(assets)]
            budget = np.round(rng.uniform(20, 120, 2), 2)
            exact = plan.plan_exact(ids, assets, value, spend, budget, 0.08, **EXACT)
            assert_allclose(exact.total_npv, brute_force(assets, value, spend, budget, 0.08), rtol=1e-9, atol=1e-9,
                            err_msg=f"trial {trial}")


class TestGreedy:
    def test_shortfall_hand_example(self):
        args = (["a", "b", "c"], ["a", "b", "c"], [66.0, 50.0, 50.0], [60.0, 50.0, 50.0], [100.0], 0.08)
        greedy = plan.plan_greedy(*args)
        exact = plan.plan_exact(*args, **EXACT)
        # Hand calculation, finance-plan.md section 1: greedy 66, exact 100, shortfall 34 (34 %).
        assert greedy.chosen["project_id"].tolist() == ["a"]
        comparison = plan.compare_plans(exact, greedy)
        assert_allclose(comparison[["npv_exact", "npv_greedy", "shortfall", "shortfall_frac"]].to_numpy(),
                        [100.0, 66.0, 34.0, 0.34], rtol=1e-12)

    def test_greedy_delays_when_year_zero_is_full(self):
        result = plan.plan_greedy(["p", "q"], ["a", "b"], [20.0, 10.0], [100.0, 100.0], [100.0, 100.0], 0.1)
        # Hand: p (PI 0.2) takes year 0; q (PI 0.1) fits only in year 1, NPV 10/1.1.
        assert result.chosen.sort_values("project_id")["start_yr"].tolist() == [0, 1]
        assert_allclose(result.total_npv, 20.0 + 10.0 / 1.1, rtol=1e-12)


class TestAbatementCurve:
    def test_hand_example(self):
        curve = plan.abatement_curve(["a/1", "a/2", "b/1"], ["a", "a", "b"], [10.0, 30.0, -5.0],
                                     [2.0, 1.0, 4.0], [-5.0, -30.0, 1.25])
        # Hand calculation, finance-plan.md section 6.
        assert curve["project_id"].tolist() == ["a/2", "b/1"]
        assert_allclose(curve["bar_start_t_per_yr"], [0.0, 1.0])
        assert_allclose(curve["cumulative_co2_avoided_t_per_yr"], [1.0, 5.0])

    def test_sorted_and_skips_no_abatement(self):
        curve = plan.abatement_curve(["p", "q", "r"], ["a", "b", "c"], [1.0, 2.0, 3.0], [1.0, 0.0, 2.0],
                                     [40.0, -10.0, -20.0])
        assert curve["project_id"].tolist() == ["r", "p"]
        assert curve["abatement_cost_per_t"].is_monotonic_increasing

    def test_nan_raises(self):
        with pytest.raises(ValueError, match="NaN"):
            plan.abatement_curve(["p"], ["a"], [1.0], [np.nan], [1.0])


def greedy_by_hand(assets, value, spend, budget, rate):
    """The profitability-index rule written out plainly (plan_greedy's Notes): projects with NPV > 0 by
    PI = NPV / PV(capital), ties larger NPV first; each started, if its asset has none yet, in the
    earliest plan year whose spend fits every year's budget left. Returns {project: start year}."""
    years = len(budget)
    n_k = spend.shape[1]
    capital_pv = [sum(spend[i, k] / (1 + rate) ** k for k in range(n_k)) for i in range(len(value))]
    ranked = sorted((i for i in range(len(value)) if value[i] > 0),
                    key=lambda i: (-(value[i] / capital_pv[i]) if capital_pv[i] > 0 else -np.inf, -value[i]))
    left, taken, chosen = list(budget), set(), {}
    for i in ranked:
        if assets[i] in taken:
            continue
        for s in range(years):
            need = [spend[i, y - s] if 0 <= y - s < n_k else 0.0 for y in range(years)]
            if all(need[y] <= left[y] + 1e-9 * max(1.0, budget[y]) for y in range(years)):
                left = [left[y] - need[y] for y in range(years)]
                chosen[i] = s
                taken.add(assets[i])
                break
    return chosen


@pytest.mark.parametrize("seed", range(12))
def test_greedy_plan_follows_the_rule_written_out(seed):
    # random fleets of 4-9 assets, 1-3 options each, capital over 1-3 years, 1-3 budget years
    rng = np.random.default_rng(100 + seed)
    n_assets = int(rng.integers(4, 10))
    assets = [f"m{a}" for a in range(n_assets) for _ in range(int(rng.integers(1, 4)))]
    n = len(assets)
    years, n_k = int(rng.integers(1, 4)), int(rng.integers(1, 4))
    value = rng.uniform(-20.0, 100.0, n).round(2)
    spend = rng.uniform(10.0, 60.0, (n, n_k)).round(2)
    budget = rng.uniform(40.0, 150.0, years).round(2)
    ids = [f"p{i}" for i in range(n)]
    got = plan.plan_greedy(ids, assets, value, spend, budget, 0.08)
    expected = greedy_by_hand(assets, value, spend, budget, 0.08)
    chosen = dict(zip(got.chosen["project_id"], got.chosen["start_yr"]))
    assert chosen == {ids[i]: s for i, s in expected.items()}


# A fresh interpreter per case: the solver library prints its banner for a process's first solver only.
_SOLVE_WHILE_PRINTING = r"""
import sys, threading
from models import plan

def solve():
    for _ in range({solves}):
        plan.plan_exact(["a/1", "a/2", "b/1"], ["a", "a", "b"], [60.0, 90.0, 50.0],
                        [[50.0], [100.0], [40.0]], [100.0], 0.08, mip_rel_gap=0.0)

threads = [threading.Thread(target=solve) for _ in range({threads})]
for t in threads:
    t.start()
for i in range({lines}):
    print(f"line {{i}}", flush=True)
for t in threads:
    t.join()
print("done", flush=True)
"""


@pytest.mark.parametrize("threads, solves, lines", [(1, 20, 3000), (4, 3, 500)])
def test_solves_print_no_banner_and_lose_no_line_of_other_threads(threads, solves, lines):
    # Regression: the whole solve used to run with file descriptor 1 on the null device, so lines another thread
    # printed meanwhile (a server's address, a progress line) were lost; several threads silencing it at once
    # could also leave it silenced for good. Only the process's first solver, made when models.plan is imported, is.
    import subprocess
    import sys
    from pathlib import Path

    script = _SOLVE_WHILE_PRINTING.format(threads=threads, solves=solves, lines=lines)
    out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=120,
                         cwd=Path(__file__).resolve().parents[1], check=True).stdout
    assert "HiGHS" not in out  # the banner ("Running HiGHS ...") stays hidden
    assert out.splitlines() == [f"line {i}" for i in range(lines)] + ["done"]


class TestLatestStart:
    """A project that may start only by a given plan year (a motor that has failed: year 0 or not at all)."""

    # hand calculation, finance-plan.md section 7: budgets 100 and 100, discount 8 %; a (NPV 90, capital 100)
    # and b (NPV 50, capital 100).
    # Free to start either year: a in year 0 and b in year 1, 90 + 50 / 1.08 = 136.30. With b in year 0 only:
    # a in year 0 alone is 90; b in year 0 and a in year 1 is 50 + 90 / 1.08 = 133.33, the best.
    ARGS = (["a/1", "b/1"], ["a", "b"], [90.0, 50.0], [100.0, 100.0], [100.0, 100.0], 0.08)

    def test_exact_plan_keeps_the_project_to_its_years(self):
        free = plan.plan_exact(*self.ARGS, **EXACT)
        assert dict(zip(free.chosen["project_id"], free.chosen["start_yr"])) == {"a/1": 0, "b/1": 1}
        assert free.total_npv == pytest.approx(90.0 + 50.0 / 1.08)
        held = plan.plan_exact(*self.ARGS, latest_start_yr=[np.inf, 0], **EXACT)
        assert dict(zip(held.chosen["project_id"], held.chosen["start_yr"])) == {"b/1": 0, "a/1": 1}
        assert held.total_npv == pytest.approx(50.0 + 90.0 / 1.08)

    def test_rank_order_plan_skips_a_project_whose_years_are_spent(self):
        # finance-plan.md section 7: by profitability index a (0.9) goes first into year 0; b fits only year 1,
        # closed to it: left out
        held = plan.plan_greedy(*self.ARGS, latest_start_yr=[np.inf, 0])
        assert held.chosen["project_id"].tolist() == ["a/1"] and held.total_npv == pytest.approx(90.0)

    def test_a_negative_latest_start_is_refused(self):
        with pytest.raises(ValueError, match="latest_start_yr"):
            plan.plan_exact(*self.ARGS, latest_start_yr=[-1, 0])
