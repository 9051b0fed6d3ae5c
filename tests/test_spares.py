"""Spares of a group of interchangeable motors (a rotating pool, Poisson number away being rewound).

Sources: hand calculations in docs/derivations/spares.md (cases S1-S3); the failure law and the outage classes are
models.end_of_life's (common practice); a spare's price, the motors' new option's capital, is read from the run
(an input here).
"""

from __future__ import annotations

import pytest

import casebuilder as cb
from models import scenario, spares
from models.case import load_case


def test_chance_of_failing_next_year():
    # hand calculation S1 (models.end_of_life's conditional failure probability over one year, which spares reads)
    from models.end_of_life import conditional_failure_probability

    assert conditional_failure_probability(20.0, 1.0, 2.5, 20.0) == pytest.approx(0.121664, abs=5e-7)
    assert conditional_failure_probability(10.0, 1.0, 2.5, 20.0) == pytest.approx(0.046450, abs=5e-7)


def test_fill_rates_and_the_fewest_spares_for_a_target():
    # hand calculation S2
    assert spares.fill_rate_frac([0, 1, 2, 3], 0.5) == pytest.approx([0.0, 0.606531, 0.909796, 0.985612], abs=5e-7)
    assert spares.spares_for_fill(0.5, 0.95) == 3
    assert spares.spares_for_fill(0.5, 0.90) == 2
    assert spares.spares_for_fill(0.0) == 0


@pytest.fixture(scope="module")
def pair(tmp_path_factory):
    header = cb.ASSET_HEADER + ["downtime_cost_per_h"]
    rows = [["A1", "S1", "Cooling water pump", "pump", "15", "4", "50", "400", "IE3", "", "", "1465", "2005", "0",
             "fixed", "LP1", "", "", "high", "500"],
            ["A2", "S1", "Cooling water pump", "pump", "15", "4", "50", "400", "IE3", "", "", "1465", "2015", "0",
             "fixed", "LP1", "", "", "high", "500"]]
    folder = cb.write_case(tmp_path_factory.mktemp("spares"), assets=rows, asset_header=header, capacitors=[], duty=[])
    cb.with_flat_tariff(folder)
    case, problems = load_case(folder)
    assert case is not None, [p.rule for p in problems if p.severity == "error"]
    result = scenario.run(case, case.finance, with_risk=False)
    assert scenario.analysis_year(result.physics.operation) == 2025  # the profiles' year: ages 20 and 10
    return case, result, spares.spares_table(case, result)


def test_a_group_of_two_motors(pair):
    # hand calculation S3
    case, result, table = pair
    assert len(table) == 1
    row = table.iloc[0]
    assert row["group"] == "15 kW, 4-pole, 400 V, 50 Hz" and row["motors"] == 2 and row["asset_ids"] == "A1 A2"
    assert row["failures_per_yr"] == pytest.approx(0.168114, abs=5e-7)
    assert (row["rewind_turnaround_h"], row["outage_without_spare_h"]) == pytest.approx((72.0, 24.0), rel=1e-12)
    assert row["mean_away"] == pytest.approx(0.0013818, abs=5e-8)
    assert row["spares_for_target"] == 1 and row["fill_at_target_frac"] == pytest.approx(0.998619, abs=5e-7)
    assert row["downtime_cost_without_per_yr"] == pytest.approx(2017.37, abs=0.01)
    price = row["spare_price"]
    res = result.results.set_index(["asset_id", "option_id"])["capital"]
    new = result.end_of_life.set_index("asset_id")["new_option_id"]
    assert price == pytest.approx(min(res[("A1", new["A1"])], res[("A2", new["A2"])]))  # (an input: the run's capital)


def test_a_spare_priced_below_the_downtime_it_avoids_is_kept(pair):
    # hand calculation S3 with every capital set to 2,000: holding one spare costs 2000 x (d + 0.05) a year, below
    # the 1,343.06 of downtime it avoids; with it the downtime costs 674.31 a year
    case, result, _ = pair
    from dataclasses import replace

    priced = replace(result, results=result.results.assign(capital=2_000.0))
    row = spares.spares_table(case, priced).iloc[0]
    holding = 2_000.0 * (result.assumptions.discount_rate_frac + spares.SPARE_UPKEEP_FRAC)
    assert holding < 1343.06
    assert row["economic_spares"] == 1 and row["spare_price"] == 2_000.0
    assert row["downtime_cost_at_economic_per_yr"] == pytest.approx(674.31, abs=0.01)
    assert row["holding_cost_at_economic_per_yr"] == pytest.approx(holding, rel=1e-12)
    assert row["saving_at_economic_per_yr"] == pytest.approx(1343.06 - holding, abs=0.01)


def test_a_dearer_spare_is_not_worth_holding(pair):
    # the same group with a spare priced far above the downtime it avoids: no spare is economic
    case, result, _ = pair
    from dataclasses import replace

    dear = replace(result, results=result.results.assign(capital=result.results["capital"] * 1000.0))
    row = spares.spares_table(case, dear).iloc[0]
    assert row["economic_spares"] == 0 and row["saving_at_economic_per_yr"] == 0.0
    assert row["spares_for_target"] == 1  # the policy's number does not depend on the price


def test_no_end_of_life_comparison_gives_an_empty_table(pair):
    case, result, _ = pair
    from dataclasses import replace

    import pandas as pd

    table = spares.spares_table(case, replace(result, end_of_life=pd.DataFrame()))
    assert table.empty and list(table.columns) == list(spares.SPARES_COLUMNS)
