"""Write the demo case (an invented scenario) to data/demo/, identically on every run.

The scenario is made up for illustration: a regional water utility's treatment works and the quarry it
shares a grid connection region with. Names, sites and numbers are invented; any likeness to a real
company or plant is accidental. Run ``python data/generate_demo.py`` to regenerate the files; the seed
fixes every random draw, so the output is byte-identical from run to run.
"""

from __future__ import annotations

import csv
import io
import shutil
from pathlib import Path

import numpy as np
import pandas as pd

SEED = 20261201
YEAR = 2025
ZONE = "Europe/Berlin"
HERE = Path(__file__).resolve().parent / "demo"

#: Public holidays of the invented region in the demo year (plant shut, treatment works runs on).
HOLIDAYS = ["2025-01-01", "2025-04-18", "2025-04-21", "2025-05-01", "2025-05-29", "2025-06-09",
            "2025-10-03", "2025-12-25", "2025-12-26"]

SITES = [
    # site_id, site_name, meter_id, tariff_file, base_p_kw, base_power_factor, base_profile_id, supply_v_v,
    # transformer_kva, transformer_impedance_pct, supply_fault_kva (the harmonic screen's supply)
    ("HRW", "Haldane Ridge Water Treatment Works", "M-HRW-01", "example_tou_kw_reactive_ratchet.toml", "", 0.88, "BASE-HRW", 20000,
     4000, 6, 250000),
    ("KGQ", "Kestrel Gorge Quarry and Crushing Plant", "M-KGQ-01", "example_kva_demand.toml", 180, 0.82, "", 20000,
     6300, "", 300000),
]
SITE_COLUMNS = ["site_id", "site_name", "meter_id", "tariff_file", "base_p_kw", "base_power_factor", "base_profile_id",
                "supply_v_v", "transformer_kva", "transformer_impedance_pct", "supply_fault_kva"]

CAPACITORS = [
    # site_id, bank_id, rated_q_kvar, control, step_q_kvar, target_power_factor
    ("HRW", "HRW-C1", 150, "fixed", "", ""),
    ("KGQ", "KGQ-C1", 600, "stepped", 100, 0.95),
]


