"""Build small cases on disk for tests (folder and workbook forms), from plain Python rows."""

from __future__ import annotations

import csv
from pathlib import Path

ASSET_HEADER = ["asset_id", "site_id", "description", "application", "rated_p_kw", "poles", "supply_f_hz", "rated_v_v",
                "efficiency_class", "rated_efficiency_pct", "rated_power_factor", "rated_speed_rpm", "year_installed",
                "rewind_count", "speed_control", "profile_id", "operating_h_per_yr", "mean_load_pct", "criticality"]

ASSETS = [
    ["P1", "S1", "Cooling water pump", "pump", "15", "4", "50", "400", "IE3", "", "", "1465", "2015", "0", "throttled", "LP1", "", "", "high"],
    ["F1", "S1", "Exhaust fan", "fan", "7.5", "4", "50", "400", "IE2", "89.5", "0.82", "1450", "2012", "1", "fixed", "", "6000", "60", "medium"],
    ["C1", "S1", "Air compressor", "compressor", "75", "2", "50", "400", "unknown", "", "", "", "1995", "2", "fixed", "D1", "", "", "low"],
]
SITES_HEADER = ["site_id", "site_name", "base_p_kw", "base_power_factor"]
SITES = [["S1", "Test works", "50", "0.9"]]
CAPACITORS_HEADER = ["site_id", "bank_id", "rated_q_kvar", "control", "step_q_kvar", "target_power_factor"]
CAPACITORS = [["S1", "B1", "60", "stepped", "10", "0.95"]]
DUTY_HEADER = ["profile_id", "shaft_load_pct", "duration_h_per_yr"]
DUTY = [["D1", "80", "4000"], ["D1", "40", "2000"]]
PROFILE_HEADER = ["profile_id", "timestamp", "shaft_load_pct"]
CASE_TOML = '[case]\nname = "Test case"\ncurrency = "EUR"\ntime_zone = "Europe/Berlin"\n'


def profile_rows(n: int = 48, start_hour: int = 0) -> list[list[str]]:
    """Hourly rows of profile LP1 for 2 January 2025 onwards (no daylight-saving change)."""
    rows = []
    for k in range(n):
        day, hour = divmod(start_hour + k, 24)
        rows.append(["LP1", f"2025-01-{2 + day:02d} {hour:02d}:00", f"{60 + (k % 5) * 5}"])
    return rows


def write_csv(path: Path, header: list[str], rows: list[list[str]]) -> None:
    with open(path, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle)
        writer.writerow(header)
        writer.writerows(rows)


def write_case(folder: Path, assets=None, sites=None, capacitors=None, duty=None, profiles=None,
               asset_header=None, case_toml: str = CASE_TOML) -> Path:
    """Write a valid small case (or a variant) into ``folder`` and return it."""
    folder.mkdir(parents=True, exist_ok=True)
    write_csv(folder / "assets.csv", asset_header or ASSET_HEADER, ASSETS if assets is None else assets)
    write_csv(folder / "sites.csv", SITES_HEADER, SITES if sites is None else sites)
    write_csv(folder / "capacitors.csv", CAPACITORS_HEADER, CAPACITORS if capacitors is None else capacitors)
    write_csv(folder / "duty.csv", DUTY_HEADER, DUTY if duty is None else duty)
    write_csv(folder / "profiles.csv", PROFILE_HEADER, profile_rows() if profiles is None else profiles)
    (folder / "case.toml").write_text(case_toml, encoding="utf-8")
    return folder


FLAT_TARIFF = '''[tariff]
name = "flat test tariff (invented)"
currency = "EUR"
time_zone = "Europe/Berlin"

[[periods]]
code = "all"

[energy]
price_per_kwh = { all = 0.10 }
'''


def with_flat_tariff(folder: Path) -> Path:
    """Give a case written by :func:`write_case` (one site) the flat 0.10/kWh tariff, so it can be priced."""
    (folder / "tariffs").mkdir(exist_ok=True)
    (folder / "tariffs" / "flat.toml").write_text(FLAT_TARIFF, encoding="utf-8")
    sites = (folder / "sites.csv").read_text(encoding="utf-8").splitlines()
    (folder / "sites.csv").write_text(sites[0] + ",tariff_file\n" + sites[1] + ",flat.toml\n", encoding="utf-8")
    return folder


def write_workbook(path: Path) -> Path:
    """Write the same valid small case as one workbook (numbers as numbers, as a spreadsheet holds them)."""
    from openpyxl import Workbook

    def cell(text: str):
        try:
            return float(text) if "." in text else int(text)
        except ValueError:
            return text if text != "" else None

    book = Workbook()
    book.active.title = "case"
    book["case"].append(["key", "value"])
    for key, value in (("name", "Test case"), ("currency", "EUR"), ("time_zone", "Europe/Berlin")):
        book["case"].append([key, value])
    for name, header, rows in (("assets", ASSET_HEADER, ASSETS), ("sites", SITES_HEADER, SITES),
                               ("capacitors", CAPACITORS_HEADER, CAPACITORS), ("duty", DUTY_HEADER, DUTY),
                               ("profiles", PROFILE_HEADER, profile_rows())):
        sheet = book.create_sheet(name)
        sheet.append(header)
        for row in rows:
            sheet.append([cell(v) if name != "profiles" or i != 1 else v for i, v in enumerate(row)])
    book.save(path)
    return path
