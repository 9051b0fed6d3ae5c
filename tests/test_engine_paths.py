"""The engine's fast paths pinned against independent computations (validation record of the speed work).

Paths covered, each against a computation that does not use it:

1. ``models.billing.bill_many``: scenario blocks of ``_CHUNK_ELEMENTS`` (2**17) scenario-steps, quantities
   given as one row broadcast to every scenario, demand windows of one interval and hourly intervals.
   Reference: each scenario priced alone through :func:`models.billing.bill`, the same meter given at a
   finer interval (general window-mean path), and hand calculations written on the line above.
2. ``models.operation.site_blocks``: one pair of per-interval buffers per site reused block after block,
   today's motors of the first pass reused in the second, per-site constants and loads sliced per
   block. Reference: every block run on its own with fresh arrays (``_operate_block`` without buffers,
   site constants or first-pass results) and a one-block run of the site.
3. The compact interval store (``SiteIntervalStore`` / ``_SiteRecompute``). Reference: the dense run.
4. ``models.site.stepped_bank_q_kvar`` evaluated in place. Reference: the documented rule step by step
   in plain Python.
5. ``models.bill_savings._changed_pairs`` (one comparison per element). Reference: largest |difference|
   in plain numpy, and hand-calculated savings.

Tolerances: "exact" (``array_equal``) where the fast path is claimed to do the same floating-point
operations on the same numbers; 1e-12 relative where sums are taken in another order (a few ulps of
a bill). Every model works element by element (the speed-coupling fixed point stops element by
element), so a block's size never moves a value.
"""

from __future__ import annotations

import math
import shutil
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose, assert_array_equal

import casebuilder as cb
from models import billing, operation, scenario
from models.bill_savings import SiteSetup, _changed_pairs, meter_and_bills, site_savings, site_setups
from models.billing import bill, bill_many, bill_total
from models.case import load_case
from models.operation import asset_blocks, case_index, operate_site, site_blocks, site_case, site_partition
from models.site import Site, stepped_bank_q_kvar
from models.tariff import tariff_from_dict

REPO = Path(__file__).resolve().parents[1]
TARIFF_DIR = REPO / "data" / "tariffs"
EXAMPLES = ["example_tou_kw_reactive_ratchet.toml", "example_kva_demand.toml", "example_pf_adjusted_demand.toml",
            "example_contracted_capacity.toml", "example_reactive_demand_pf_energy.toml",
            "example_reactive_pf_price_bands.toml"]
# Bills of up to ~1e5 summed over months in another order than one scenario's bill: a few ulps.
BILL_RTOL = 1e-12
# A line item that is zero in one path and a sum of zeros in the other: float rounding only.
BILL_ATOL = 1e-9
PER_INTERVAL = ("p_kw", "q_kvar")
YEARLY = ("energy_kwh", "shaft_energy_kwh", "losses_kwh", "lagging_kvarh", "leading_kvarh", "mean_speed_rpm",
          "running_h", "capacitor_q_kvar", "applies", "interval_data")


def _tariff(text: str):
    t, problems = tariff_from_dict(tomllib.loads(text), source="test.toml")
    assert t is not None, [str(p) for p in problems]
    return t


def _example(name: str):
    with open(TARIFF_DIR / name, "rb") as f:
        t, problems = tariff_from_dict(tomllib.load(f), source=name)
    assert t is not None, problems
    return t


# A tariff with every clause kind the engine has a special path for: TOU kWh energy, a kW demand with a
# peak-window PF adjustment and a ratchet in one period, a kVA demand, an interval-netted reactive
# allowance, a per-period allowance priced by the power factor's band, a banned leading charge, a kVAr demand
# above a share of the kW demand, a power-factor percentage of the energy charges, a fixed charge and a tax on everything (invented).
ALL_CLAUSES = '''
[tariff]
name = "all clauses (invented)"
currency = "EUR"
time_zone = "Europe/Berlin"
[[periods]]
code = "day"
hours = ["07:00-21:00"]
[[periods]]
code = "night"
hours = ["21:00-07:00"]
[energy]
price_per_kwh = { day = 0.20, night = 0.11 }
[[fixed]]
name = "service"
charge_per_month = 40.0
[[demand]]
name = "kw"
price_per_kw_month = 9.0
window_min = 60
periods = ["day"]
ratchet_frac = 0.8
ratchet_months = 2
[demand.power_factor_adjustment]
method = "ratio"
target_power_factor = 0.92
power_factor_from = "peak_window"
[[demand]]
name = "kva"
price_per_kva_month = 3.0
window_min = 60
[[reactive]]
name = "lagging"
price_per_kvarh = 0.015
free_kvarh_per_kwh = 0.3
allowance_per = "interval"
periods = ["day"]
[[reactive]]
name = "banded"
price_per_kvarh = 0.01
free_kvarh_per_kwh = 0.2
allowance_per = "period"
price_by_power_factor = [{ below = 0.95, price_per_kvarh = 0.03 }, { below = 0.90, price_per_kvarh = 0.05 }]
[[leading]]
name = "night leading"
price_per_kvarh = 0.02
banned = true
periods = ["night"]
[[reactive_demand]]
name = "kvar"
price_per_kvar_month = 0.4
free_power_factor = 0.9
window_min = 30
periods = ["day"]
[[energy_power_factor]]
name = "pf"
penalty = [{ below = 0.95, percent_per_point = 0.5 }, { below = 0.85, percent_per_point = 1.0 }]
rebate = [{ above = 0.97, percent_per_point = 0.25 }]
round_points = "up"
[[taxes]]
name = "VAT"
rate_pct = 20.0
base = "all_charges"
'''