def _assets() -> list[dict]:
    """The invented asset register (one dict per motor)."""
    rows: list[dict] = []

    def add(**kw):
        rows.append(kw)

    # --- Haldane Ridge water treatment works (continuous, 8,760 h) ------------------------------
    for n, (kw, year, rew, ctrl, cls, prof) in enumerate([
        (250, 1996, 2, "throttled", "unknown", "RW-PUMP"),
        (250, 2004, 1, "throttled", "IE1", "RW-PUMP"),
        (250, 2019, 0, "drive", "IE3", "RW-PUMP-VSD"),
    ], start=1):
        add(asset_id=f"HRW-P0{n}", site_id="HRW", description=f"Raw water intake pump {n}", application="pump",
            rated_p_kw=kw, poles=4, rated_v_v=400 if kw < 200 else 690, efficiency_class=cls, year_installed=year,
            rewind_count=rew, speed_control=ctrl, profile_id=prof, criticality="high", static_head_frac=0.35)
    for n, (kw, year, rew, prof) in enumerate([(355, 1999, 1, "HL-PUMP"), (355, 2008, 0, "HL-PUMP"),
                                               (355, 2012, 1, "HL-PUMP-B")], start=1):
        add(asset_id=f"HRW-P1{n}", site_id="HRW", description=f"High-lift treated water pump {n}", application="pump",
            rated_p_kw=kw, poles=2, rated_v_v=690, efficiency_class="IE2" if year >= 2011 else "unknown",
            year_installed=year, rewind_count=rew, speed_control="throttled", profile_id=prof, criticality="high",
            static_head_frac=0.55)
    for n, (kw, year, ctrl, prof) in enumerate([(200, 2001, "throttled", "AER-BLOWER"), (200, 2001, "throttled", "AER-BLOWER"),
                                                (200, 2016, "drive", "AER-BLOWER-VSD"), (132, 2010, "throttled", "AER-BLOWER-B")], start=1):
        add(asset_id=f"HRW-B0{n}", site_id="HRW", description=f"Aeration blower {n} (inlet vanes)" if ctrl == "throttled"
            else f"Aeration blower {n}", application="fan", rated_p_kw=kw, poles=2, rated_v_v=400,
            efficiency_class="IE2" if year >= 2011 else "unknown", year_installed=year, rewind_count=1 if year < 2005 else 0,
            # the diffusers' submergence sets most of an aeration blower's pressure, whatever the air flow
            # (common practice, from memory: 0.6-0.8 of the design pressure is static)
            speed_control=ctrl, profile_id=prof, criticality="high", static_head_frac=0.7)
    for n in range(1, 5):
        add(asset_id=f"HRW-M0{n}", site_id="HRW", description=f"Anoxic zone mixer {n}", application="mixer",
            rated_p_kw=11, poles=6, rated_v_v=400, efficiency_class="IE2", year_installed=2012, rewind_count=0,
            speed_control="fixed", operating_h_per_yr=8760, mean_load_pct=68, criticality="medium")
    for n in range(1, 4):
        add(asset_id=f"HRW-M1{n}", site_id="HRW", description=f"Sludge tank mixer {n} (oversized)", application="mixer",
            rated_p_kw=30, poles=6, rated_v_v=400, efficiency_class="unknown", year_installed=1998, rewind_count=n - 1,
            speed_control="fixed", operating_h_per_yr=8760, mean_load_pct=34, criticality="low")
    for n, (kw, prof) in enumerate([(75, "BW-PUMP"), (75, "BW-PUMP"), (45, "BW-AIR")], start=1):
        add(asset_id=f"HRW-W0{n}", site_id="HRW", description="Filter backwash pump" if n < 3 else "Backwash air scour blower",
            application="pump" if n < 3 else "fan", rated_p_kw=kw, poles=4, rated_v_v=400, efficiency_class="IE1",
            year_installed=2003, rewind_count=1, speed_control="throttled" if n < 3 else "fixed", profile_id=prof,
            criticality="medium", static_head_frac=0.2 if n < 3 else None)
    add(asset_id="HRW-P21", site_id="HRW", description="Wash-water recovery pump (globe valve throttled)", application="pump",
        rated_p_kw=30, poles=4, rated_v_v=400, efficiency_class="IE1", year_installed=2006, rewind_count=1,
        speed_control="throttled", profile_id="RW-PUMP", criticality="medium", static_head_frac=0.4)
    for n in range(1, 7):
        add(asset_id=f"HRW-D0{n}", site_id="HRW", description=f"Chemical dosing pump {n}", application="pump",
            rated_p_kw=0.75 if n < 4 else 1.5, poles=4, rated_v_v=400, efficiency_class="IE2", year_installed=2014,
            speed_control="drive", profile_id="DOSING", criticality="high")
    for n in range(1, 5):
        add(asset_id=f"HRW-S0{n}", site_id="HRW", description=f"Sludge transfer pump {n}", application="pump",
            rated_p_kw=18.5, poles=4, rated_v_v=400, efficiency_class="unknown", year_installed=1993 + 3 * n,
            rewind_count=max(0, 3 - n), speed_control="fixed", profile_id="SLUDGE-DUTY", criticality="medium")
    add(asset_id="HRW-C01", site_id="HRW", description="Sludge dewatering centrifuge", application="other",
        rated_p_kw=90, poles=4, rated_v_v=400, efficiency_class="IE2", year_installed=2013, speed_control="drive",
        operating_h_per_yr=4200, mean_load_pct=72, criticality="medium")
    for n in range(1, 5):
        add(asset_id=f"HRW-V0{n}", site_id="HRW", description=f"Building ventilation fan {n} (oversized)", application="fan",
            rated_p_kw=15, poles=4, rated_v_v=400, efficiency_class="unknown", year_installed=2000, rewind_count=0,
            speed_control="fixed", operating_h_per_yr=6500, mean_load_pct=38, criticality="low")
    for n in range(1, 3):
        add(asset_id=f"HRW-A0{n}", site_id="HRW", description=f"Service air compressor {n}", application="compressor",
            rated_p_hp=50, poles=2, rated_v_v=400, efficiency_class="unknown", year_installed=2006, rewind_count=1,
            speed_control="fixed", operating_h_per_yr=3800, mean_load_pct=82, criticality="low",
            notes="imported package unit; nameplate in hp")
    add(asset_id="HRW-R01", site_id="HRW", description="Clarifier scraper drive", application="other", rated_p_kw=2.2,
        poles=4, rated_v_v=400, efficiency_class="IE1", year_installed=2002, speed_control="fixed",
        operating_h_per_yr=8760, mean_load_pct=55, criticality="medium")
    add(asset_id="HRW-R02", site_id="HRW", description="Clarifier scraper drive", application="other", rated_p_kw=2.2,
        poles=4, rated_v_v=400, efficiency_class="IE3", year_installed=2021, speed_control="fixed",
        operating_h_per_yr=8760, mean_load_pct=55, criticality="medium")

    # --- Kestrel Gorge quarry (two shifts on weekdays, Saturday morning) ---------------------------
    add(asset_id="KGQ-CR01", site_id="KGQ", description="Primary gyratory crusher", application="crusher",
        rated_p_kw=1600, poles=6, rated_v_v=6600, efficiency_class="unknown", rated_efficiency_pct=95.6,
        rated_power_factor=0.84, rated_speed_rpm=990, year_installed=1994, rewind_count=1, speed_control="fixed",
        profile_id="PRIMARY-CRUSHER", criticality="high", start_duty="heavy",
        notes="6.6 kV; candidate for a leading-power-factor wound-field synchronous motor")
    add(asset_id="KGQ-AC01", site_id="KGQ", description="Main plant air compressor", application="compressor",
        rated_p_kw=710, poles=4, rated_v_v=6600, efficiency_class="unknown", rated_efficiency_pct=95.5,
        rated_power_factor=0.86, year_installed=2005, rewind_count=0, speed_control="fixed",
        profile_id="PLANT-AIR", criticality="high")
    for n in range(1, 3):
        add(asset_id=f"KGQ-CR1{n}", site_id="KGQ", description=f"Secondary cone crusher {n}", application="crusher",
            rated_p_kw=250, poles=4, rated_v_v=690, efficiency_class="IE2" if n == 2 else "unknown", year_installed=2000 + 11 * (n - 1),
            rewind_count=2 - n, speed_control="fixed", profile_id="SECONDARY-CRUSHER", criticality="high", start_duty="heavy")
    add(asset_id="KGQ-CR21", site_id="KGQ", description="Tertiary vertical-shaft impactor", application="crusher",
        rated_p_kw=315, poles=4, rated_v_v=690, efficiency_class="IE2", year_installed=2013, speed_control="fixed",
        profile_id="SECONDARY-CRUSHER", criticality="medium", start_duty="heavy")
    for n in range(1, 13):
        kw = [90, 75, 55, 55, 45, 37, 37, 30, 22, 22, 15, 11][n - 1]
        add(asset_id=f"KGQ-CV{n:02d}", site_id="KGQ", description=f"Belt conveyor CV{n:02d}", application="conveyor",
            rated_p_kw=kw, poles=4, rated_v_v=400, efficiency_class="unknown" if n % 3 else "IE2",
            year_installed=1995 + n, rewind_count=1 if n % 4 == 0 else 0, speed_control="fixed",
            profile_id="CONVEYOR", criticality="high" if n <= 4 else "medium")
    for n in range(1, 5):
        add(asset_id=f"KGQ-SC0{n}", site_id="KGQ", description=f"Vibrating screen {n}", application="other",
            rated_p_kw=[45, 45, 30, 30][n - 1], poles=6, rated_v_v=400, efficiency_class="unknown", year_installed=2002,
            speed_control="fixed", profile_id="SCREEN", criticality="medium")
    for n in range(1, 4):
        add(asset_id=f"KGQ-F0{n}", site_id="KGQ", description=f"Dust collector fan {n} (damper controlled)", application="fan",
            rated_p_kw=[132, 110, 75][n - 1], poles=4, rated_v_v=400, efficiency_class="unknown", year_installed=1998 + 5 * n,
            rewind_count=1 if n == 1 else 0, speed_control="throttled", profile_id="DUST-FAN", criticality="medium",
            static_head_frac=0.0)  # filter bags and ducts: all friction
    for n in range(1, 4):
        add(asset_id=f"KGQ-DW0{n}", site_id="KGQ", description=f"Pit dewatering pump {n}", application="pump",
            rated_p_kw=[160, 160, 90][n - 1], poles=2, rated_v_v=690 if n < 3 else 400, efficiency_class="unknown",
            year_installed=1997 + 4 * n, rewind_count=3 - n, speed_control="fixed", profile_id="DEWATER", criticality="medium")
    for n in range(1, 5):
        add(asset_id=f"KGQ-SL0{n}", site_id="KGQ", description=f"Wash plant slurry pump {n}", application="pump",
            rated_p_kw=[55, 55, 37, 37][n - 1], poles=4, rated_v_v=400, efficiency_class="unknown", year_installed=2004,
            rewind_count=1, speed_control="throttled", profile_id="SLURRY", criticality="medium", static_head_frac=0.4)
    for n in range(1, 3):
        add(asset_id=f"KGQ-WW0{n}", site_id="KGQ", description=f"Log washer {n}", application="mixer",
            rated_p_kw=75, poles=6, rated_v_v=400, efficiency_class="unknown", year_installed=2004, speed_control="fixed",
            profile_id="CONVEYOR", criticality="medium", start_duty="heavy")
    for n in range(1, 3):
        add(asset_id=f"KGQ-WP0{n}", site_id="KGQ", description=f"Process water booster pump {n} (oversized)", application="pump",
            rated_p_kw=45, poles=2, rated_v_v=400, efficiency_class="IE1", year_installed=2008, speed_control="fixed",
            operating_h_per_yr=4100, mean_load_pct=36, criticality="low")
    for n in range(1, 7):
        add(asset_id=f"KGQ-AUX{n}", site_id="KGQ", description=f"Workshop and lube auxiliary {n}", application="other",
            rated_p_kw=[0.75, 1.1, 1.5, 2.2, 3, 4][n - 1], poles=4, rated_v_v=400, efficiency_class="unknown",
            year_installed=2009, speed_control="fixed", operating_h_per_yr=2500, mean_load_pct=60, criticality="low")
    add(asset_id="KGQ-HP01", site_id="KGQ", description="Crusher lube and hydraulic pump", application="pump",
        rated_p_kw=7.5, poles=4, rated_v_v=400, efficiency_class="IE3", year_installed=2019, speed_control="fixed",
        profile_id="CONVEYOR", criticality="high")
    # nameplate data read off the newer motors (the rest is left blank, as in most registers)
    nameplates = {
        "HRW-P03": (95.6, 0.86, 1487), "HRW-P13": (95.4, 0.89, 2982), "HRW-B03": (95.3, 0.88, 2979),
        "HRW-B04": (94.9, 0.87, 2975), "HRW-C01": (94.5, 0.85, 1480), "KGQ-CR12": (95.0, 0.85, 1486),
        "KGQ-CR21": (95.2, 0.86, 1488), "KGQ-F03": (93.9, 0.84, 1478), "HRW-R02": (86.9, 0.76, 1440),
        "KGQ-HP01": (90.9, 0.80, 1455), "HRW-M01": (90.1, 0.74, 970), "HRW-M02": (90.1, 0.74, 970),
    }
    for row in rows:
        if row["asset_id"] in nameplates:
            eff, pf, rpm = nameplates[row["asset_id"]]
            row.update(rated_efficiency_pct=eff, rated_power_factor=pf, rated_speed_rpm=rpm)
        row.setdefault("load_type", "variable_torque" if row["application"] in ("pump", "fan") else "constant_torque")
    return rows


