"""Write the malformed-input corpus (run once; its output is checked in byte for byte).

Each entry is a folder under ``tests/malformed/``. An *overlay* entry holds only the files that differ
from the valid small case of ``tests/casebuilder.py``; the tests copy that case into a temporary folder,
lay the entry's files over it and load it. Entries listed in ``STANDALONE`` are whole cases on their own.
Bytes are written exactly (encodings, byte-order marks, line ends), so ``.gitattributes`` marks the
folder as binary for git. Usage: ``python tests/malformed/make_corpus.py`` from the repository root.
"""

from __future__ import annotations

import shutil
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

import casebuilder as cb  # noqa: E402

#: Entries that are complete on their own (not laid over the valid case).
STANDALONE = ("folder_without_tables",)


def _csv(header: list[str], rows: list[list[str]], sep: str = ",", eol: str = "\n") -> str:
    return eol.join(sep.join(r) for r in [header] + rows) + eol


def _assets(change: dict[tuple[int, str], str] | None = None, header: list[str] | None = None, sep: str = ",",
            eol: str = "\n") -> str:
    rows = [list(r) for r in cb.ASSETS]
    for (i, column), value in (change or {}).items():
        rows[i][cb.ASSET_HEADER.index(column)] = value
    return _csv(header or cb.ASSET_HEADER, rows, sep, eol)


def _profiles(stamps: list[str], values: list[str] | None = None, column: str = "shaft_load_pct") -> str:
    values = values or ["50"] * len(stamps)
    return _csv(["profile_id", "timestamp", column], [["LP1", t, v] for t, v in zip(stamps, values)])


SITES_WITH_TARIFF = "site_id,site_name,base_p_kw,base_power_factor,tariff_file\nS1,Test works,50,0.9,t.toml\n"


def _tariff(periods: str, extra: str = "", energy: str = "price_per_kwh = { day = 0.20, night = 0.12 }") -> str:
    return ('[tariff]\nname = "Test tariff (invented)"\ncurrency = "EUR"\ntime_zone = "Europe/Berlin"\n'
            f"{extra}\n{periods}\n[energy]\n{energy}\n")


DAY_NIGHT = ('[[periods]]\ncode = "day"\nhours = ["06:00-22:00"]\n\n'
             '[[periods]]\ncode = "night"\nhours = ["22:00-06:00"]\n')


