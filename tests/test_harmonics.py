"""The harmonic screen of a site: voltage distortion, current distortion and capacitor resonance.

Sources: hand calculations in docs/derivations/harmonic-screen.md (cases H1-H4); limits from IEEE 519-2014
Tables 1 and 2; transformer impedances from IEC 60076-5 Table 1 (from memory).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from models import harmonics
from models.case import load_case
from tests.casebuilder import ASSET_HEADER, ASSETS, with_flat_tariff, write_case


def test_voltage_distortion_of_a_drive_load():
    # hand calculation H1: 100 kVA of drives on 2,000 kVA of short-circuit power
    orders, v_h, thd = harmonics.voltage_harmonics_pct([100.0], [2000.0])
    assert orders.tolist() == [5, 7, 11, 13, 17, 19, 23, 25]
    assert v_h[0, 0] == pytest.approx(9.081, abs=5e-4)
    assert thd[0] == pytest.approx(12.962, abs=5e-4)
    assert int(np.argmax(v_h[0])) == 0  # the 5th is the worst


def test_distortion_scales_with_the_drive_share():
    # V_h is proportional to S_drive / S_sc (hand calculation H1's formula): double the drives, double the THD
    _, _, one = harmonics.voltage_harmonics_pct([50.0, 100.0], [2000.0, 2000.0])
    assert one[1] == pytest.approx(2.0 * one[0], rel=1e-12)
    _, _, none = harmonics.voltage_harmonics_pct([0.0], [2000.0])
    assert none[0] == 0.0


def test_short_circuit_power_of_transformer_and_source():
    # hand calculation H2
    got = harmonics.short_circuit_kva([1000.0, 1000.0, np.nan, np.nan], [5.0, 5.0, 5.0, np.nan],
                                      [np.nan, 100_000.0, 50_000.0, np.nan])
    assert got[0] == pytest.approx(20_000.0)
    assert got[1] == pytest.approx(16_666.667, abs=1e-3)
    assert got[2] == pytest.approx(50_000.0)
    assert np.isnan(got[3])


def test_transformer_impedance_defaults_follow_iec_60076_5():
    # IEC 60076-5 Table 1 (from memory): 4 % to 630 kVA, 5 % to 1250, 6 % to 2500, 7 % to 6300, 8 % to 25000
    got = harmonics.transformer_impedance_pct([100.0, 630.0, 631.0, 1250.0, 2500.0, 6300.0, 20_000.0, np.nan])
    assert got[:7].tolist() == [4.0, 4.0, 5.0, 5.0, 6.0, 7.0, 8.0]
    assert np.isnan(got[7])


def test_voltage_and_current_limits_of_ieee_519():
    # IEEE 519-2014 Table 1: <= 1 kV 5 % / 8 %, 1-69 kV 3 % / 5 %, 69-161 kV 1.5 % / 2.5 %, above 1 % / 1.5 %
    individual, total = harmonics.voltage_limits_pct([400.0, 690.0, 11_000.0, 110_000.0, 400_000.0])
    assert individual.tolist() == [5.0, 5.0, 3.0, 1.5, 1.0]
    assert total.tolist() == [8.0, 8.0, 5.0, 2.5, 1.5]
    # Table 2 (120 V-69 kV): < 20: 5 %, 20-50: 8 %, 50-100: 12 %, 100-1000: 15 %, > 1000: 20 %
    assert harmonics.tdd_limit_pct([5.0, 19.9, 20.0, 49.0, 50.0, 99.0, 100.0, 999.0, 1000.0, 5000.0]).tolist() == [
        5.0, 5.0, 8.0, 8.0, 12.0, 12.0, 15.0, 15.0, 20.0, 20.0]


def test_resonance_order_and_the_harmonic_it_meets():
    # hand calculation H3
    assert harmonics.resonance_order([20_000.0], [800.0])[0] == pytest.approx(5.0)
    assert np.isinf(harmonics.resonance_order([20_000.0], [0.0])[0])
    near = harmonics.near_harmonics([4.6, 4.7])
    assert near.tolist() == [True] + [False] * 7  # the 5th only (4.5-5.5)
    assert not harmonics.near_harmonics([5.8, 6.2]).any()  # between 5.5 and 6.3, the 7th's band
    assert not harmonics.near_harmonics([3.0, 3.2]).any()  # below every drive harmonic


def test_capacitor_states_of_fixed_and_stepped_banks():
    # hand calculation H3: a 150 kVAr fixed bank and a 60 kVAr bank of 10 kVAr steps: 150, 160, ..., 210 kVAr
    assert harmonics.capacitor_states_kvar(150.0, [(60.0, 10.0)]).tolist() == [150.0 + 10.0 * k for k in range(7)]
    assert harmonics.capacitor_states_kvar(0.0, [(60.0, 10.0)]).tolist() == [10.0, 20.0, 30.0, 40.0, 50.0, 60.0]


def test_monthly_peak_mean_is_the_mean_of_each_months_highest_kva():
    # hand calculation: January's one interval 3-4-5 x 10 = 50 kVA; February's highest 6-8-10 x 10 = 100 kVA
    idx = pd.date_range("2025-01-31 23:00", periods=3, freq="h", tz="UTC")
    got = harmonics.monthly_peak_mean_kva(idx, np.array([30.0, 60.0, 6.0]), np.array([40.0, 80.0, 8.0]))
    assert got == pytest.approx(75.0)


@pytest.fixture(scope="module")
def small_site(tmp_path_factory):
    folder = tmp_path_factory.mktemp("harmonic_case")
    assets = [list(r) for r in ASSETS]
    assets[1][ASSET_HEADER.index("speed_control")] = "drive"  # F1, the exhaust fan, is on a drive today
    write_case(folder, assets=assets)
    with_flat_tariff(folder)
    lines = (folder / "sites.csv").read_text(encoding="utf-8").splitlines()
    (folder / "sites.csv").write_text(lines[0] + ",transformer_kva,supply_v_v\n" + lines[1] + ",500,400\n",
                                      encoding="utf-8")
    case, problems = load_case(folder)
    assert case is not None, [p.message for p in problems if p.severity == "error"]
    from models.scenario import physics

    return case, physics(case, 40.0).operation


def test_site_screen_today_and_with_a_plan(small_site):
    # hand calculation H4
    case, op = small_site
    plan = pd.DataFrame({"asset_id": ["P1"], "option_id": ["pm_drive"]})
    screen = harmonics.site_screen(case, op, plan).set_index("scenario")
    assert list(harmonics.SCREEN_COLUMNS) == ["site_id", "scenario"] + list(screen.columns)[1:]
    today, planned = screen.loc["today"], screen.loc["plan"]
    from models.bill_savings import meter_and_bills

    meter = meter_and_bills(case, op, np.zeros(len(op.asset_ids), dtype=int))[0]["S1"]
    kva = pd.Series(np.hypot(np.asarray(meter.p_kw, dtype=float), np.asarray(meter.q_kvar, dtype=float)), index=op.index)
    demand = float(kva.groupby([op.index.year, op.index.month]).max().mean())
    assert today["transformer_impedance_pct"] == 4.0 and "assumed" in today["impedance_basis"]
    assert today["short_circuit_kva"] == pytest.approx(12_500.0)
    assert today["pcc_short_circuit_kva"] == pytest.approx(12_500.0)
    assert today["drive_kva"] == pytest.approx(8.6391, abs=1e-4)
    assert today["voltage_thd_pct"] == pytest.approx(0.17916, abs=1e-5)
    assert today["worst_harmonic"] == 5 and today["worst_harmonic_pct"] == pytest.approx(0.12552, abs=1e-5)
    assert (today["voltage_thd_limit_pct"], today["harmonic_limit_pct"]) == (8.0, 5.0)
    assert planned["drive_kva"] == pytest.approx(25.2866, abs=1e-4)
    assert planned["voltage_thd_pct"] == pytest.approx(0.52441, abs=1e-5)
    for row in (today, planned):
        assert (row["capacitor_kvar_min"], row["capacitor_kvar_max"]) == (10.0, 60.0)
        assert row["resonance_order_low"] == pytest.approx(14.434, abs=1e-3)
        assert row["resonance_order_high"] == pytest.approx(35.355, abs=1e-3)
        # a step resonates near the 17th, but its voltage amplified ten times stays far below 5 % (H4)
        assert row["resonant_harmonic"] == 0
        assert row["finding"].startswith("within the IEEE 519 limits on this screen")
        # TDD = 0.40 S_drive / S_L (hand calculation H4's formula), S_L the mean of the months' highest interval kVA
        # of the site's meter as the bills read it (models.bill_savings.meter_and_bills, today's motors)
        assert row["current_tdd_pct"] == pytest.approx(40.0 * row["drive_kva"] / demand, rel=1e-12)
        assert row["max_demand_kva"] == pytest.approx(demand, rel=1e-12)


def test_today_and_the_plan_are_screened_on_one_bus(tmp_path):
    # no drive today and a 6,600 V compressor beside 400 V motors; the plan puts the 400 V pump on a drive: both rows
    # are at the drives' bus, 400 V (the rule in models.harmonics.site_screen), not 6,600 V today and 400 V after
    assets = [list(r) for r in ASSETS]
    assets[2][ASSET_HEADER.index("rated_v_v")] = "6600"
    folder = tmp_path / "mv"
    write_case(folder, assets=assets)
    with_flat_tariff(folder)
    case, problems = load_case(folder)
    assert case is not None, [str(p) for p in problems if p.severity == "error"]
    from models.scenario import physics

    op = physics(case, 40.0).operation
    plan = pd.DataFrame({"asset_id": ["P1"], "option_id": ["pm_drive"]})
    screen = harmonics.site_screen(case, op, plan).set_index("scenario")
    assert screen.loc["today", "bus_v_v"] == screen.loc["plan", "bus_v_v"] == 400.0
    assert screen.loc["today", "drive_kva"] == 0.0 and screen.loc["plan", "drive_kva"] > 0.0
    # no drive today, so no worst harmonic (0, as no resonance is 0); the plan's drives name theirs, the 5th of a
    # six-pulse drive (models.harmonics.SPECTRUM_SHAPES)
    assert screen.loc["today", "worst_harmonic"] == 0 and screen.loc["plan", "worst_harmonic"] == 5


def test_site_screen_without_transformer_data_says_what_to_give(small_site):
    case, op = small_site
    from dataclasses import replace

    bare = replace(case, sites=case.sites.drop(columns=["transformer_kva"]))
    screen = harmonics.site_screen(bare, op, None)
    assert screen["scenario"].tolist() == ["today"]
    assert screen["finding"].iloc[0].startswith("not screened: give the site's transformer_kva")
    assert np.isnan(screen["voltage_thd_pct"].iloc[0])


def test_current_limits_at_the_supply_need_its_fault_level(small_site):
    # a site supplied at 20 kV through its own transformer: the current limits apply at the primary, whose
    # short-circuit power is the source's; without supply_fault_kva the current is not screened
    case, op = small_site
    from dataclasses import replace

    sites = case.sites.assign(supply_v_v=20_000.0)
    screen = harmonics.site_screen(replace(case, sites=sites), op, None).iloc[0]
    assert np.isnan(screen["current_tdd_pct"]) and "current distortion not screened" in screen["finding"]
    given = harmonics.site_screen(replace(case, sites=sites.assign(supply_fault_kva=250_000.0)), op, None).iloc[0]
    assert given["pcc_short_circuit_kva"] == pytest.approx(250_000.0)
    # hand calculation H2's series rule at the bus: 1 / (1/250000 + 0.04/500) = 1 / 0.000084 = 11,904.76 kVA
    assert given["short_circuit_kva"] == pytest.approx(11_904.76, abs=1e-2)
    # Table 2's row for I_sc / I_L = 250000 / S_L
    ratio = 250_000.0 / given["max_demand_kva"]
    assert given["current_tdd_limit_pct"] == (20.0 if ratio > 1000 else 15.0 if ratio >= 100 else 12.0)


def test_a_plan_past_the_limits_is_found(small_site):
    # 400 kVA of drives on a 500 kVA, 4 % transformer: THD_V = 100 x 400 / 12500 x 2.592308 = 8.30 % > 8 %
    case, op = small_site
    from dataclasses import replace

    big = replace(case, assets=case.assets.assign(rated_p_kw=np.where(case.assets["asset_id"] == "F1", 400.0 * 0.895 * 0.97,
                                                                    case.assets["rated_p_kw"])))
    row = harmonics.site_screen(big, op, None).iloc[0]
    assert row["drive_kva"] == pytest.approx(400.0)
    assert row["voltage_thd_pct"] == pytest.approx(8.2954, abs=1e-4)
    assert "voltage distortion about 8.3 %" in row["finding"] and "harmonic study" in row["finding"]
    # the 17th at 100 x 17 x 0.041513 x 400 / 12500 = 2.258 %, amplified ten times 22.6 % > 5 %, and the bank's
    # 40 kVAr step resonates at sqrt(12500 / 40) = 17.68, within 10 % of it (H4): a resonance
    assert row["resonant_harmonic"] == 17
    assert "resonate near the 17th harmonic (order 17.7)" in row["finding"]


def test_front_ends_have_their_own_spectra():
    # hand calculation H5: twelve-pulse and active-front-end drives of 100 kVA on 2,000 kVA
    orders, i12 = harmonics.drive_spectrum(front_end="twelve_pulse")
    assert i12[list(orders).index(5)] == 0.0 and i12[list(orders).index(7)] == 0.0
    for front_end, expected in (("twelve_pulse", 7.834), ("active_front_end", 2.028)):
        currents = harmonics.harmonic_currents_kva({front_end: 100.0})
        _, _, thd = harmonics.voltage_harmonics_pct([100.0], [2000.0], currents_kva=currents[None, :])
        assert thd[0] == pytest.approx(expected, abs=5e-4)


def test_drives_of_two_front_ends_add_their_currents_order_by_order():
    # hand calculation H5: 100 kVA six-pulse + 100 kVA active front end on 2,000 kVA
    currents = harmonics.harmonic_currents_kva({"six_pulse_with_choke": 100.0, "active_front_end": 100.0})
    assert currents[0] == pytest.approx(38.954, abs=5e-4)
    _, v_h, thd = harmonics.voltage_harmonics_pct([200.0], [2000.0], currents_kva=currents[None, :])
    assert v_h[0, 0] == pytest.approx(9.739, abs=5e-4)
    assert thd[0] == pytest.approx(14.780, abs=5e-4)
    assert float(np.sqrt((currents ** 2).sum())) == pytest.approx(43.658, abs=5e-4)


def test_the_screen_takes_each_plan_drives_front_end(small_site, tmp_path):
    # a plan whose drive option has an active front end: its drive's input at a displacement power factor of 1.00
    # and the active front end's spectrum (hand calculation H5's factors), beside today's six-pulse drive (H4)
    case, op = small_site
    from dataclasses import replace

    options = case.options.copy()
    options.loc[options["option_id"] == "pm_drive", "drive_front_end"] = "active_front_end"
    screen = harmonics.site_screen(replace(case, options=options), op,
                                   pd.DataFrame({"asset_id": ["P1"], "option_id": ["pm_drive"]})).set_index("scenario")
    afe_kva = 15.0 / 0.9289  # P1's rated input at a displacement power factor of 1.00 (H4's efficiency)
    planned = screen.loc["plan"]
    assert planned["drive_kva"] == pytest.approx(8.6391 + afe_kva, abs=1e-4)
    assert planned["front_ends"] == f"active_front_end {afe_kva:,.0f} kVA, six_pulse_with_choke 9 kVA"
    # the currents of the two drives added order by order (H5's factors 1.037824 and 1.315192 on H4's 8.6391 kVA and
    # 15 / 0.9289 = 16.1481 kVA): root sum of squares 4.0503 kVA (hand calculation H6)
    assert planned["current_tdd_pct"] == pytest.approx(100.0 * 4.0503 / planned["max_demand_kva"], rel=2e-5)


def test_the_plans_screen_in_words_from_hand_made_rows():
    # hand-made screen rows (not the screen's own): S1's plan passes the THD limit with its current not screened and
    # a resonance at the 11th; S2's plan is within every limit; S3 fails today only. Only S1 is named, with its
    # figures against the limits, and what is not in the plan's figures
    def row(site, scenario, thd, tdd, resonant):
        return {"site_id": site, "scenario": scenario, "voltage_thd_pct": thd, "voltage_thd_limit_pct": 8.0,
                "worst_harmonic_pct": 3.0, "harmonic_limit_pct": 5.0, "current_tdd_pct": tdd,
                "current_tdd_limit_pct": 8.0, "resonant_harmonic": resonant}

    screen = pd.DataFrame([row("S1", "today", 2.0, np.nan, 0), row("S1", "plan", 9.25, np.nan, 11),
                           row("S2", "plan", 4.0, 5.0, 0), row("S3", "today", 12.0, 20.0, 0),
                           row("S3", "plan", 4.0, 5.0, 0)])
    assert harmonics.plan_screen_text(screen) == (
        "With the plan, site S1 (voltage THD 9.2 % against 8 %; a capacitor resonance near the 11th harmonic) fails "
        "the harmonic screen. A harmonic study, and the mitigation it asks for (line reactors, detuned banks, filters, "
        "multi-pulse or active-front-end drives), come before the plan's drives and capacitors are installed; their "
        "cost is not in the plan's capital or NPV.")
    assert harmonics.plan_screen_text(screen, ["S2", "S3"]) == ""