ASSET_COLUMNS = ["asset_id", "site_id", "description", "application", "load_type", "rated_p_kw", "rated_p_hp", "poles",
                 "supply_f_hz", "rated_v_v", "efficiency_class", "rated_efficiency_pct", "rated_power_factor",
                 "rated_speed_rpm", "year_installed", "rewind_count", "speed_control", "static_head_frac", "profile_id",
                 "operating_h_per_yr", "mean_load_pct", "start_duty", "criticality", "notes"]


def _csv(rows: list[dict] | list[tuple], columns: list[str]) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(columns)
    for row in rows:
        values = [row.get(c, "") for c in columns] if isinstance(row, dict) else list(row)
        writer.writerow(["" if v is None else v for v in values])
    return buffer.getvalue()


def _profiles(rng: np.random.Generator) -> pd.DataFrame:
    """Hourly profiles for the demo year, in local time with UTC offsets."""
    index = pd.date_range(f"{YEAR}-01-01", f"{YEAR + 1}-01-01", freq="h", inclusive="left", tz=ZONE)
    hour = index.hour.to_numpy() + index.minute.to_numpy() / 60
    day_of_year = index.day_of_year.to_numpy()
    weekday = index.day_of_week.to_numpy()
    holiday = np.isin(index.strftime("%Y-%m-%d"), HOLIDAYS)
    season = np.cos(2 * np.pi * (day_of_year - 200) / 365.0)  # +1 in mid-July, -1 in mid-January
    diurnal = 0.5 * (1 - np.cos(2 * np.pi * (hour - 4) / 24))  # 0 at 04:00, 1 at 16:00
    n = len(index)

    def noise(scale: float) -> np.ndarray:
        return rng.normal(0.0, scale, n)

    quarry_shift = (weekday < 5) & (hour >= 6) & (hour < 22) & ~holiday
    quarry_sat = (weekday == 5) & (hour >= 6) & (hour < 14) & ~holiday
    quarry_on = quarry_shift | quarry_sat
    maintenance_day = (weekday == 2) & (hour >= 6) & (hour < 10)  # weekly planned stop of the crushing line
    crushing = quarry_on & ~maintenance_day

    out: dict[str, np.ndarray] = {}
    water_demand = 0.78 + 0.10 * diurnal + 0.06 * season
    out["RW-PUMP"] = np.clip(100 * (0.74 + 0.06 * season) + noise(2.0), 55, 98)
    out["RW-PUMP-VSD"] = np.clip(100 * (0.45 + 0.20 * diurnal + 0.08 * season) + noise(3.0), 20, 95)
    out["HL-PUMP"] = np.clip(100 * water_demand + noise(2.5), 55, 100)
    out["HL-PUMP-B"] = np.where(diurnal > 0.55, np.clip(100 * water_demand + noise(2.5), 55, 100), 0.0)
    aeration = 0.62 + 0.12 * diurnal + 0.08 * season
    out["AER-BLOWER"] = np.clip(100 * aeration + noise(3.0), 40, 98)
    out["AER-BLOWER-VSD"] = np.clip(100 * (aeration - 0.15) + noise(4.0), 25, 95)
    out["AER-BLOWER-B"] = np.where(aeration + noise(0.05) > 0.72, np.clip(100 * aeration + noise(3.0), 40, 98), 0.0)
    backwash = (hour >= 1) & (hour < 3) & (day_of_year % 2 == 0)
    out["BW-PUMP"] = np.where(backwash, np.clip(88 + noise(2.0), 80, 96), 0.0)
    out["BW-AIR"] = np.where(backwash, np.clip(85 + noise(2.0), 78, 95), 0.0)
    out["DOSING"] = np.clip(100 * (0.35 + 0.15 * diurnal) + noise(2.0), 15, 70)
    out["PRIMARY-CRUSHER"] = np.where(crushing, np.clip(72 + 10 * np.sin(hour) + noise(7.0), 35, 105), 0.0)
    out["SECONDARY-CRUSHER"] = np.where(crushing, np.clip(68 + noise(8.0), 30, 100), 0.0)
    compressor_on = quarry_on | ((hour >= 5) & (hour < 6) & (weekday < 5))
    out["PLANT-AIR"] = np.where(compressor_on, np.clip(82 + noise(5.0), 60, 100), np.clip(18 + noise(2.0), 12, 25))
    out["CONVEYOR"] = np.where(crushing, np.clip(58 + noise(6.0), 30, 90), 0.0)
    out["SCREEN"] = np.where(crushing, np.clip(64 + noise(3.0), 50, 80), 0.0)
    out["DUST-FAN"] = np.where(quarry_on, np.clip(80 + noise(3.0), 70, 92), 0.0)
    rain = np.convolve(rng.gamma(0.25, 1.0, n), np.ones(72) / 72, mode="same")
    dewater = rain > np.quantile(rain, 0.45)
    out["DEWATER"] = np.where(dewater, np.clip(84 + noise(3.0), 75, 95), 0.0)
    out["SLURRY"] = np.where(crushing, np.clip(76 + noise(4.0), 60, 92), 0.0)
    # non-motor load of the water works (lighting, UV, heating, laboratory), measured at the meter
    base = 140 + 35 * np.clip(-season, 0, None) + 20 * ((hour >= 7) & (hour < 18) & (weekday < 5)) + noise(4.0)
    frames = []
    for profile_id, values in out.items():
        frames.append(pd.DataFrame({"profile_id": profile_id, "timestamp": index, "shaft_load_pct": np.round(values, 2),
                                    "input_kw": np.nan}))
    frames.append(pd.DataFrame({"profile_id": "BASE-HRW", "timestamp": index, "shaft_load_pct": np.nan,
                                "input_kw": np.round(np.clip(base, 80, None), 1)}))
    return pd.concat(frames, ignore_index=True)