def entries() -> dict[str, dict[str, bytes | str]]:
    """Return entry name -> {relative path: content} (str is written as UTF-8, bytes as is)."""
    assets_text = _assets()
    header_only = _csv(cb.ASSET_HEADER, [])
    kw = cb.ASSET_HEADER.index("rated_p_kw")
    e: dict[str, dict[str, bytes | str]] = {}
    # --- wrong types, renamed and missing columns -----------------------------------------------------
    e["wrong_types"] = {"assets.csv": _assets({(0, "poles"): "four", (1, "rated_p_kw"): "seven", (2, "rewind_count"): "1.5"})}
    e["missing_required_column"] = {"assets.csv": _csv([h for h in cb.ASSET_HEADER if h != "poles"],
                                                       [[v for h, v in zip(cb.ASSET_HEADER, r) if h != "poles"] for r in cb.ASSETS])}
    e["misspelt_required_column"] = {"assets.csv": _assets(header=["Pols" if h == "poles" else h for h in cb.ASSET_HEADER])}
    e["renamed_columns_aliases"] = {"assets.csv": _assets(header=[
        {"asset_id": "Asset Tag", "site_id": "Site", "rated_p_kw": "Motor kW", "rated_v_v": "Voltage (V)",
         "rated_speed_rpm": "Speed (rpm)", "poles": "Number of poles"}.get(h, h) for h in cb.ASSET_HEADER])}
    e["header_case_and_spaces"] = {"assets.csv": _assets(header=["  " + h.upper().replace("_", " ") + " " for h in cb.ASSET_HEADER])}
    e["duplicate_column"] = {"sites.csv": "site_id,site,site_name,base_p_kw\nS1,S1,Test works,50\n"}
    # --- units off by 1000 ----------------------------------------------------------------------------
    e["rating_in_watts"] = {"assets.csv": _assets({(2, "rated_p_kw"): "75000"})}
    e["rating_in_watts_within_range"] = {"assets.csv": _assets({(1, "rated_p_kw"): "7500"})}
    e["rating_header_in_watts"] = {"assets.csv": _assets(
        {(0, "rated_p_kw"): "15000", (1, "rated_p_kw"): "7500", (2, "rated_p_kw"): "75000"},
        header=["Rated power (W)" if h == "rated_p_kw" else h for h in cb.ASSET_HEADER])}
    e["voltage_in_kilovolts"] = {"assets.csv": _assets({(0, "rated_v_v"): "0.4"})}
    e["input_profile_in_watts"] = {"profiles.csv": _profiles([f"2025-01-02 {h:02d}:00" for h in range(24)],
                                                             [str(9000 + 100 * h) for h in range(24)], "input_kw")}
    e["load_as_fraction"] = {"assets.csv": _assets({(1, "mean_load_pct"): "0.6"}),
                             "profiles.csv": _profiles([f"2025-01-02 {h:02d}:00" for h in range(24)],
                                                       [f"0.{5 + h % 4}" for h in range(24)])}
    # --- number formats and separators -----------------------------------------------------------------
    e["semicolons_decimal_commas"] = {"assets.csv": _assets({(1, "rated_p_kw"): "7,5", (1, "rated_power_factor"): "0,82"}, sep=";")}
    e["thousands_dot_decimal_comma"] = {"assets.csv": _assets({(1, "operating_h_per_yr"): "6.000,5"}, sep=";")}
    e["ambiguous_thousands_comma"] = {"assets.csv": _assets({(1, "operating_h_per_yr"): '"6,000"'})}
    e["non_finite_numbers"] = {"assets.csv": _assets({(0, "rated_p_kw"): "nan", (1, "rated_p_kw"): "inf", (2, "rated_v_v"): "1e999"})}
    e["spreadsheet_error_values"] = {"assets.csv": _assets({(1, "rated_power_factor"): "#DIV/0!", (1, "rated_efficiency_pct"): "#N/A"})}
    # --- encodings -------------------------------------------------------------------------------------
    german = assets_text.replace("Cooling water pump", "Kühlwasserpumpe Süd")
    e["utf8_bom"] = {"assets.csv": b"\xef\xbb\xbf" + german.encode("utf-8")}
    e["windows_1252"] = {"assets.csv": german.encode("cp1252")}
    e["latin_1"] = {"assets.csv": assets_text.replace("Cooling water pump", "Pumpe für Öl").encode("latin-1")}
    e["utf16_bom"] = {"assets.csv": german.encode("utf-16")}
    e["utf16_without_bom"] = {"assets.csv": german.encode("utf-16-le")}
    e["crlf_line_ends"] = {"assets.csv": _assets(eol="\r\n").encode("utf-8")}
    e["cr_line_ends"] = {"assets.csv": _assets(eol="\r").encode("utf-8")}
    # --- empty and broken files ------------------------------------------------------------------------
    e["zero_byte_file"] = {"sites.csv": b""}
    e["blank_lines_only"] = {"assets.csv": b"\n  \n\t\n"}
    e["comments_only"] = {"assets.csv": "# asset register\n# nothing here yet\n"}
    e["header_only_register"] = {"assets.csv": header_only}
    e["header_only_sites"] = {"sites.csv": "site_id,site_name,base_p_kw,base_power_factor\n"}
    e["stray_extra_cell"] = {"assets.csv": assets_text.replace("Exhaust fan,fan,", "Exhaust fan,fan,spare,")}
    e["trailing_empty_columns"] = {"assets.csv": assets_text.replace("\n", ",,\n")}
    e["quote_left_open"] = {"assets.csv": assets_text.replace("Cooling water pump", '"Cooling water pump')}
    e["quote_open_swallows_rows"] = {"assets.csv": assets_text.replace("Cooling water pump", '"Cooling water pump')
                                     .replace("Exhaust fan", 'Exhaust fan"')}
    e["binary_garbage"] = {"assets.csv": bytes((i * 73 + 41) % 256 for i in range(3000))}
    e["workbook_renamed_csv"] = {"assets.csv": b"PK\x03\x04\x14\x00\x06\x00" + bytes(200)}
    e["nul_bytes_in_text"] = {"assets.csv": assets_text.replace("pump,", "pu\x00mp,").encode("utf-8")}
    e["damaged_parquet"] = {"profiles.parquet": b"PAR1 this is not really parquet PAR1", "profiles.csv": None}
    e["csv_and_parquet_both"] = {"profiles.parquet": b"PAR1 placeholder PAR1"}
    e["unknown_files_in_folder"] = {"asset.csv": assets_text, "notes.txt": "anything\n"}
    e["upper_case_file_names"] = {"Assets.CSV": assets_text, "assets.csv": None}
    # --- timestamps ------------------------------------------------------------------------------------
    # Europe/Berlin: clocks go from 02:00 to 03:00 on 30 March 2025 and from 03:00 back to 02:00 on
    # 26 October 2025 (EU summer-time rule, Directive 2000/84/EC).
    e["dst_spring_gap"] = {"profiles.csv": _profiles([f"2025-03-30 {h:02d}:00" for h in range(24)])}
    e["dst_autumn_hour_once"] = {"profiles.csv": _profiles([f"2025-10-26 {h:02d}:00" for h in range(24)])}
    e["dst_autumn_hour_twice_in_order"] = {"profiles.csv": _profiles(
        [f"2025-10-26 {h:02d}:00" for h in (0, 1, 2, 2, 3, 4, 5)])}
    # local (Europe/Berlin, UTC+1 in January) hours 0, 1, 2, 3, 4 written five ways
    e["mixed_offsets"] = {"profiles.csv": _profiles(["2025-01-02T00:00+01:00", "2025-01-02T00:00:00Z", "2025-01-02 02:00",
                                                     "2025-01-01T21:00-05:00", "2025-01-02T04:00+0100"])}
    e["duplicate_timestamps"] = {"profiles.csv": _profiles([f"2025-01-02 {h:02d}:00" for h in (0, 1, 2, 2, 3)])}
    e["timestamps_as_serial_numbers"] = {"profiles.csv": _profiles(["45659", "45659.041666667", "45659.083333333"])}
    e["unreadable_timestamps"] = {"profiles.csv": _profiles(["2025-01-02 00:00", "yesterday", "", "2025-13-45 10:00"])}
    e["irregular_resolution"] = {"profiles.csv": _profiles([f"2025-01-02 00:{m:02d}" for m in range(0, 60, 10)])}
    # --- tariffs ---------------------------------------------------------------------------------------
    e["tariff_overlapping_periods"] = {"sites.csv": SITES_WITH_TARIFF, "tariffs/t.toml": _tariff(
        '[[periods]]\ncode = "day"\nhours = ["06:00-22:00"]\n\n[[periods]]\ncode = "night"\nhours = ["20:00-06:00"]\n')}
    e["tariff_missing_period"] = {"sites.csv": SITES_WITH_TARIFF, "tariffs/t.toml": _tariff(
        '[[periods]]\ncode = "day"\nhours = ["06:00-22:00"]\n\n[[periods]]\ncode = "night"\nhours = ["23:00-06:00"]\n')}
    e["tariff_unknown_keys"] = {"sites.csv": SITES_WITH_TARIFF, "tariffs/t.toml": _tariff(DAY_NIGHT, extra='colour = "blue"')}
    e["tariff_wrong_types"] = {"sites.csv": SITES_WITH_TARIFF,
                               "tariffs/t.toml": _tariff(DAY_NIGHT, energy='price_per_kwh = { day = "cheap", night = 0.12 }')}
    e["tariff_syntax_error"] = {"sites.csv": SITES_WITH_TARIFF, "tariffs/t.toml": _tariff(DAY_NIGHT).replace('code = "night"', 'code = "night')}
    e["tariff_empty_file"] = {"sites.csv": SITES_WITH_TARIFF, "tariffs/t.toml": b""}
    e["tariff_not_named"] = {"sites.csv": SITES_WITH_TARIFF.replace("t.toml", "missing.toml"), "tariffs/t.toml": _tariff(DAY_NIGHT)}
    # --- options ---------------------------------------------------------------------------------------
    options_header = "option_id,technology,label,equipment_cost_coef,equipment_cost_exp,installation_frac\n"
    e["options_negative_cost"] = {"options.csv": options_header + "keep,existing,Keep,0,1,0\nie3,induction,New IE3,-150,0.9,0.3\n"}
    e["options_unknown_technology"] = {"options.csv": options_header + "keep,existing,Keep,0,1,0\nwarp,warp_drive,Warp drive,100,1,0\n"}
    e["options_duplicate_ids"] = {"options.csv": options_header + "keep,existing,Keep,0,1,0\nie3,induction,New IE3,150,0.9,0.3\nie3,induction,Again,160,0.9,0.3\n"}
    # --- settings and finance --------------------------------------------------------------------------
    e["finance_rate_in_percent"] = {"finance.toml": 'currency = "EUR"\ndiscount_rate_frac = 8\nhorizon_yr = 15\n'}
    e["finance_mixed_layout"] = {"finance.toml": 'discount_rate_frac = 0.08\n\n[finance]\nhorizon_yr = 15\n'}
    e["finance_wrong_types"] = {"finance.toml": 'discount_rate_frac = "eight"\nhorizon_yr = 12.5\nbudget_per_yr = { a = 1 }\n'}
    e["case_toml_not_a_table"] = {"case.toml": 'case = "my case"\n'}
    e["case_toml_syntax_error"] = {"case.toml": '[case]\nname = "Test case\ncurrency = "EUR"\n'}
    e["case_toml_bad_values"] = {"case.toml": '[case]\nname = "x"\ncurrency = 978\ntime_zone = "localtime"\npower_unit = "W"\n'}
    # --- a folder that is not a case -------------------------------------------------------------------
    e["folder_without_tables"] = {"notes.txt": "minutes of the energy meeting\n", "fleet.json": "{}\n"}
    return e


def write(root: Path = HERE) -> list[str]:
    """Write every entry under ``root`` (replacing earlier copies); return the entry names."""
    names = []
    for name, files in entries().items():
        folder = root / name
        if folder.exists():
            shutil.rmtree(folder)
        folder.mkdir(parents=True)
        deletions = sorted(rel for rel, content in files.items() if content is None)
        for rel, content in files.items():
            if content is None:
                continue
            path = folder / rel
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
        if deletions:
            (folder / "DELETE").write_text("".join(f"{rel}\n" for rel in deletions), encoding="utf-8")
        names.append(name)
    return names


if __name__ == "__main__":
    print(f"wrote {len(write())} entries to {HERE}")