def _meters(n_scenarios: int, n_steps: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Seeded site meters (kW, kVAr) with lagging and leading intervals and some export."""
    rng = np.random.default_rng(seed)
    p = rng.uniform(-50.0, 1500.0, (n_scenarios, n_steps))
    q = rng.uniform(-400.0, 900.0, (n_scenarios, n_steps))
    return p, q


def _alone(tariff, index, p: np.ndarray, q: np.ndarray) -> list[tuple[pd.Series, float, list[str]]]:
    """Each scenario priced alone through bill(): (amount by line item, total, flagged line items)."""
    out = []
    for p_row, q_row in zip(p, q):
        b = bill(tariff, index, p_row, q_row)
        items = b.groupby("line_item", sort=False)["amount"].sum()
        flagged = sorted(set(b.loc[b["flag"], "line_item"]))
        out.append((items, bill_total(b), flagged))
    return out


def _assert_matches_alone(many: pd.DataFrame, alone) -> None:
    assert len(many) == len(alone)
    for s, (items, total, flagged) in enumerate(alone):
        for name in many.columns.drop("total"):
            assert_allclose(many[name].iloc[s], items.get(name, 0.0), rtol=BILL_RTOL, atol=BILL_ATOL,
                            err_msg=f"scenario {s}, {name}")
        assert_allclose(many["total"].iloc[s], total, rtol=BILL_RTOL, err_msg=f"scenario {s}")
        assert sorted(many.attrs["flags"][s]) == flagged, s


# --------------------------------------------------------------------------------------------------
# 1. bill_many: blocks, broadcast rows, one-interval windows, hourly intervals
# --------------------------------------------------------------------------------------------------


class TestBillManyBlocks:
    # 45 days of 15-min data: 4,320 steps, so a block of 2**17 scenario-steps holds 30 scenarios and the
    # 33 scenarios below cross one block boundary (30 + 3). The month boundaries (Jan-Feb-Mar) exercise
    # the ratchet and the monthly allowances.
    N_STEPS = 45 * 96
    N_SCENARIOS = 33

    @pytest.fixture(scope="class")
    @classmethod
    def meters(cls):
        return _meters(cls.N_SCENARIOS, cls.N_STEPS, seed=11)

    def test_a_block_boundary_falls_inside_the_scenario_list(self):
        per_block = billing._CHUNK_ELEMENTS // self.N_STEPS
        assert billing._CHUNK_ELEMENTS == 2**17  # the block size documented in docs/scale.md
        assert 0 < per_block < self.N_SCENARIOS

    @pytest.mark.parametrize("name", EXAMPLES + ["ALL_CLAUSES"])
    def test_blocks_agree_with_each_scenario_alone(self, meters, name):
        t = _tariff(ALL_CLAUSES) if name == "ALL_CLAUSES" else _example(name)
        index = pd.date_range("2025-01-20", periods=self.N_STEPS, freq="15min", tz=t.time_zone)
        p, q = meters
        _assert_matches_alone(bill_many(t, index, p, q), _alone(t, index, p, q))

    @pytest.mark.parametrize("rows_per_block", [1, 4, 7])
    def test_block_size_does_not_change_a_row(self, meters, monkeypatch, rows_per_block):
        # each scenario is priced on its own (row-wise operations): any block size gives the same bits
        t = _tariff(ALL_CLAUSES)
        index = pd.date_range("2025-01-20", periods=self.N_STEPS, freq="15min", tz=t.time_zone)
        p, q = meters[0][:9], meters[1][:9]
        default = bill_many(t, index, p, q)
        monkeypatch.setattr(billing, "_CHUNK_ELEMENTS", rows_per_block * self.N_STEPS)
        small = bill_many(t, index, p, q)
        assert list(small.columns) == list(default.columns)
        assert_array_equal(small.to_numpy(), default.to_numpy())
        assert small.attrs["flags"] == default.attrs["flags"]


class TestBillManySharedRows:
    N_STEPS = 40 * 24

    @pytest.fixture(scope="class")
    @classmethod
    def setup(cls):
        t = _tariff(ALL_CLAUSES)
        index = pd.date_range("2025-02-10", periods=cls.N_STEPS, freq="h", tz=t.time_zone)
        p, q = _meters(5, cls.N_STEPS, seed=5)
        return t, index, p, q

    @pytest.mark.parametrize("n", [1, 3, 200])  # 200 rows of 960 steps cross a 2**17 block boundary (136 rows)
    def test_both_broadcast_give_one_row_per_scenario(self, setup, n):
        # the defect fixed in e5292b5: p and q both one row broadcast returned one row, not n
        t, index, p, q = setup
        many = bill_many(t, index, np.broadcast_to(p[0], (n, self.N_STEPS)), np.broadcast_to(q[0], (n, self.N_STEPS)))
        assert len(many) == n and len(many.attrs["flags"]) == n
        (items, total, flagged), = _alone(t, index, p[:1], q[:1])
        assert_allclose(many["total"].to_numpy(), np.full(n, total), rtol=BILL_RTOL)
        for name in many.columns.drop("total"):
            assert_allclose(many[name].to_numpy(), items.get(name, 0.0), rtol=BILL_RTOL, atol=BILL_ATOL, err_msg=name)
        assert all(sorted(f) == flagged for f in many.attrs["flags"])

    @pytest.mark.parametrize("shared", ["p", "q"])
    def test_one_broadcast_quantity_equals_the_materialised_array(self, setup, monkeypatch, shared):
        # reactive-only scenarios (one kW row for all) and the reverse: priced once, the same bits as the
        # materialised arrays, across block boundaries (blocks of 2 rows)
        t, index, p, q = setup
        if shared == "p":
            p = np.broadcast_to(p[0], q.shape)
        else:
            q = np.broadcast_to(q[0], p.shape)
        dense = bill_many(t, index, np.array(p), np.array(q))
        monkeypatch.setattr(billing, "_CHUNK_ELEMENTS", 2 * self.N_STEPS)
        broadcast = bill_many(t, index, p, q)
        assert_array_equal(broadcast.to_numpy(), dense.to_numpy())
        assert broadcast.attrs["flags"] == dense.attrs["flags"]
        _assert_matches_alone(broadcast, _alone(t, index, np.array(p), np.array(q)))

    def test_nan_in_a_broadcast_row_raises(self, setup):
        t, index, p, q = setup
        row = p[0].copy()
        row[17] = np.nan
        with pytest.raises(ValueError, match="NaN"):
            bill_many(t, index, np.broadcast_to(row, (4, self.N_STEPS)), q[:4])

    @pytest.mark.parametrize("values, finite", [
        ([1.0, 2.0, 3.0], True),
        ([1e308, 1e308, -5.0], True),  # the one-pass sum overflows to inf: the element test decides
        ([1.0, np.inf, 3.0], False),
        ([np.nan, 2.0, 3.0], False),
        ([np.inf, -np.inf, 0.0], False),
    ])
    def test_finite_check_in_one_pass_agrees_with_the_element_test(self, values, finite):
        a = np.array(values)
        assert bool(np.all(np.isfinite(a))) is finite  # plain numpy reference
        assert billing._all_finite(a) is finite


class TestOneIntervalWindowsAndHourlySteps:
    """Demand windows of one interval (the values are the window means) and 1-h steps (kWh = kW)."""

    TINY = '''
[tariff]
name = "tiny (invented)"
currency = "EUR"
[[periods]]
code = "all"
[energy]
price_per_kwh = { all = 0.10 }
[[demand]]
name = "d"
price_per_kw_month = 10.0
window_min = WINDOW
'''
    HOURLY_P = [100.0, 300.0, 200.0, 250.0, 50.0, 0.0]

    def _bill(self, window: int, freq: str, p):
        t = _tariff(self.TINY.replace("WINDOW", str(window)))
        index = pd.date_range("2025-03-04", periods=len(p), freq=freq, tz="UTC")
        return bill(t, index, p, np.zeros(len(p)))

    @pytest.mark.parametrize("window", [15, 60])
    def test_hourly_data_by_hand(self, window):
        # hand calculation: 100+300+200+250+50+0 = 900 kWh x 0.10 = 90.00 EUR; each hour is one window
        # (a 15-min window cannot be seen in hourly data, so the hour counts), peak 300 kW x 10.00 = 3000.00 EUR
        b = self._bill(window, "h", self.HOURLY_P)
        assert_allclose(bill_total(b), 3090.0, rtol=0, atol=1e-9)
        assert_allclose(b.loc[b["line_item"] == "demand:d", "quantity"].sum(), 300.0, rtol=0, atol=1e-9)

    def test_same_meter_at_15_min_takes_the_general_path(self):
        # the same hourly means held over four 15-min intervals: 60-min windows of four intervals (window
        # means by reduceat, 0.25-h steps); hand calculation as above: 3090.00 EUR
        b = self._bill(60, "15min", np.repeat(self.HOURLY_P, 4))
        assert_allclose(bill_total(b), 3090.0, rtol=0, atol=1e-9)

    @pytest.mark.parametrize("window, peak_kw", [(15, 400.0), (30, 250.0)])
    def test_15_min_data_by_hand(self, window, peak_kw):
        # hand calculation: [100, 400, 200, 300] kW over 15 min = 250 kWh -> 25.00 EUR; 15-min windows are the
        # intervals (peak 400 kW); 30-min windows average pairs: (100+400)/2 = 250, (200+300)/2 = 250 kW
        b = self._bill(window, "15min", [100.0, 400.0, 200.0, 300.0])
        assert_allclose(b.loc[b["line_item"] == "demand:d", "quantity"].sum(), peak_kw, rtol=0, atol=1e-9)
        assert_allclose(bill_total(b), 25.0 + 10.0 * peak_kw, rtol=0, atol=1e-9)

    def test_kva_demand_of_one_interval_windows_by_hand(self):
        # hand calculation: sqrt(300^2 + 400^2) = sqrt(400^2 + 300^2) = 500 kVA x 3.00 = 1500.00 EUR, and the
        # kW demand with its peak-window PF adjustment: peak 400 kW at PF 400/500 = 0.8 < 0.92 ->
        # 400 x 0.92 / 0.8 = 460 kW x 9.00 = 4140.00 EUR (the 400 kW hour is 08:00 local, a "day" hour)
        t = _tariff(ALL_CLAUSES)
        index = pd.date_range("2025-03-04 06:00", periods=2, freq="h", tz="UTC")  # 07:00 and 08:00 in Berlin
        b = bill(t, index, [300.0, 400.0], [400.0, 300.0])
        items = b.groupby("line_item")["quantity"].sum()
        assert_allclose(items["demand:kva"], 500.0, rtol=1e-15)
        assert_allclose(items["demand:kw"] + items["pf adjustment:kw"], 460.0, rtol=1e-12)

    def test_whole_tariff_hourly_equals_the_same_meter_at_15_min(self):
        # every clause of ALL_CLAUSES through the one-interval-window and 1-h paths against the general
        # ones (60-min windows of four 15-min intervals, 0.25-h steps), over three months (ratchet)
        t = _tariff(ALL_CLAUSES)
        n_h = 75 * 24
        p, q = _meters(3, n_h, seed=21)
        hourly = pd.date_range("2025-01-01", periods=n_h, freq="h", tz=t.time_zone)
        quarter = pd.date_range("2025-01-01", periods=4 * n_h, freq="15min", tz=t.time_zone)
        a = bill_many(t, hourly, p, q)
        b = bill_many(t, quarter, np.repeat(p, 4, axis=1), np.repeat(q, 4, axis=1))
        assert list(a.columns) == list(b.columns)
        assert_allclose(a.to_numpy(), b.to_numpy(), rtol=BILL_RTOL, atol=BILL_ATOL)
        assert a.attrs["flags"] == b.attrs["flags"] and any(a.attrs["flags"])


# --------------------------------------------------------------------------------------------------
# A small two-site case for the machines (interval and load-state assets, existing drives, a throttled
# pump, large motors for the wound-field option that follows its site, a stepped and a fixed bank)
# --------------------------------------------------------------------------------------------------


def _asset(aid, site, app, kw, poles, control, profile="", hours="", load=""):
    return [aid, site, f"{app} {aid}", app, kw, poles, "50", "400" if float(kw) < 200 else "6600", "IE2", "", "", "",
            "2008", "1", control, profile, hours, load, "medium"]


ASSETS = [
    _asset("P1", "S1", "pump", "30", "4", "throttled", "LP1"),
    _asset("K1", "S1", "compressor", "630", "4", "fixed", "LP2"),
    _asset("P2", "S1", "pump", "22", "2", "drive", "LP2"),
    _asset("C1", "S1", "compressor", "55", "2", "fixed", hours="5000", load="80"),
    _asset("F1", "S1", "fan", "15", "4", "fixed", "LP1"),
    _asset("M1", "S1", "mixer", "37", "4", "fixed", "D1"),
    _asset("V1", "S1", "conveyor", "11", "4", "fixed", "LP2"),
    _asset("Q1", "S2", "pump", "45", "4", "fixed", "LP2"),
    _asset("X1", "S2", "crusher", "710", "6", "fixed", "LP1"),
    _asset("G1", "S2", "fan", "18.5", "4", "drive", "LP1"),
]
SITE_TARIFFS = {"S1": "example_tou_kw_reactive_ratchet.toml", "S2": "example_kva_demand.toml"}


def _profiles() -> list[list[str]]:
    rows = []
    for d in range(28):
        for h in range(24):
            rows.append(["LP1", f"2025-01-{1 + d:02d} {h:02d}:00", f"{45 + 10 * (h % 4) + d % 3}"])
            rows.append(["LP2", f"2025-01-{1 + d:02d} {h:02d}:00", f"{70 + 5 * ((h + d) % 5)}"])
    return rows


@pytest.fixture(scope="module")
def case(tmp_path_factory):
    folder = tmp_path_factory.mktemp("paths")
    cb.write_case(folder, assets=ASSETS, sites=[["S1", "Works", "80", "0.85"], ["S2", "Quarry", "40", "0.9"]],
                  capacitors=[["S1", "B1", "150", "stepped", "25", "0.95"], ["S2", "B2", "30", "fixed", "", ""]],
                  duty=[["D1", "90", "3000"], ["D1", "50", "2500"]], profiles=_profiles())
    (folder / "tariffs").mkdir()
    for name in SITE_TARIFFS.values():
        shutil.copyfile(TARIFF_DIR / name, folder / "tariffs" / name)
    lines = (folder / "sites.csv").read_text(encoding="utf-8").splitlines()
    lines = [lines[0] + ",tariff_file"] + [line + "," + SITE_TARIFFS[line.split(",")[0]] for line in lines[1:]]
    (folder / "sites.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    loaded, problems = load_case(folder, mode="strict")
    assert loaded is not None, problems
    return loaded


@pytest.fixture(scope="module")
def index(case):
    return case_index(case)


def _fresh_site(sub, index, chunk_assets):
    """A one-site case run block by block the slow way: every block with fresh arrays, its own per-asset
    numbers, loads and calibrated motors, today's motors run again in the second pass. Returns the blocks
    [(rows, OperatingResult)] and the site totals of today's motors."""
    blocks = asset_blocks(len(sub.assets), len(index), chunk_assets)
    if len(blocks) == 1:
        part = operation._operate_block(sub, index, blocks[0])
        return [(blocks[0], part)], (part.p_kw[0].sum(axis=0), part.q_kvar[0].sum(axis=0))
    today = [operation._operate_block(sub, index, rows, only_today=True) for rows in blocks]
    totals = (np.concatenate([t.p_kw[0] for t in today]).sum(axis=0), np.concatenate([t.q_kvar[0] for t in today]).sum(axis=0))
    return [(rows, operation._operate_block(sub, index, rows, site_totals=totals)) for rows in blocks], totals


def _assembled(parts, name):
    """Per-asset or per-interval field of block results gathered in site order."""
    values = [getattr(part, name) for _, part in parts]
    return np.concatenate(values, axis=1 if name in PER_INTERVAL else 0)


def _flag_set(flags: pd.DataFrame) -> list[tuple]:
    return sorted(map(tuple, flags[["asset_id", "option_id", "flag"]].to_numpy(dtype=str).tolist()))


# --------------------------------------------------------------------------------------------------
# 2. Per-site buffers reused block after block
# --------------------------------------------------------------------------------------------------


class TestReusedBlockBuffers:
    @pytest.mark.parametrize("chunk_assets", [2, 3])
    def test_site_blocks_equal_fresh_blocks_bit_for_bit(self, case, index, chunk_assets):
        for site_id, _ in site_partition(case):
            sub = site_case(case, site_id)
            fresh, fresh_totals = _fresh_site(sub, index, chunk_assets)
            # S1 (7 assets) in several blocks, the last one smaller; S2 (3 assets) in one block of 3
            assert len(fresh) == -(-len(sub.assets) // chunk_assets)
            got = []
            for rows, block, totals in site_blocks(sub, index, chunk_assets):
                assert_array_equal(totals[0], fresh_totals[0])
                assert_array_equal(totals[1], fresh_totals[1])
                # copied now: the buffers are reused by the next block (site_blocks' Warnings)
                got.append((rows, {name: np.array(getattr(block, name)) for name in PER_INTERVAL + YEARLY},
                            _flag_set(block.flags)))
            assert len(got) == len(fresh)
            for (rows, values, flags), (fresh_rows, part) in zip(got, fresh):
                assert_array_equal(rows, fresh_rows)
                for name in PER_INTERVAL + YEARLY:
                    assert_array_equal(values[name], getattr(part, name), err_msg=f"{site_id} {name}")
                assert flags == _flag_set(part.flags)

    def test_every_element_of_a_reused_buffer_is_written(self, case, index, monkeypatch):
        # the buffers are not cleared between blocks (d6bf2dd: "every element each block writes"); filled
        # with NaN before every block, any element left unwritten would show
        real = operation._BlockBuffers.views

        def poisoned(self, n_options, n_assets, n_steps):
            p, q = real(self, n_options, n_assets, n_steps)
            p.fill(np.nan)
            q.fill(np.nan)
            return p, q

        monkeypatch.setattr(operation._BlockBuffers, "views", poisoned)
        sub = site_case(case, "S1")
        fresh, _ = _fresh_site(sub, index, 3)
        for (rows, block, _), (_, part) in zip(site_blocks(sub, index, 3), fresh):
            for name in PER_INTERVAL + YEARLY:
                assert_array_equal(getattr(block, name), getattr(part, name), err_msg=name)

    def test_several_blocks_equal_one_block(self, case, index):
        # one-block run against blocks of 2 (its today's totals, first pass and buffers): the same bits for
        # every option, new induction motors included (their speed-coupling fixed point stops element by
        # element, so the other assets of a block do not move their values)
        for site_id, _ in site_partition(case):
            sub = site_case(case, site_id)
            one = operate_site(sub, index)
            many = operate_site(sub, index, chunk_assets=2)
            assert (one.technologies == "induction").any()
            for name in PER_INTERVAL + ("energy_kwh", "shaft_energy_kwh", "losses_kwh", "lagging_kvarh",
                                        "leading_kvarh", "mean_speed_rpm"):
                assert_array_equal(getattr(one, name), getattr(many, name), err_msg=name)
            for name in ("running_h", "capacitor_q_kvar", "applies", "interval_data"):
                assert_array_equal(getattr(one, name), getattr(many, name), err_msg=name)
            # the same flags; a one-block run lists them in the order found, a merged run by asset
            assert _flag_set(one.flags) == _flag_set(many.flags)

    def test_a_kept_block_array_is_overwritten_by_the_next_block(self, case, index):
        # what site_blocks' Warnings say, so that a new caller cannot miss it: the per-interval arrays of
        # a yielded block are the site's buffers; the yearly fields are the block's own
        sub = site_case(case, "S1")
        blocks = site_blocks(sub, index, chunk_assets=3)
        _, first, _ = next(blocks)
        kept_p, kept_energy = first.p_kw, first.energy_kwh
        p_then, energy_then = kept_p.copy(), kept_energy.copy()
        _, second, _ = next(blocks)
        assert np.shares_memory(kept_p, second.p_kw)
        assert not np.array_equal(kept_p, p_then)
        assert_array_equal(kept_energy, energy_then)
        blocks.close()

    @pytest.mark.parametrize("today_only", [False, True])
    def test_site_physics_copies_or_prices_each_block_in_time(self, case, index, today_only):
        # the caller of site_blocks in the physics: its merged arrays and savings equal those of fresh
        # blocks priced all at once (site_savings on the assembled arrays; bill blocks are exact)
        for site_id, _ in site_partition(case):
            sub = site_case(case, site_id)
            op, part = scenario.site_physics(sub, index, 35.0, chunk_assets=2, today_only=today_only)
            fresh, _ = _fresh_site(sub, index, 2)
            p, q = _assembled(fresh, "p_kw"), _assembled(fresh, "q_kvar")
            if today_only:
                assert op.p_kw.shape == (1,) + p.shape[1:]
                assert_array_equal(op.p_kw[0], p[0])
                assert_array_equal(op.q_kvar[0], q[0])
            else:
                assert_array_equal(op.p_kw, p)
                assert_array_equal(op.q_kvar, q)
            for name in YEARLY:
                assert_array_equal(getattr(op, name), _assembled(fresh, name), err_msg=name)
            setup = site_setups(sub, index)[site_id]
            applies = _assembled(fresh, "applies")
            expected = site_savings(setup, index, op.interval_h, p, q, applies, op.technologies, 35.0)
            for name, values in expected.items():
                assert np.array_equal(part[name], values, equal_nan=True), f"{site_id} {name}"

    @pytest.mark.parametrize("sites, chunk_assets", [(("S1", "S2"), 2), (("S1", "S2"), None), (("S1",), 3),
                                                     (("S1",), None)])
    def test_fleet_physics_takes_each_block_before_the_next(self, case, index, sites, chunk_assets):
        # the local engine's path (site_physics writing into the fleet's gatherer, 1552b9a): each block goes
        # straight into the fleet's arrays before the buffers are reused; a one-site case of one block is
        # adopted as it is. Against fresh blocks priced all at once.
        fleet = case if len(sites) == 2 else site_case(case, sites[0])
        phys = scenario.physics(fleet, 35.0, chunk_assets=chunk_assets, dense=True)
        op = phys.operation
        for site_id, rows in site_partition(fleet):
            sub = site_case(fleet, site_id)
            fresh, _ = _fresh_site(sub, index, chunk_assets)
            p, q = _assembled(fresh, "p_kw"), _assembled(fresh, "q_kvar")
            assert_array_equal(op.p_kw[:, rows], p, err_msg=site_id)
            assert_array_equal(op.q_kvar[:, rows], q, err_msg=site_id)
            for name in YEARLY:
                assert_array_equal(getattr(op, name)[rows], _assembled(fresh, name), err_msg=name)
            setup = site_setups(sub, index)[site_id]
            expected = site_savings(setup, index, op.interval_h, p, q, _assembled(fresh, "applies"), op.technologies, 35.0)
            assert np.array_equal(phys.savings.saving[rows], expected["saving"]), site_id
            assert np.array_equal(phys.savings.reactive_saving[rows], expected["reactive_saving"]), site_id
            assert np.array_equal(phys.savings.equivalent_bank_q_kvar[rows], expected["equivalent_bank_q_kvar"],
                                  equal_nan=True), site_id

    def test_one_thread_reuses_its_block_memory_from_site_to_site(self, case, index, monkeypatch):
        # one thread works both sites with the same block memory (no fresh pages per site); the results
        # are those of two threads, each with its own (checked against fresh blocks in the test above)
        seen = []
        real = scenario.site_blocks

        def spy(*args, buffers=None, **kwargs):
            seen.append(buffers)
            yield from real(*args, buffers=buffers, **kwargs)

        monkeypatch.setattr(scenario, "site_blocks", spy)
        one = scenario.physics(case, 35.0, chunk_assets=2, dense=True, threads=1)
        assert len(seen) == 2 and seen[0] is not None and seen[0] is seen[1]
        two = scenario.physics(case, 35.0, chunk_assets=2, dense=True, threads=2)
        for name in PER_INTERVAL + YEARLY:
            assert_array_equal(getattr(one.operation, name), getattr(two.operation, name), err_msg=name)
        assert_array_equal(one.savings.saving, two.savings.saving)
        assert_array_equal(one.savings.reactive_saving, two.savings.reactive_saving)

    def test_curve_blocks_default_to_the_larger_chunk(self, case, index, monkeypatch):
        # blocks that keep their options as tables are CURVE_CHUNK_ELEMENTS asset-steps by default (here 3
        # assets' worth: S1's 7 assets in blocks of 3, 3, 1); the others CHUNK_ELEMENTS (S1 in one block)
        monkeypatch.setattr(operation, "CURVE_CHUNK_ELEMENTS", 3 * len(index))
        sub = site_case(case, "S1")
        sizes = [len(rows) for rows, _, _ in site_blocks(sub, index, curves=True)]
        assert sizes == [3, 3, 1]
        assert [len(rows) for rows, _, _ in site_blocks(sub, index)] == [len(sub.assets)]

    def test_per_interval_models_run_in_bounded_parts(self, case, index, monkeypatch):
        # a block larger than CHUNK_ELEMENTS (as the curve blocks are) evaluates its per-interval models in
        # parts of at most that many asset-steps, here two assets (every option per interval, the grid of
        # loads switched off; the wound-field machine on the 630 kW compressor follows the site in its
        # part): the same bits and flags as one part
        monkeypatch.setattr(operation, "TABULATE", False)
        sub = site_case(case, "S1")
        whole = operate_site(sub, index, chunk_assets=10)
        monkeypatch.setattr(operation, "CHUNK_ELEMENTS", 2 * len(index))
        seen = []
        real = operation._evaluate

        def spy(option, arr, existing, load, site_other=None):
            if load.p_ref_kw.shape[1] == len(index):  # per interval (not the load-state assets)
                seen.append(load.p_ref_kw.shape[0])
            return real(option, arr, existing, load, site_other)

        monkeypatch.setattr(operation, "_evaluate", spy)
        parts = operate_site(sub, index, chunk_assets=10)
        assert seen and max(seen) == 2 and 1 in seen  # 5 interval assets: parts of 2, 2 and 1
        for name in PER_INTERVAL + YEARLY:
            assert_array_equal(getattr(parts, name), getattr(whole, name), err_msg=name)
        assert _flag_set(parts.flags) == _flag_set(whole.flags)

    def test_scenario_blocks_of_one_give_the_same_savings(self, case, index):
        # SiteSavings' blocks of SCENARIO_BLOCK_ELEMENTS (14 asset-options of an hourly year here) against
        # every asset-option billed alone; site S1 has a stepped bank, so the in-place controller runs on
        # blocks of scenarios
        sub = site_case(case, "S1")
        fresh, _ = _fresh_site(sub, index, 2)
        p, q, applies = _assembled(fresh, "p_kw"), _assembled(fresh, "q_kvar"), _assembled(fresh, "applies")
        setup = site_setups(sub, index)["S1"]
        technologies = fresh[0][1].technologies
        default = site_savings(setup, index, 1.0, p, q, applies, technologies, 35.0)
        alone = site_savings(setup, index, 1.0, p, q, applies, technologies, 35.0, block_scenarios=1)
        assert int(applies[:, 1:].sum()) > 14  # more changed pairs than one default block
        for name in default:
            assert np.array_equal(default[name], alone[name], equal_nan=True), name


# --------------------------------------------------------------------------------------------------
# 3. The compact interval store
# --------------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def dense(case):
    return scenario.physics(case, 35.0, chunk_assets=2, dense=True)


@pytest.fixture(scope="module")
def compact(case):
    """The compact store recomputing every row it is asked for (no curve book kept)."""
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(operation, "KEPT_BOOKS_BUDGET_BYTES", 0)
        return scenario.physics(case, 35.0, chunk_assets=2, dense=False)


@pytest.fixture(scope="module")
def booked(case):
    """The compact store reading its rows through the sites' kept curve books."""
    return scenario.physics(case, 35.0, chunk_assets=2, dense=False)


def _plan_choice(op) -> np.ndarray:
    """Several options across the fleet: each asset's applicable options in turn, today's for every fourth."""
    choice = np.zeros(len(op.asset_ids), dtype=int)
    for j in range(len(choice)):
        usable = np.flatnonzero(op.applies[j, 1:]) + 1
        choice[j] = 0 if j % 4 == 3 else usable[j % len(usable)]
    return choice


@pytest.fixture
def block_runs(monkeypatch):
    """The blocks run by ``operation._operate_block`` from here on: one entry per run, its ``wanted`` options."""
    runs = []
    real = operation._operate_block

    def spy(*args, **kwargs):
        runs.append(kwargs.get("wanted"))
        return real(*args, **kwargs)

    monkeypatch.setattr(operation, "_operate_block", spy)
    return runs


class TestCompactStore:
    def test_the_plan_choice_mixes_options(self, dense):
        choice = _plan_choice(dense.operation)
        assert len(set(choice.tolist()) - {0}) >= 4 and (choice == 0).any()

    @pytest.mark.parametrize("plan, threads", [(False, 1), (True, 1), (True, 2)])
    def test_site_meters_and_bills_equal_the_dense_ones(self, case, dense, compact, plan, threads):
        # with two threads, two sites are recomputed at once, each thread with its own cache
        d, c = dense.operation, compact.operation
        assert isinstance(c.p_kw, operation.SiteIntervalStore) and isinstance(d.p_kw, np.ndarray)
        assert len(np.unique(d.site_ids)) >= 2
        choice = _plan_choice(d) if plan else np.zeros(len(d.asset_ids), dtype=int)
        meters_d, bills_d = meter_and_bills(case, d, choice)
        meters_c, bills_c = meter_and_bills(case, c, choice, threads=threads)
        assert list(meters_c) == list(meters_d)
        for site_id, meter in meters_d.items():
            assert_array_equal(meters_c[site_id].p_kw, meter.p_kw, err_msg=site_id)
            assert_array_equal(meters_c[site_id].q_kvar, meter.q_kvar, err_msg=site_id)
        pd.testing.assert_frame_equal(bills_c, bills_d, check_exact=True)

    def test_todays_power_in_a_temporary_file_gives_the_same_bills(self, case, dense, monkeypatch):
        # above the memory budget today's per-interval power lives in a mapped temporary file: same numbers
        monkeypatch.setattr(operation, "TODAY_IN_MEMORY_BUDGET_BYTES", 0)
        spilled = scenario.physics(case, 35.0, chunk_assets=2, dense=False).operation
        assert isinstance(spilled.p_kw._today, np.memmap) and isinstance(spilled.q_kvar._today, np.memmap)
        choice = _plan_choice(dense.operation)
        _, bills_d = meter_and_bills(case, dense.operation, choice)
        _, bills_s = meter_and_bills(case, spilled, choice, threads=2)
        pd.testing.assert_frame_equal(bills_s, bills_d, check_exact=True)

    def test_todays_power_below_the_budget_stays_in_memory(self, compact):
        assert not isinstance(compact.operation.p_kw._today, np.memmap)

    def test_todays_rows_written_in_place_equal_each_sites_own_run(self, case, index, dense, compact, monkeypatch):
        # both sites' positions are consecutive, so their blocks write today's motors straight into the
        # fleet's rows (dense and compact): the same bits as each site run on its own; the merger copies
        # no today's row of theirs
        copied = []
        real = operation._Merger.add

        def spy(self, rows, part):
            if self.prewritten is None or not self.prewritten[rows].all():
                copied.append(rows)
            return real(self, rows, part)

        monkeypatch.setattr(operation._Merger, "add", spy)
        runs = {kind: scenario.physics(case, 35.0, chunk_assets=2, dense=kind == "dense").operation
                for kind in ("dense", "compact")}
        assert copied == []
        for site_id, rows in site_partition(case):
            assert_array_equal(rows, np.arange(rows[0], rows[-1] + 1))
            own = operate_site(site_case(case, site_id), index, chunk_assets=2)
            for kind, op in runs.items():
                today_p = op.p_kw[0] if kind == "dense" else op.p_kw._today
                today_q = op.q_kvar[0] if kind == "dense" else op.q_kvar._today
                assert_array_equal(today_p[rows], own.p_kw[0], err_msg=kind)
                assert_array_equal(today_q[rows], own.q_kvar[0], err_msg=kind)
        assert_array_equal(runs["dense"].p_kw, dense.operation.p_kw)

    def test_chosen_totals_are_the_gathered_rows_summed(self, dense, compact):
        # a site meter sums the chosen rows one by one instead of gathering them first: the same bits as
        # numpy's sum over the gathered rows, from the dense array and from the compact store
        from models.bill_savings import _chosen_total

        d, c = dense.operation, compact.operation
        choice = _plan_choice(d)
        for site_id in np.unique(d.site_ids):
            m = np.flatnonzero(d.site_ids == site_id)
            for name in PER_INTERVAL:
                expected = getattr(d, name)[choice[m], m].sum(axis=0)
                assert_array_equal(_chosen_total(getattr(d, name), choice[m], m), expected, err_msg=name)
                assert_array_equal(_chosen_total(getattr(c, name), choice[m], m), expected, err_msg=name)

    def test_today_rows_are_views_for_consecutive_positions_only(self):
        merger = operation._Merger(6, 4, dense=False)
        p, q = merger.today_rows(np.array([2, 3, 4]), 3)
        p[...], q[...] = 1.0, 2.0
        assert (merger.fields["p_kw"][2:5] == 1.0).all() and (merger.fields["q_kvar"][2:5] == 2.0).all()
        assert merger.prewritten.tolist() == [False, False, True, True, True, False]
        assert merger.today_rows(np.array([0, 5]), 3) is None

    def test_rows_of_the_store_equal_the_dense_rows(self, dense, compact):
        d, c = dense.operation, compact.operation
        choice, rows = _plan_choice(d), np.arange(len(d.asset_ids))
        for name in PER_INTERVAL:
            assert_array_equal(getattr(c, name)[choice, rows], getattr(d, name)[choice, rows], err_msg=name)
        # a kVAr request for the same assets under other options, right after a kW request, is not served
        # from the kept request (same rows per site and block, different options)
        other = choice.copy()
        for j in np.flatnonzero(choice > 0):
            usable = np.flatnonzero(d.applies[j, 1:]) + 1
            other[j] = usable[(np.flatnonzero(usable == choice[j])[0] + 1) % len(usable)]
        assert (other != choice).sum() == (choice > 0).sum()
        for site_id in np.unique(d.site_ids):  # one site at a time, as a site meter asks
            m = np.flatnonzero(d.site_ids == site_id)
            assert_array_equal(c.p_kw[choice[m], m], d.p_kw[choice[m], m])
            assert_array_equal(c.q_kvar[other[m], m], d.q_kvar[other[m], m])
            assert_array_equal(c.p_kw[other[m], m], d.p_kw[other[m], m])
            assert_array_equal(c.q_kvar[choice[m], m], d.q_kvar[choice[m], m])

    def test_kvar_rows_come_from_the_kw_recomputation(self, case, compact, block_runs):
        # a site meter asks for the kW of the chosen options, then their kVAr; the chosen assets of a site
        # run once, in blocks of 2 of them (register order). Hand count: ceil(chosen assets of the site / 2).
        op = compact.operation
        choice = _plan_choice(op)
        op.p_kw._recompute._cached = None
        op.p_kw._recompute._request = None
        expected = 0
        for _, rows in site_partition(case):
            expected += -(-int((choice[rows] > 0).sum()) // 2)
        meter_and_bills(case, op, choice)
        assert expected >= 4 and len(block_runs) == expected

    def test_scattered_pairs_equal_the_dense_rows(self, dense, compact):
        # any subset of a site's pairs, in any order, gives the dense run's rows bit for bit: the blocks
        # are made of the assets asked for only, with the site's totals of today's motors
        d, c = dense.operation, compact.operation
        rng = np.random.default_rng(7)
        for site_id in np.unique(d.site_ids):
            m = np.flatnonzero(d.site_ids == site_id)
            assets = rng.permutation(m)[: max(1, len(m) // 2)]
            options = np.array([rng.choice(np.flatnonzero(d.applies[j])) for j in assets])
            c.p_kw._recompute._cached = None
            c.p_kw._recompute._request = None
            assert_array_equal(c.p_kw[options, assets], d.p_kw[options, assets], err_msg=site_id)
            assert_array_equal(c.q_kvar[options, assets], d.q_kvar[options, assets], err_msg=site_id)

    def test_rows_kept_while_asked_are_not_recomputed(self, case, dense, compact, block_runs):
        d, c = dense.operation, compact.operation
        choice = _plan_choice(d)
        calls = block_runs
        with operation.kept_rows(c):
            first, _ = meter_and_bills(case, c, choice)
            ran = len(calls)
            c.p_kw._recompute._cached = None
            c.p_kw._recompute._request = None
            again, _ = meter_and_bills(case, c, choice)
            assert ran > 0 and len(calls) == ran  # the second reading recomputes nothing
            # the rows read from memory are the dense run's
            for site_id in np.unique(d.site_ids):
                m = np.flatnonzero(d.site_ids == site_id)
                assert_array_equal(c.p_kw[choice[m], m], d.p_kw[choice[m], m])
                assert_array_equal(c.q_kvar[choice[m], m], d.q_kvar[choice[m], m])
                assert_array_equal(again[site_id].p_kw, first[site_id].p_kw)
        # let go on leaving: reading again recomputes
        assert c.p_kw._recompute._kept is None
        c.p_kw._recompute._cached = None
        c.p_kw._recompute._request = None
        meter_and_bills(case, c, choice)
        assert len(calls) == 2 * ran

    def test_rows_read_through_kept_books_equal_the_dense_rows(self, case, dense, booked, compact, block_runs):
        # with the sites' curve books kept, every row asked for is read through them (no block run again),
        # the dense run's bits; a store without them recomputes
        d, b = dense.operation, booked.operation
        assert b.p_kw._recompute._books_bytes > 0 and compact.operation.p_kw._recompute._books == {}
        rng = np.random.default_rng(11)
        for site_id in np.unique(d.site_ids):
            m = np.flatnonzero(d.site_ids == site_id)
            assets = rng.permutation(m)
            options = np.array([rng.choice(np.flatnonzero(d.applies[j])) for j in assets])
            b.p_kw._recompute._request = None
            assert_array_equal(b.p_kw[options, assets], d.p_kw[options, assets], err_msg=site_id)
            assert_array_equal(b.q_kvar[options, assets], d.q_kvar[options, assets], err_msg=site_id)
        choice = _plan_choice(d)
        _, bills_d = meter_and_bills(case, d, choice)
        _, bills_b = meter_and_bills(case, b, choice, threads=2)
        pd.testing.assert_frame_equal(bills_b, bills_d, check_exact=True)
        assert block_runs == []

    def test_books_beyond_the_budget_are_not_kept(self, case, dense, monkeypatch):
        # a budget that holds the first site's books only: that site is read through them, the other site
        # recomputes (its books would pass the budget); rows are the dense run's either way
        seen = []
        real = operation._SiteRecompute.keep_book

        def spy(self, site_id, rows, book):
            kept = real(self, site_id, rows, book)
            seen.append((site_id, sum(int(a.nbytes) for a in book.arrays()), kept))
            return kept

        monkeypatch.setattr(operation._SiteRecompute, "keep_book", spy)
        scenario.physics(case, 35.0, chunk_assets=2, dense=False, threads=1)
        first = seen[0][0]
        budget = sum(size for site_id, size, _ in seen if site_id == first)
        seen.clear()
        monkeypatch.setattr(operation, "KEPT_BOOKS_BUDGET_BYTES", budget)
        part = scenario.physics(case, 35.0, chunk_assets=2, dense=False, threads=1).operation
        recompute = part.p_kw._recompute
        assert {site_id for site_id, _, kept in seen if kept} == {first}
        assert recompute._books_bytes == budget
        kept_sites = [k for k in range(len(recompute.partition)) if recompute._booked(k) is not None]
        assert [recompute.partition[k][0] for k in kept_sites] == [first]
        d = dense.operation
        choice = _plan_choice(d)
        rows = np.arange(len(d.asset_ids))
        assert_array_equal(part.p_kw[choice, rows], d.p_kw[choice, rows])
        assert_array_equal(part.q_kvar[choice, rows], d.q_kvar[choice, rows])

    def test_a_site_whose_books_do_not_all_fit_keeps_none(self, case, dense, monkeypatch):
        # blocks of 2 assets: a budget that holds the first site's first block only; its second block does
        # not fit, so the first is let go too (a site is read through all its books or recomputed); nothing
        # is left kept that no read uses
        sizes = []
        real = operation._SiteRecompute.keep_book

        def spy(self, site_id, rows, book):
            sizes.append(sum(int(a.nbytes) for a in book.arrays()))
            return real(self, site_id, rows, book)

        monkeypatch.setattr(operation._SiteRecompute, "keep_book", spy)
        monkeypatch.setattr(operation, "KEPT_BOOKS_BUDGET_BYTES", 0)
        scenario.physics(case, 35.0, chunk_assets=2, dense=False, threads=1)
        first = sizes[0]
        assert len(sizes) >= 4 and sizes[1] > 0
        monkeypatch.setattr(operation, "KEPT_BOOKS_BUDGET_BYTES", first)
        part = scenario.physics(case, 35.0, chunk_assets=2, dense=False, threads=1).operation
        recompute = part.p_kw._recompute
        assert all(recompute._booked(k) is not None for k in recompute._books)
        assert recompute._books_bytes == sum(int(a.nbytes) for blocks in recompute._books.values()
                                             for _, arrays in blocks for a in arrays)
        choice = _plan_choice(dense.operation)
        rows = np.arange(len(choice))
        assert_array_equal(part.q_kvar[choice, rows], dense.operation.q_kvar[choice, rows])

    def test_plans_priced_together_equal_each_plan_alone(self, case, dense, compact, monkeypatch):
        # the reactive check of two plans in one pass over the sites gives each plan's own check on the dense
        # run, frame for frame; the compact store recomputes each site's rows of both plans in one request
        from models import reactive_plan

        result = scenario.economics(case, dense, case.finance, with_risk=False)
        d, c = dense.operation, compact.operation
        # a second plan: the first's reactive projects, and another option than the first's on every other asset
        chosen = scenario.plan_choice(d, result.plan)
        rows = []
        for j in range(len(d.asset_ids)):
            usable = [o for o in np.flatnonzero(d.applies[j, 1:]) + 1 if o != chosen[j]]
            if chosen[j] and d.technologies[chosen[j]] in ("capacitor", "wound_field"):
                rows.append((d.asset_ids[j], d.option_ids[chosen[j]]))
            elif usable:
                rows.append((d.asset_ids[j], d.option_ids[usable[0]]))
        other = pd.DataFrame(rows, columns=["asset_id", "option_id"])
        assert (scenario.plan_choice(d, other) != chosen).sum() >= 4
        reactive = np.isin(d.technologies[scenario.plan_choice(d, result.plan)], ("capacitor", "wound_field"))
        assert reactive.any()
        requests = []
        real = operation._SiteRecompute._computed

        def spy(self, k, options, local):
            requests.append(k)
            return real(self, k, options, local)

        monkeypatch.setattr(operation._SiteRecompute, "_computed", spy)
        c.p_kw._recompute._cached = None
        c.p_kw._recompute._request = None
        together = reactive_plan.reactive_values_in_plans(case, c, [result.plan, other], result.results)
        for plan, got in zip((result.plan, other), together):
            alone = reactive_plan.reactive_value_in_plan(case, d, plan, result.results)
            pd.testing.assert_frame_equal(got, alone, check_exact=True)
        sites = set(d.site_ids[reactive])
        assert len(requests) == len(sites)  # one recomputation per site priced, not one per plan

    def test_rows_kept_within_the_budget(self, case, compact):
        c = compact.operation
        choice = _plan_choice(c)
        row_bytes = 2 * len(c.index) * 8  # kW and kVAr of one pair
        with operation.kept_rows(c, budget_bytes=3 * row_bytes):
            meter_and_bills(case, c, choice)
            assert len(c.p_kw._recompute._kept) == 3 and c.p_kw._recompute._kept_bytes == 3 * row_bytes
        with operation.kept_rows(c, budget_bytes=0):
            meter_and_bills(case, c, choice)
            assert c.p_kw._recompute._kept == {}

    def test_kept_rows_does_nothing_for_a_dense_result(self, dense):
        with operation.kept_rows(dense.operation):
            assert isinstance(dense.operation.p_kw, np.ndarray)


@pytest.fixture(scope="module")
def least(case, index):
    """The physics with the least budgets (nothing kept, today's power in a file, curve blocks of 3 assets'
    steps), and the sizes of the blocks it ran."""
    budgets = operation.MemoryBudgets(dense_bytes=0, today_in_memory_bytes=0, kept_rows_bytes=0,
                                      kept_books_bytes=0, curve_chunk_elements=3 * len(index))
    seen = []
    real = scenario.site_blocks

    def spy(*args, **kwargs):
        for rows, block, totals in real(*args, **kwargs):
            seen.append(len(rows))
            yield rows, block, totals

    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(scenario, "site_blocks", spy)
        phys = scenario.physics(case, 35.0, budgets=budgets)
    return phys, seen


class TestMemoryBudgetsOfARun:
    """A run's budgets given as an argument (models.operation.MemoryBudgets) govern what it keeps: the numbers
    are the compact store's own (the same bits), whatever it keeps."""

    def test_the_run_keeps_what_its_budgets_allow(self, least):
        phys, seen = least
        op = phys.operation
        assert isinstance(op.p_kw, operation.SiteIntervalStore)  # a dense budget of 0: today's motors only
        assert isinstance(op.p_kw._today, np.memmap)  # today's power above its budget of 0: a mapped file
        recompute = op.p_kw._recompute
        assert recompute.books_bytes == 0 and recompute.books_budget == 0 and recompute.rows_budget == 0
        assert max(seen) == 3  # curve blocks of 3 assets' worth of steps
        with operation.kept_rows(op):  # the run's own budget of rows: none kept
            assert recompute._kept_budget == 0

    def test_the_numbers_are_those_of_the_default_budgets(self, case, least, compact):
        phys, _ = least
        a, b = phys.operation, compact.operation
        for name in ("energy_kwh", "losses_kwh", "lagging_kvarh", "mean_speed_rpm"):
            assert_array_equal(getattr(a, name), getattr(b, name), err_msg=name)
        assert_array_equal(phys.savings.saving, compact.savings.saving)
        choice = _plan_choice(b)
        _, bills_least = meter_and_bills(case, a, choice, threads=2)
        _, bills_default = meter_and_bills(case, b, choice)
        pd.testing.assert_frame_equal(bills_least, bills_default, check_exact=True)


# --------------------------------------------------------------------------------------------------
# 4. Stepped-bank controller evaluated in place
# --------------------------------------------------------------------------------------------------

# Switching tolerance of the rule in units of one step (models/site.py, _STEP_TOLERANCE, documented there).
STEP_TOLERANCE = 1e-9


def _reference_bank(p_kw, q_kvar, rated_q_kvar, step_kvar, target_power_factor) -> np.ndarray:
    """stepped_bank_q_kvar's documented rule, interval by interval in plain Python:
    Q_t = |P| tan(acos PF_target); k_reach = ceil((Q - Q_t)/step); k_lead = floor(Q/step);
    k = clip(min(k_reach, k_lead), 0, floor(rated/step)); output -k * step."""
    tan_target = math.sqrt(1.0 - target_power_factor * target_power_factor) / target_power_factor
    n_max = math.floor(rated_q_kvar / step_kvar + STEP_TOLERANCE)
    p_b, q_b = np.broadcast_arrays(np.asarray(p_kw, dtype=float), np.asarray(q_kvar, dtype=float))
    out = np.empty(p_b.shape)
    for pos in np.ndindex(p_b.shape):
        p, q = float(p_b[pos]), float(q_b[pos])
        k_reach = math.ceil((q - abs(p) * tan_target) / step_kvar - STEP_TOLERANCE)
        k_lead = math.floor(q / step_kvar + STEP_TOLERANCE)
        k = min(max(min(k_reach, k_lead), 0), n_max)
        out[pos] = -k * step_kvar
    return out


def _read_only(a: np.ndarray) -> np.ndarray:
    a = np.array(a, dtype=float)
    a.flags.writeable = False  # any write into an input raises
    return a


class TestSteppedBankInPlace:
    @pytest.mark.parametrize("shape_p, shape_q", [((500,), (500,)), ((6, 200), (6, 200)), ((200,), (6, 200)),
                                                  ((1, 200), (6, 200)), ((6, 200), (200,))])
    def test_equals_the_rule_step_by_step(self, shape_p, shape_q):
        rng = np.random.default_rng(2024)
        p = _read_only(rng.uniform(-200.0, 1500.0, shape_p))
        q = _read_only(rng.uniform(-400.0, 1200.0, shape_q))
        p_before, q_before = p.copy(), q.copy()
        got = stepped_bank_q_kvar(p, q, 425.0, 25.0, 0.95)
        assert got.shape == np.broadcast_shapes(shape_p, shape_q)
        assert_array_equal(got, _reference_bank(p, q, 425.0, 25.0, 0.95))  # whole steps: exact
        assert_array_equal(p, p_before)
        assert_array_equal(q, q_before)
        assert (got < 0).any() and (got == 0).any() and (got == -425.0).any()  # every branch of the rule

    def test_boundaries_of_the_rule_by_hand(self):
        # hand calculation at PF target 1 (Q_t = 0), 100 kVAr steps, 500 kVAr bank (k_reach = ceil(Q/100),
        # k_lead = floor(Q/100), each with the 1e-9-step tolerance):
        # Q = 300 -> reach 3, lead 3 -> 300 kVAr;
        # Q = 299.99999999999 (1e-13 step short, within the tolerance) -> lead 3 -> 300 kVAr;
        # Q = 299.9999 (1e-6 step short, outside it) -> reach 3, lead 2 -> 200 kVAr;
        # Q = 250 -> reach 3, lead 2 -> 200; Q = 0 -> 0; Q = -80 (leading) -> 0; Q = 900 -> 5 (the whole bank)
        q = _read_only([300.0, 299.99999999999, 299.9999, 250.0, 0.0, -80.0, 900.0])
        p = _read_only(np.full(7, 400.0))
        assert_array_equal(stepped_bank_q_kvar(p, q, 500.0, 100.0, 1.0),
                           [-300.0, -300.0, -200.0, -200.0, 0.0, 0.0, -500.0])

    def test_series_in_series_out_and_scalar_in_scalar_out(self):
        idx = pd.date_range("2025-01-06", periods=3, freq="h", tz="UTC")
        p, q = pd.Series([400.0, 400.0, 0.0], index=idx), pd.Series([300.0, 50.0, 0.0], index=idx)
        out = stepped_bank_q_kvar(p, q, 250.0, 50.0, 0.95)
        assert isinstance(out, pd.Series) and out.index.equals(idx)
        assert_array_equal(out.to_numpy(), _reference_bank(p.to_numpy(), q.to_numpy(), 250.0, 50.0, 0.95))
        assert isinstance(stepped_bank_q_kvar(400.0, 300.0, 250.0, 50.0, 0.95), float)

    @settings(max_examples=150, deadline=None)
    @given(p=st.floats(-2000.0, 2000.0), q=st.floats(-2000.0, 2000.0), rated=st.floats(0.0, 1000.0),
           step=st.floats(0.5, 200.0), target=st.floats(0.5, 1.0))
    def test_equals_the_rule_for_any_interval(self, p, q, rated, step, target):
        got = stepped_bank_q_kvar(np.array([p]), np.array([q]), rated, step, target)
        assert_array_equal(got, _reference_bank([p], [q], rated, step, target))


# --------------------------------------------------------------------------------------------------
# 5. Changed asset-options found with one comparison per element
# --------------------------------------------------------------------------------------------------


def _reference_pairs(p_site, q_site, applies) -> list[tuple[int, int]]:
    """(asset, option) where the option applies and the largest |difference| from today's is above 0."""
    out = []
    for j in range(p_site.shape[1]):
        for o in range(1, p_site.shape[0]):
            if applies[j, o] and (np.abs(p_site[o, j] - p_site[0, j]).max() > 0
                                  or np.abs(q_site[o, j] - q_site[0, j]).max() > 0):
                out.append((j, o))
    return out


# A flat kWh price and every lagging kVArh charged per interval (invented): hand-checkable savings.
FLAT_REACTIVE = '''
[tariff]
name = "flat with kVArh (invented)"
currency = "EUR"
time_zone = "UTC"
[[periods]]
code = "all"
[energy]
price_per_kwh = { all = 0.10 }
[[reactive]]
name = "kvarh"
price_per_kvarh = 0.01
free_kvarh_per_kwh = 0.0
allowance_per = "interval"
'''


class TestChangedPairs:
    N_ASSETS, N_STEPS = 5, 48

    def arrays(self):
        """Today's: every asset 100 kW, 50 kVAr. Option 1 = today's (a capacitor that changes nothing);
        option 2: asset 3 draws 10 kW less at interval 17; option 3: asset 1 draws 5 kVAr less at
        interval 0 (a capacitor, applying to assets 0, 1, 4 only); option 4 differs for asset 2, where it
        does not apply."""
        n_o = 5
        p = np.full((n_o, self.N_ASSETS, self.N_STEPS), 100.0)
        q = np.full((n_o, self.N_ASSETS, self.N_STEPS), 50.0)
        p[2, 3, 17] -= 10.0
        q[3, 1, 0] -= 5.0
        p[4, 2, :] = 80.0
        applies = np.ones((self.N_ASSETS, n_o), dtype=bool)
        applies[[2, 3], 3] = False
        applies[2, 4] = False
        technologies = np.array(["existing", "capacitor", "induction", "capacitor", "induction"])
        return p, q, applies, technologies

    def test_pairs_by_hand_and_by_plain_numpy(self):
        p, q, applies, _ = self.arrays()
        js, os_ = _changed_pairs(p, q, applies)
        assert list(zip(js.tolist(), os_.tolist())) == [(1, 3), (3, 2)]  # hand: see arrays()
        assert list(zip(js.tolist(), os_.tolist())) == _reference_pairs(p, q, applies)

    def test_one_ulp_in_one_interval_is_a_change(self):
        p, q, applies, _ = self.arrays()
        q[1, 4, 33] = np.nextafter(q[1, 4, 33], np.inf)
        js, os_ = _changed_pairs(p, q, applies)
        assert (4, 1) in set(zip(js.tolist(), os_.tolist()))

    def test_a_nan_difference_counts_as_unchanged(self):
        # the documented rule of the non-finite path: NaN compares false, as in max|difference| > 0
        p, q, applies, _ = self.arrays()
        p[1, 0, 5] = np.nan
        js, os_ = _changed_pairs(p, q, applies)
        assert list(zip(js.tolist(), os_.tolist())) == [(1, 3), (3, 2)] == _reference_pairs(p, q, applies)

    def test_a_nan_in_the_kw_leaves_a_kvar_change_counted(self):
        # the rule holds per quantity: option 3 of asset 1 changes the kVAr (arrays()); a NaN in its kW
        # makes the kW count as unchanged, not the kVAr
        p, q, applies, _ = self.arrays()
        p[3, 1, 9] = np.nan
        js, os_ = _changed_pairs(p, q, applies)
        assert list(zip(js.tolist(), os_.tolist())) == [(1, 3), (3, 2)] == _reference_pairs(p, q, applies)

    def test_random_arrays_agree_with_plain_numpy(self):
        rng = np.random.default_rng(8)
        n_o, n_a, n_t = 6, 9, 30
        p = np.broadcast_to(rng.uniform(0, 100, (1, n_a, n_t)), (n_o, n_a, n_t)).copy()
        q = np.broadcast_to(rng.uniform(-20, 60, (1, n_a, n_t)), (n_o, n_a, n_t)).copy()
        for _ in range(12):  # single-interval changes in random rows
            o, j, t = rng.integers(1, n_o), rng.integers(n_a), rng.integers(n_t)
            (p if rng.random() < 0.5 else q)[o, j, t] += rng.choice([-1.0, 1e-9, 3.0])
        applies = rng.random((n_a, n_o)) < 0.7
        applies[:, 2] = True  # one option on every asset (the whole-slice path)
        js, os_ = _changed_pairs(p, q, applies)
        assert list(zip(js.tolist(), os_.tolist())) == _reference_pairs(p, q, applies)

    @pytest.mark.parametrize("case_", ["finite", "nan today", "nan table", "nan row"])
    def test_pairs_read_through_a_curve_book_agree_with_plain_numpy(self, case_):
        # a block whose options are tables (models.tabulation.CurveBook): the pairs found reading through
        # the book, where known-finite pairs stop at their first difference, are those plain numpy finds on
        # the same values written out. Option 1 = today's tables (unchanged); 2 = 1 % more kW; 3 = the kVAr
        # of asset 2 changed at a node no interval reads (unchanged); 4 = read from the arrays (today's
        # row with one interval changed for asset 1); 5 repeats today's for assets 0 and 3.
        from models import tabulation

        rng = np.random.default_rng(21)
        n_o, n_a, n_t = 6, 4, 40
        load = rng.uniform(10.0, 50.0, (n_a, n_t))
        grid = tabulation.locate(load, load > 0, 1.0, 65)
        empty = grid.hours_h[2, :-1] == 0  # cells of asset 2 holding no interval
        node = 1 + int(np.flatnonzero(empty[:-1] & empty[1:])[0])  # the node between two of them
        kw, kvar = grid.p_grid_kw * 1.05, 0.5 * grid.p_grid_kw + 3.0
        if case_ == "nan table":
            kvar = kvar.copy()
            kvar[1, 4] = np.nan  # a node of asset 1's kVAr: its rows read NaN where they use it
        p, q = np.full((n_o, n_a, n_t), -9.0), np.full((n_o, n_a, n_t), -9.0)
        tabulation.interpolate_pair(grid, *tabulation.tables(kw), *tabulation.tables(kvar), out_a=p[0], out_b=q[0])
        if case_ == "nan today":
            p[0, 3, 7] = np.nan
        book = tabulation.CurveBook(n_o, n_a)
        rows = np.arange(n_a)
        book.add(1, rows, grid, rows, tabulation.tables(kw), tabulation.tables(kvar))
        book.add(2, rows, grid, rows, tabulation.tables(kw * 1.01), tabulation.tables(kvar))
        moved = kvar.copy()
        moved[2, 2 * node] += 5.0  # a node only cells without intervals use: never read
        book.add(3, rows, grid, rows, tabulation.tables(kw), tabulation.tables(moved))
        p[4], q[4] = p[0], q[0]
        p[4, 1, 11] += 1.0
        if case_ == "nan row":
            q[4, 2, 5] = np.nan
        # option 4 of assets 1 and 2 once more as the book's own rows (as a block of the analysis keeps
        # rows it cannot tabulate), with the same values: the same pairs must be found either way
        own_book_rows = (np.array([1, 2]), p[4, [1, 2]].copy(), q[4, [1, 2]].copy())
        book.add(5, np.array([1, 2]), grid, np.array([1, 2]), tabulation.tables(kw[[1, 2]] * 0.9),
                 tabulation.tables(kvar[[1, 2]]))
        book.repeat(5, np.array([0, 3]))
        applies = np.ones((n_a, n_o), dtype=bool)
        dense_p, dense_q = np.empty_like(p), np.empty_like(q)
        for o in range(n_o):
            book.fill(o, rows, p, q, dense_p[o], dense_q[o])
        js, os_ = _changed_pairs(p, q, applies, book)
        got = list(zip(js.tolist(), os_.tolist()))
        assert got == _reference_pairs(dense_p, dense_q, applies)
        book.add_rows(4, *own_book_rows)
        assert book.arrays()[2].tolist().count(2) == 2  # read from the book now, not the arrays
        js, os_ = _changed_pairs(p, q, applies, book)
        assert list(zip(js.tolist(), os_.tolist())) == got
        plain = _changed_pairs(dense_p, dense_q, applies)
        assert got == list(zip(plain[0].tolist(), plain[1].tolist()))
        assert (2, 3) not in got and (0, 1) not in got and (1, 4) in got and (0, 2) in got

    def test_savings_of_unchanged_and_single_interval_options(self):
        p, q, applies, technologies = self.arrays()
        index = pd.date_range("2025-01-06", periods=self.N_STEPS, freq="h", tz="UTC")
        setup = SiteSetup("S", _tariff(FLAT_REACTIVE), Site(), None)
        out = site_savings(setup, index, 1.0, p, q, applies, technologies, 35.0)
        saving = out["saving"].sum(axis=-1)
        # unchanged (option 1 everywhere): exactly zero and never priced, so no equivalent bank either
        assert np.array_equal(saving[:, 1], np.zeros(self.N_ASSETS))
        assert np.isnan(out["equivalent_bank_q_kvar"][:, 1]).all()
        # hand calculation: 10 kW less for one hour = 10 kWh x 0.10 = 1.00 EUR (the kVArh stay)
        assert_allclose(saving[3, 2], 1.0, rtol=1e-12)
        # hand calculation: 5 kVAr less for one hour, every kVArh charged = 5 x 0.01 = 0.05 EUR, all reactive
        assert_allclose([saving[1, 3], out["reactive_saving"][1, 3]], [0.05, 0.05], rtol=1e-9)
        assert np.isfinite(out["equivalent_bank_q_kvar"][1, 3])  # priced, so compared with a bank
        # option 4 differs only where it does not apply: nothing priced
        assert np.array_equal(saving[:, 4], np.zeros(self.N_ASSETS))
        others = np.ones_like(saving, dtype=bool)
        others[3, 2] = others[1, 3] = False
        assert np.array_equal(saving[others], np.zeros(others.sum()))


# --------------------------------------------------------------------------------------------------
# Scenario meters of a block, built in one compiled pass
# --------------------------------------------------------------------------------------------------


class TestScenarioMeters:
    """``_SiteBiller.scenario_totals`` prices the same meters as ``totals`` with the differences spelled out."""

    N_STEPS = 21 * 24

    @pytest.fixture(scope="class")
    @classmethod
    def parts(cls):
        from models.bill_savings import _SiteBiller
        from models.site import FixedCapacitorBank, SteppedCapacitorBank

        t = _tariff(ALL_CLAUSES)
        index = pd.date_range("2025-02-10", periods=cls.N_STEPS, freq="h", tz=t.time_zone)
        rng = np.random.default_rng(17)
        base_profile = rng.uniform(20, 60, cls.N_STEPS)
        site = Site(base_p_kw=0.0, base_power_factor=0.82, fixed_banks=(FixedCapacitorBank(15.0),),
                    stepped_banks=(SteppedCapacitorBank(60.0, 10.0, 0.95),))
        biller = _SiteBiller(SiteSetup("S", t, site, base_profile), index, 1.0)
        p_block = rng.uniform(0, 80, (4, 6, cls.N_STEPS))
        q_block = rng.uniform(-10, 50, (4, 6, cls.N_STEPS))
        p_block[:, 2] = p_block[0, 2]  # an asset whose kW no option changes
        p0, q0 = p_block[0].sum(axis=0) + 100.0, q_block[0].sum(axis=0) + 40.0
        j = np.array([0, 1, 2, 5, 5, 3])
        o = np.array([1, 3, 2, 1, 2, 3])
        return biller, p0, q0, p_block, q_block, j, o

    def test_same_bits_as_the_differences_spelled_out(self, parts):
        biller, p0, q0, p_block, q_block, j, o = parts
        names, amounts = biller.scenario_totals(p0, q0, p_block, q_block, j, o)
        ref_names, ref = biller.totals(p0, q0, p_block[o, j] - p_block[0, j], q_block[o, j] - q_block[0, j])
        assert names == ref_names
        assert_array_equal(amounts, ref)

    def test_kvar_only_keeps_todays_kw(self, parts):
        biller, p0, q0, p_block, q_block, j, o = parts
        names, amounts = biller.scenario_totals(p0, q0, p_block, q_block, j, o, kw_changes=False)
        ref_names, ref = biller.totals(p0, q0, None, q_block[o, j] - q_block[0, j])
        assert names == ref_names
        assert_array_equal(amounts, ref)

    @pytest.mark.parametrize("quantity", ["p", "q"])
    def test_a_nan_in_a_scenario_raises(self, parts, quantity):
        biller, p0, q0, p_block, q_block, j, o = parts
        p_block, q_block = p_block.copy(), q_block.copy()
        (p_block if quantity == "p" else q_block)[o[1], j[1], 7] = np.nan
        with pytest.raises(ValueError, match="NaN"):
            biller.scenario_totals(p0, q0, p_block, q_block, j, o)


class TestRecomputeOnlyTheRowsAsked:
    """A recomputed block evaluates an option on the assets asked for only, and still gives the full
    run's bits."""

    def test_one_asset_asked_gives_the_full_runs_row(self, case, index, monkeypatch):
        options = operation.options_with_baseline(case.options)
        site_id, rows = max(site_partition(case), key=lambda kv: len(kv[1]))
        one = site_case(case, site_id)
        block = np.arange(len(rows))
        full = operation._operate_block(one, index, block)
        checked = 0
        for o in range(1, len(options)):
            users = np.flatnonzero(full.applies[:, o])
            if len(users) < 2:
                continue
            needed = {o: np.zeros(len(block), dtype=bool)}
            needed[o][users[-1]] = True
            seen = []
            real = operation._evaluate

            def spy(option, arr, *args, **kwargs):
                if option["option_id"] == options.iloc[o]["option_id"]:
                    seen.append(len(arr["rated_p_kw"]))
                return real(option, arr, *args, **kwargs)

            monkeypatch.setattr(operation, "_evaluate", spy)
            part = operation._operate_block(one, index, block, wanted=frozenset({o}), needed=needed, power_only=True)
            monkeypatch.setattr(operation, "_evaluate", real)
            if options.iloc[o]["technology"] == "capacitor" and full.interval_data[users[-1]]:
                assert seen == []  # a terminal capacitor's rows are today's shifted: no model evaluated
            else:
                assert seen and max(seen) == 1, options.iloc[o]["option_id"]  # one asset evaluated, not the block
            assert_array_equal(part.p_kw[o, users[-1]], full.p_kw[o, users[-1]])
            assert_array_equal(part.q_kvar[o, users[-1]], full.q_kvar[o, users[-1]])
            checked += 1
        assert checked >= 3


class TestReferenceLoad:
    """Today's shaft load of a group in one compiled pass, against the rule written out in numpy (an
    invariant of our own design: the same operations, so the same bits)."""

    @settings(max_examples=40, deadline=None)
    @given(st.integers(0, 2**32 - 1), st.integers(1, 6), st.integers(1, 40))
    def test_the_pass_is_the_numpy_rule(self, seed, n_rows, n_steps):
        from models.induction import calibrate_induction, shaft_from_input_kw

        rng = np.random.default_rng(seed)
        rated = rng.uniform(1.0, 500.0, n_rows)
        motors = calibrate_induction(rated, np.full(n_rows, 0.93), np.full(n_rows, 0.85), np.full(n_rows, 1470.0),
                                     np.full(n_rows, 1500.0))
        values = rng.uniform(0.0, 1.2, (n_rows, n_steps))
        values[rng.random(values.shape) < 0.25] = 0.0
        is_input = rng.random(n_rows) < 0.4
        values[is_input] *= rated[is_input, None]  # measured input kW on those rows
        weight = np.full((1, n_steps), 0.25)
        if n_steps > 1:
            weight[0, 0] = 0.0  # an interval that weighs nothing does not set the peak
        load = operation._reference_load({"rated_p_kw": rated}, motors, values, is_input, weight)
        shaft = shaft_from_input_kw(motors, np.where(is_input[:, None], values, 0.0))
        p_ref = np.where(is_input[:, None], shaft, values * rated[:, None])
        assert_array_equal(load.p_ref_kw, p_ref)
        assert_array_equal(load.running, p_ref > 0.0)
        on = (p_ref > 0.0) & (np.broadcast_to(weight, p_ref.shape) > 0)
        peak = np.where(on, p_ref, 0.0).max(axis=1, keepdims=True)
        assert_array_equal(load.p_design_kw, np.maximum(peak, operation.DESIGN_SHAFT_LOAD_FRAC * rated[:, None]))


def test_a_terminal_capacitor_takes_its_kvar_off_todays_while_the_motor_runs(dense):
    # a capacitor switched with the motor: the same kW as today's motor in every interval; kVAr lower by the
    # capacitor's size while the motor runs, unchanged (0) while it is stopped; its running hours (counted from
    # the load profile, op.running_h) are the intervals where today's motor draws power
    op = dense.operation
    o = int(np.flatnonzero(op.technologies == "capacitor")[0])
    users = np.flatnonzero(op.applies[:, o] & op.interval_data)
    assert len(users) >= 2
    for j in users:
        p0, q0, p, q = op.p_kw[0, j], op.q_kvar[0, j], op.p_kw[o, j], op.q_kvar[o, j]
        running = p0 != 0.0
        assert running.sum() * op.interval_h == pytest.approx(op.running_h[j], rel=1e-12)
        assert_array_equal(p, p0)
        assert op.capacitor_q_kvar[j, o] > 0
        assert_allclose(np.where(running, q0 - q, 0.0), np.where(running, op.capacitor_q_kvar[j, o], 0.0), rtol=1e-12)
        assert (q[~running] == 0.0).all()
        # its yearly kVArh are its rows' own sums; kWh, losses and speed are today's
        assert op.lagging_kvarh[j, o] == pytest.approx(np.maximum(q, 0.0).sum() * op.interval_h, rel=1e-12)
        assert op.leading_kvarh[j, o] == pytest.approx(np.maximum(-q, 0.0).sum() * op.interval_h, rel=1e-12, abs=1e-12)
        assert op.energy_kwh[j, o] == op.energy_kwh[j, 0] and op.mean_speed_rpm[j, o] == op.mean_speed_rpm[j, 0]