DUTY = [
    # profile_id, shaft_load_pct, duration_h_per_yr: sludge transfer pumps cycle on tank level
    ("SLUDGE-DUTY", 85, 1800), ("SLUDGE-DUTY", 60, 1400), ("SLUDGE-DUTY", 0, 5560),
]

CASE_TOML = '''# INVENTED DEMO CASE: every name, site and number here is made up for illustration.
[case]
name = "Haldane Ridge and Kestrel Gorge (invented demo)"
description = "Invented scenario: a regional water utility's treatment works and a neighbouring quarry, 50 Hz, two meters."
currency = "EUR"
power_unit = "kW"
time_zone = "Europe/Berlin"
invented = true
'''

FINANCE_TOML = '''# INVENTED DEMO CASE: finance assumptions for illustration (see docs/finance.md for every key).
currency = "EUR"
discount_rate_frac = 0.08
rate_basis = "real"
inflation_frac = 0.02
horizon_yr = 15
escalation_energy_frac = 0.01
escalation_demand_frac = 0.01
escalation_reactive_frac = 0.0
grid_co2_kg_per_kwh = 0.35
grid_co2_decline_frac = 0.03
replacement_mode = "replace_now"
downtime_cost_per_h = 0.0
capacitor_cost_per_kvar = 35.0
budget_per_yr = [250000, 250000, 150000]
monte_carlo_draws = 1000
monte_carlo_seed = 20261201
'''

