"""What to measure first: the value of knowing an asset's inputs before deciding (models.information).

Expected numbers: hand calculations in docs/derivations/finance-metrics.md, section 9 (standard normal
tables); the spreads are the rules of thumb of models.information.SPREAD_FRAC (common practice, from memory).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from models import scenario
from models.information import SPREAD_FRAC, evpi, measure_first, spread_frac, spread_sources


@pytest.mark.parametrize("npv, sigma, expected", [
    (0.0, 1000.0, 398.94),      # 1 000 / sqrt(2 pi)
    (1000.0, 1000.0, 83.32),    # 1 000 x 0.841345 + 1 000 x 0.241971 - 1 000
    (-1000.0, 1000.0, 83.32),   # -1 000 x 0.158655 + 1 000 x 0.241971
    (500.0, 2179.45, 642.26),   # section 9's asset
    (500.0, 0.0, 0.0),          # nothing to learn
])
def test_evpi_of_a_normal_npv(npv, sigma, expected):
    assert float(evpi(npv, sigma)) == pytest.approx(expected, abs=0.01)


def test_spreads_add_in_quadrature():
    # section 9: a duty table, efficiency and power factor from defaults: sqrt(0.15^2 + 0.15^2 + 0.05^2)
    assert spread_frac(["load: duty table", "rated_efficiency_pct", "rated_power_factor"]) == pytest.approx(0.2179449)
    assert SPREAD_FRAC["load: interval profile"] < SPREAD_FRAC["load: duty table"] < SPREAD_FRAC["load: mean load and hours"]


def test_the_demo_s_sources_follow_its_register(demo_case):
    sources = spread_sources(demo_case)
    a = demo_case.assets.set_index("asset_id")
    for asset_id, found in sources.items():
        pid = a.loc[asset_id, "profile_id"]
        load = found[0]
        if isinstance(pid, str) and pid in demo_case.profiles:
            assert load == "load: interval profile", asset_id
        elif isinstance(pid, str) and pid in set(demo_case.duty["profile_id"]):
            assert load == "load: duty table", asset_id
        else:
            assert load == "load: mean load and hours", asset_id
        if "static_head_frac" in found:
            assert a.loc[asset_id, "application"] in ("pump", "fan")
    defaulted = set(zip(demo_case.defaults["asset_id"], demo_case.defaults["column"]))
    assert all(("rated_efficiency_pct" in found) == ((asset_id, "rated_efficiency_pct") in defaulted)
               for asset_id, found in sources.items())


def test_the_ranking_is_the_evpi_of_each_asset_s_best_option(demo_run_physics):
    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    table = measure_first(case, result)
    assert table["rank"].tolist() == list(range(1, len(table) + 1))
    assert (np.diff(table["value_of_measuring"].to_numpy()) <= 0).all()
    r = result.results
    for row in table.head(5).to_dict("records"):
        own = r[(r["asset_id"] == row["asset_id"]) & (r["technology"] != "existing") & (r["capital"] > 0)]
        assert row["npv"] == pytest.approx(float(own["npv"].max()))  # the highest-NPV option of the asset
        assert row["npv_sigma"] == pytest.approx(row["spread_frac"] * abs(row["savings_pv"]))
        # EVPI by the formula of section 9, written out with scipy's normal (not the module's function)
        from scipy.stats import norm
        z = row["npv"] / row["npv_sigma"]
        expected = row["npv"] * norm.cdf(z) + row["npv_sigma"] * norm.pdf(z) - max(row["npv"], 0.0)
        assert row["value_of_measuring"] == pytest.approx(expected, rel=1e-9)
    # a clear decision is worth little to measure: the top one's NPV lies within a few spreads of zero
    top = table.iloc[0]
    assert abs(top["npv"]) < 3 * top["npv_sigma"]


def test_the_one_motor_case_s_value_by_hand(tmp_path):
    # hand calculation, finance-metrics.md section 9 (the one-motor case of scenario-one-asset.md): spread 0.25,
    # savings PV 457.682 x 8.530203 = 3 904.12, sigma 976.03, NPV 2 962.19, EVPI 0.33
    from test_scenario import _one_asset_case

    case = _one_asset_case(tmp_path / "one")
    result = scenario.run(case, case.finance, with_risk=False)
    row = measure_first(case, result).iloc[0]
    assert row["spread_frac"] == pytest.approx(0.25)
    assert row["savings_pv"] == pytest.approx(3_904.12, rel=1e-5)
    assert row["npv_sigma"] == pytest.approx(976.03, rel=1e-5)
    assert row["npv"] == pytest.approx(2_962.19, rel=1e-5)
    assert row["value_of_measuring"] == pytest.approx(0.33, abs=0.005)


def test_a_demo_motor_s_spread_by_hand(demo_run_physics):
    # hand calculation, finance-metrics.md section 9: HRW-P01, sqrt(0.0325) = 0.180278
    case, phys = demo_run_physics
    table = measure_first(case, scenario.economics(case, phys, case.finance, with_risk=False))
    assert table.set_index("asset_id").loc["HRW-P01", "spread_frac"] == pytest.approx(0.180278, abs=1e-6)


def test_the_ranking_kept_for_the_pack_follows_the_result(demo_run_physics):
    # the pack's ranking is kept for the last result asked for: a result under other assumptions gets its own
    from dataclasses import replace

    from models.information import measure_first_of

    case, phys = demo_run_physics
    r8 = scenario.economics(case, phys, case.finance, with_risk=False)
    r12 = scenario.economics(case, phys, replace(case.finance, discount_rate_frac=0.12), with_risk=False)
    t8, t12 = measure_first_of(case, r8), measure_first_of(case, r12)
    npv8, npv12 = t8.set_index("asset_id")["npv"], t12.set_index("asset_id")["npv"]
    assert not np.allclose(npv8.to_numpy(), npv12.reindex(npv8.index).to_numpy())
    pd.testing.assert_frame_equal(t12, measure_first(case, r12))
    pd.testing.assert_frame_equal(measure_first_of(case, r8), measure_first(case, r8))


def test_run_writes_it_and_says_the_first_ones(tmp_path, capsys):
    from pathlib import Path

    from drivecase.cli import main

    demo = Path(__file__).resolve().parents[1] / "data" / "demo"
    out = tmp_path / "out"
    assert main(["run", str(demo), "--out", str(out), "--no-risk", "--quiet"]) == 0
    table = pd.read_csv(out / "measure_first.csv")
    assert table.columns.tolist()[:3] == ["rank", "asset_id", "site_id"] and len(table) > 10
    from models.case import load_case

    case, _ = load_case(demo)
    own = measure_first(case, scenario.run(case, case.finance, with_risk=False))
    assert table["asset_id"].tolist() == own["asset_id"].astype(str).tolist()
    assert np.allclose(table["value_of_measuring"].to_numpy(dtype=float), own["value_of_measuring"].to_numpy(dtype=float),
                       rtol=1e-6)
    said = capsys.readouterr().out
    first = table.iloc[0]
    assert "Measure first (measure_first.csv)" in said and f"  {first['asset_id']}: up to EUR " in said


def test_the_asset_page_and_the_register_say_it(demo_run_physics):
    import types

    from dashboard import services
    from models.pack import content

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    table = measure_first(case, result)
    top = table.iloc[0]
    view = types.SimpleNamespace(case=case, key="demo-test", currency="EUR")
    said = services.measure_text(view, result, top["asset_id"])
    assert said.startswith("Worth measuring before deciding: up to EUR ") and f"(rank 1 of {len(table)} motors)" in said
    clear = table[table["value_of_measuring"] <= 1.0]
    assert services.measure_text(view, result, clear["asset_id"].iloc[0]) == ""
    register = content.risk_register(case, result, content.select_scope(case, result, assets=[top["asset_id"]], plan=False))
    row = register[register["item"] == "Worth measuring before deciding"].iloc[0]
    assert row["assets"] == top["asset_id"] and row["detail"].startswith(f"{top['asset_id']} up to EUR ")


def test_the_decision_record_names_the_value_of_measuring_first(demo_run_physics):
    from models.pack import content
    from models.pack.decision_record import record_context

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    table = measure_first(case, result)
    recommended = content.select_scope(case, result, assets=list(table["asset_id"]), plan=False).recommended
    same = table[table["option_id"].to_numpy() == recommended.set_index("asset_id").loc[table["asset_id"], "option_id"].to_numpy()]
    top, clear = same.iloc[0], same[same["value_of_measuring"] <= 1.0].iloc[0]
    notes = record_context(case, result, content.select_scope(case, result, assets=[top["asset_id"]], plan=False),
                           top["asset_id"])["data_notes"]
    assert any(n.startswith(f"Measuring it first is worth up to EUR {top['value_of_measuring']:,.0f}: the NPV of "
                            f"{top['label']}") for n in notes)
    notes = record_context(case, result, content.select_scope(case, result, assets=[clear["asset_id"]], plan=False),
                           clear["asset_id"])["data_notes"]
    assert not any(n.startswith("Measuring it first") for n in notes)


def test_a_record_s_value_of_measuring_is_of_the_option_it_recommends(demo_run_physics):
    # HRW-M12's highest NPV priced alone is its motor-terminal capacitor, whose value the rest of the plan already
    # takes; its record recommends the PM motor on a drive. The record's note spoke of the capacitor (worth EUR 1
    # to measure); it now weighs the option it recommends, with that option's own NPV
    from models.information import value_of_measuring_option
    from models.pack import content
    from models.pack.decision_record import record_context

    case, phys = demo_run_physics
    result = scenario.economics(case, phys, case.finance, with_risk=False)
    best = measure_first(case, result).set_index("asset_id").loc["HRW-M12"]
    scope = content.select_scope(case, result, assets=["HRW-M12"], plan=False)
    rec = scope.recommended.set_index("asset_id").loc["HRW-M12"]
    assert best["option_id"] == "capacitor" and rec["option_id"] == "pm_drive"
    own = value_of_measuring_option(case, result, "HRW-M12", "pm_drive")
    r = result.results
    row = r[(r["asset_id"] == "HRW-M12") & (r["option_id"] == "pm_drive")].iloc[0]
    assert own["npv"] == pytest.approx(float(row["npv"])) and own["label"] == row["label"]
    # EVPI by the formula of section 9, written out with scipy's normal (not the module's function)
    from scipy.stats import norm
    z = own["npv"] / own["npv_sigma"]
    assert own["value_of_measuring"] == pytest.approx(
        own["npv"] * norm.cdf(z) + own["npv_sigma"] * norm.pdf(z) - max(own["npv"], 0.0), rel=1e-9, abs=1e-9)
    notes = [n for n in record_context(case, result, scope, "HRW-M12")["data_notes"] if n.startswith("Measuring it first")]
    assert all(str(best["label"]) not in n for n in notes)
    if own["value_of_measuring"] > 1.0:
        assert notes and f"the NPV of {row['label']}" in notes[0]
    else:
        assert not notes
    # today's motor kept, or an option costing nothing, has no decision of its own to weigh
    assert value_of_measuring_option(case, result, "HRW-M12", "keep") is None