SCENARIOS_TOML = '''# INVENTED DEMO CASE: named scenarios for illustration (see docs/case-format.md, "Scenarios").
# Each starts from finance.toml and changes only the keys it names; `drivecase run` writes the plan under each
# beside the case as written (scenarios.csv), and the pack and the dashboard show them side by side.

[[scenarios]]
name = "Cheaper money"
discount_rate_frac = 0.06

[[scenarios]]
name = "Dearer electricity, larger budget"
energy_price_factor = 1.2
budget_per_yr = [400000, 300000, 200000]

[[scenarios]]
name = "Wait for failures"
replacement_mode = "replace_at_failure"
'''

#: The sites' bills of 2024 (invented): a year before the profiles' 2025, set near today's fleet as the demo
#: models it with a seeded scatter (water works: energy a few % above the model, peaks of 15-min windows above
#: the hourly model's; quarry: energy about 1 % below, its kVA demand not given). Columns of BILL_COLUMNS.
BILL_COLUMNS = ["site_id", "month", "energy_kwh", "peak_kw", "reactive_kvarh", "amount"]
BILLS = [
    ("HRW", "2024-01", 1524140, 2585, 807750, 293818), ("HRW", "2024-02", 1321380, 2546, 725180, 262305),
    ("HRW", "2024-03", 1593740, 2680, 805300, 305453), ("HRW", "2024-04", 1517620, 2773, 783380, 290014),
    ("HRW", "2024-05", 1632270, 2798, 801370, 306675), ("HRW", "2024-06", 1710620, 2810, 812340, 327369),
    ("HRW", "2024-07", 1744390, 2891, 858020, 337436), ("HRW", "2024-08", 1733680, 2894, 858150, 328794),
    ("HRW", "2024-09", 1643670, 2922, 793970, 321756), ("HRW", "2024-10", 1602920, 2689, 840650, 313942),
    ("HRW", "2024-11", 1487740, 2575, 721550, 288746), ("HRW", "2024-12", 1474640, 2579, 826510, 283802),
    ("KGQ", "2024-01", 1542000, "", "", 332172), ("KGQ", "2024-02", 1472640, "", "", 320265),
    ("KGQ", "2024-03", 1489080, "", "", 331654), ("KGQ", "2024-04", 1518840, "", "", 332214),
    ("KGQ", "2024-05", 1515430, "", "", 326239), ("KGQ", "2024-06", 1541790, "", "", 331902),
    ("KGQ", "2024-07", 1628510, "", "", 345921), ("KGQ", "2024-08", 1531120, "", "", 330462),
    ("KGQ", "2024-09", 1557930, "", "", 340510), ("KGQ", "2024-10", 1564880, "", "", 340329),
    ("KGQ", "2024-11", 1484080, "", "", 322932), ("KGQ", "2024-12", 1453260, "", "", 314680),
]

README = """# Demo case (invented)

Everything in this folder is **invented** for illustration: the utility, the quarry, the sites, the
motors, the profiles and the prices. Any likeness to a real company or plant is accidental.

- `case.toml`: case settings (currency, time zone).
- `assets.csv`: the asset register (motors of two sites, 0.75 kW to 1.6 MW).
- `sites.csv`, `capacitors.csv`: meters, non-motor load, the supply (for the harmonic screen) and existing
  capacitor banks.
- `profiles.parquet`: one year of hourly shaft-load profiles (and one measured base-load profile).
- `duty.csv`: a duty table for cycling pumps.
- `finance.toml`: discount rate, horizon, escalation, CO2 factor and capital budgets (illustrative).
- `scenarios.toml`: three named scenarios, each changing some of those assumptions.
- `tariffs/`: the two sites' tariffs (copies of invented example tariffs from `data/tariffs/`).
- `bill_history.csv`: the two sites' monthly bills of 2024 (invented), to set today's fleet as modelled
  beside them.

Regenerate with `.venv/bin/python data/generate_demo.py` (seeded: the output is identical on every run).
"""


def write_demo(target: Path = HERE) -> None:
    """Write every file of the demo case into ``target``."""
    rng = np.random.default_rng(SEED)
    target.mkdir(parents=True, exist_ok=True)
    assets = _assets()
    for row in assets:
        row.setdefault("supply_f_hz", 50)
    (target / "assets.csv").write_text(_csv(assets, ASSET_COLUMNS), encoding="utf-8")
    (target / "sites.csv").write_text(_csv(SITES, SITE_COLUMNS), encoding="utf-8")
    (target / "capacitors.csv").write_text(_csv(CAPACITORS, ["site_id", "bank_id", "rated_q_kvar", "control", "step_q_kvar",
                                                             "target_power_factor"]), encoding="utf-8")
    (target / "duty.csv").write_text(_csv(DUTY, ["profile_id", "shaft_load_pct", "duration_h_per_yr"]), encoding="utf-8")
    (target / "bill_history.csv").write_text(_csv(BILLS, BILL_COLUMNS), encoding="utf-8")
    (target / "case.toml").write_text(CASE_TOML, encoding="utf-8")
    (target / "finance.toml").write_text(FINANCE_TOML, encoding="utf-8")
    (target / "scenarios.toml").write_text(SCENARIOS_TOML, encoding="utf-8")
    (target / "README.md").write_text(README, encoding="utf-8")
    (target / "tariffs").mkdir(exist_ok=True)
    for site in SITES:
        shutil.copyfile(HERE.parent / "tariffs" / site[3], target / "tariffs" / site[3])
    profiles = _profiles(rng)
    profiles.to_parquet(target / "profiles.parquet", index=False, compression="zstd")


if __name__ == "__main__":
    write_demo()
    print(f"demo case written to {HERE}")
