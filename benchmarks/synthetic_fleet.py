"""Write a synthetic (invented) fleet case of any size, for benchmarks and scale tests.

Everything written here is made up: sites, motors, profiles. The generator is seeded, so a given
(n_assets, n_sites, seed) always gives the same files. What it writes:

- ``case.toml`` (Europe/Berlin, EUR, flagged as invented) and ``finance.toml`` (the demo's assumptions,
  with its capital budgets scaled to the fleet: the same budget per motor as the demo's, unless asked
  for the demo's own budgets);
- ``sites.csv``: ``n_sites`` meters, each with a constant non-motor base load at 0.85 PF;
- ``tariffs/``: one tariff per site, copied in turn from ``data/tariffs/``. Copies are rewritten to the
  case's zone and currency where they differ (the originals are left untouched), so every example tariff
  can price a site of the one case;
- ``capacitors.csv``: a fixed bank on every third site, a stepped bank on every third site;
- ``assets.csv``: a seeded mix of applications, sizes 0.75 kW to 2 MW (log-uniform), control modes,
  classes and ages; about 5 % of assets use annual hours and a mean load instead of a profile;
- ``profiles.parquet``: shaft-load profiles for one year (hourly, or at ``step_minutes``), shared in groups (about one profile per
  25 assets by default, ``assets_per_profile``; 1 gives each motor its own, as metered fleets have), each
  with its own daily and seasonal shape, so the machines see varied loads;
- no ``options.csv``: the default catalogue applies, every option of it.

Run ``python benchmarks/synthetic_fleet.py OUT --assets 1000`` to write one case folder.
"""

from __future__ import annotations

import argparse
import csv
import io
import re
import sys
from pathlib import Path

import numpy as np
import pandas as pd

ROOT = Path(__file__).resolve().parents[1]
YEAR = 2025
ZONE = "Europe/Berlin"
CURRENCY = "EUR"
TARIFFS = ("example_tou_kw_reactive_ratchet.toml", "example_kva_demand.toml", "example_pf_adjusted_demand.toml")
#: (application, load type, share of the fleet, allowed speed controls)
APPLICATIONS = (
    ("pump", "variable_torque", 0.35, ("fixed", "throttled", "drive")),
    ("fan", "variable_torque", 0.20, ("fixed", "throttled", "drive")),
    ("compressor", "constant_torque", 0.12, ("fixed",)),
    ("conveyor", "constant_torque", 0.10, ("fixed",)),
    ("crusher", "constant_torque", 0.05, ("fixed",)),
    ("mixer", "constant_torque", 0.08, ("fixed",)),
    ("other", "constant_torque", 0.10, ("fixed", "drive")),
)
ASSET_COLUMNS = ["asset_id", "site_id", "description", "application", "load_type", "rated_p_kw", "poles", "supply_f_hz",
                 "rated_v_v", "efficiency_class", "year_installed", "rewind_count", "speed_control", "profile_id",
                 "operating_h_per_yr", "mean_load_pct", "criticality"]
ASSETS_PER_PROFILE = 25
#: Rows of the profiles' table held and written at once (a fleet of metered 15-minute profiles has hundreds of
#: millions of rows).
ROWS_PER_WRITE = 2**23
#: Profile steps the generator writes, minutes.
STEPS_MIN = (60, 30, 15)

CASE_TOML = '''# INVENTED SYNTHETIC FLEET for benchmarks: every name and number is made up.
[case]
name = "Synthetic fleet ({n} assets, {s} sites, invented)"
description = "Seeded synthetic fleet written by benchmarks/synthetic_fleet.py."
currency = "EUR"
power_unit = "kW"
time_zone = "Europe/Berlin"
invented = true
'''


def _csv(rows: list[list], columns: list[str]) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(columns)
    writer.writerows([["" if v is None else v for v in row] for row in rows])
    return buffer.getvalue()


def _profiles(rng: np.random.Generator, n_profiles: int, step_minutes: int = 60):
    """The profiles' rows, profile after profile, as frames of about :data:`ROWS_PER_WRITE` rows each."""
    index = pd.date_range(f"{YEAR}-01-01", f"{YEAR + 1}-01-01", freq=f"{int(step_minutes)}min", inclusive="left",
                          tz=ZONE)
    hour = index.hour.to_numpy() + index.minute.to_numpy() / 60.0
    weekday = index.day_of_week.to_numpy()
    season = np.cos(2 * np.pi * (index.day_of_year.to_numpy() - 200) / 365.0)
    per_write = max(1, ROWS_PER_WRITE // len(index))
    ids, loads = [], []
    for k in range(n_profiles):
        kind = k % 4
        level = rng.uniform(0.45, 0.85)
        phase = rng.uniform(0, 24)
        diurnal = 0.5 * (1 - np.cos(2 * np.pi * (hour - phase) / 24))
        load = level + rng.uniform(0.0, 0.15) * diurnal + rng.uniform(-0.08, 0.08) * season
        load = load + rng.normal(0.0, 0.03, len(index))
        if kind == 1:  # day shifts on weekdays
            load = np.where((weekday < 5) & (hour >= 6) & (hour < 22), load, 0.0)
        elif kind == 2:  # cycling on and off
            load = np.where(rng.random(len(index)) < 0.6, load, 0.0)
        values = np.where(load > 0, np.clip(load, 0.15, 1.05), 0.0)
        ids.append(f"P{k:04d}")
        loads.append(np.round(100 * values, 2))
        if len(ids) == per_write or k == n_profiles - 1:
            n = len(ids)
            yield pd.DataFrame({"profile_id": pd.Categorical.from_codes(np.repeat(np.arange(n), len(index)), ids),
                                "timestamp": pd.to_datetime(np.tile(index.as_unit("ns").asi8, n), unit="ns", utc=True)
                                .tz_convert(ZONE).as_unit("us"),
                                "shaft_load_pct": np.concatenate(loads), "input_kw": np.full(n * len(index), np.nan)})
            ids, loads = [], []


def _write_profiles(path: Path, frames) -> None:
    """Write the profiles' frames to one Parquet file, a row group or more each (memory stays one frame's)."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    writer = None
    try:
        for frame in frames:
            table = pa.Table.from_pandas(frame, preserve_index=False)
            # ids as plain text, as a table exported from a database or a logger's software has them
            table = table.set_column(0, pa.field("profile_id", pa.string()), table.column(0).cast(pa.string()))
            table = table.replace_schema_metadata(None)
            if writer is None:
                writer = pq.ParquetWriter(path, table.schema)
            writer.write_table(table)
    finally:
        if writer is not None:
            writer.close()


def _tariff_text(name: str) -> str:
    text = (ROOT / "data" / "tariffs" / name).read_text(encoding="utf-8")
    text = re.sub(r'(?m)^time_zone = ".*"$', f'time_zone = "{ZONE}"', text)
    return re.sub(r'(?m)^currency = ".*"$', f'currency = "{CURRENCY}"', text)


def _finance_toml(n_assets: int, budgets: str) -> str:
    """The demo's finance.toml, its budget_per_yr scaled to the fleet (``budgets="per_asset"``) or kept."""
    import tomllib

    import tomlkit

    demo = ROOT / "data" / "demo"
    text = (demo / "finance.toml").read_text(encoding="utf-8")
    if budgets == "demo":
        return text
    if budgets != "per_asset":
        raise ValueError(f"budgets must be 'per_asset' or 'demo', got {budgets!r}")
    n_demo = len(pd.read_csv(demo / "assets.csv"))
    doc = tomlkit.parse(text)
    doc["budget_per_yr"] = [round(float(b) * n_assets / n_demo, -3) for b in tomllib.loads(text)["budget_per_yr"]]
    return tomlkit.dumps(doc)


def write_fleet(target: str | Path, n_assets: int, n_sites: int = 20, seed: int = 20260601,
                budgets: str = "per_asset", assets_per_profile: int = ASSETS_PER_PROFILE, step_minutes: int = 60) -> Path:
    """Write a synthetic case folder with ``n_assets`` motors on ``n_sites`` sites; return its path.

    Parameters
    ----------
    target : str or Path
        Folder to write (created; existing files of the same names are replaced).
    n_assets : int
        Number of motors, >= 1.
    n_sites : int
        Number of site meters, 1 <= n_sites <= n_assets.
    seed : int
        Seed of every random draw.
    budgets : {"per_asset", "demo"}
        Capital budgets: the demo's budgets times n_assets / (the demo's number of assets), or the demo's
        own (a very tight budget for a large fleet).
    assets_per_profile : int
        Motors sharing one profile, >= 1.
    step_minutes : int
        The profiles' step in minutes, one of :data:`STEPS_MIN` (60: 8,760 intervals a year; 15: 35,040).
    """
    if n_assets < 1 or not 1 <= n_sites <= n_assets:
        raise ValueError("need n_assets >= 1 and 1 <= n_sites <= n_assets")
    rng = np.random.default_rng(seed)
    out = Path(target)
    (out / "tariffs").mkdir(parents=True, exist_ok=True)
    if assets_per_profile < 1:
        raise ValueError("need assets_per_profile >= 1")
    if step_minutes not in STEPS_MIN:
        raise ValueError(f"step_minutes must be one of {STEPS_MIN}, got {step_minutes!r}")
    n_profiles = max(1, n_assets // int(assets_per_profile))
    sites, caps = [], []
    for s in range(n_sites):
        tariff = TARIFFS[s % len(TARIFFS)]
        file_name = f"site{s:02d}_{tariff}"
        (out / "tariffs" / file_name).write_text(_tariff_text(tariff), encoding="utf-8")
        site_id = f"S{s:02d}"
        sites.append([site_id, f"Synthetic site {s}", f"M-{s:02d}", file_name, 50.0 + 20.0 * (n_assets / n_sites) ** 0.5, 0.85])
        if s % 3 == 1:
            caps.append([site_id, f"{site_id}-C1", 100.0, "fixed", "", ""])
        elif s % 3 == 2:
            caps.append([site_id, f"{site_id}-C1", 400.0, "stepped", 50.0, 0.95])
    shares = np.array([a[2] for a in APPLICATIONS])
    app_pos = rng.choice(len(APPLICATIONS), size=n_assets, p=shares / shares.sum())
    rated = np.exp(rng.uniform(np.log(0.75), np.log(2000.0), n_assets)).round(2)
    site_of = np.sort(rng.integers(0, n_sites, n_assets))
    site_of[:n_sites] = np.arange(n_sites) if n_assets >= n_sites else site_of[:n_sites]
    site_of = np.sort(site_of)
    rows = []
    for i in range(n_assets):
        app, load_type, _, controls = APPLICATIONS[app_pos[i]]
        p = float(rated[i])
        control = controls[rng.integers(len(controls))]
        year = int(rng.integers(1985, 2024))
        cls = "unknown" if year < 2000 else ("IE1" if year < 2011 else ("IE2" if year < 2017 else "IE3"))
        poles = int(rng.choice([2, 4, 4, 4, 6]))
        volts = 400 if p < 200 else (690 if p < 1000 else 6600)
        on_profile = rng.random() > 0.05
        profile = f"P{rng.integers(n_profiles):04d}" if on_profile else ""
        hours = "" if on_profile else int(rng.integers(1000, 8000))
        mean_load = "" if on_profile else int(rng.integers(40, 90))
        rows.append([f"A{i:05d}", f"S{site_of[i]:02d}", f"Synthetic {app} {i}", app, load_type, p, poles, 50, volts, cls,
                     year, int(rng.integers(0, 3)), control, profile, hours, mean_load,
                     ["low", "medium", "high"][int(rng.integers(3))]])
    (out / "assets.csv").write_text(_csv(rows, ASSET_COLUMNS), encoding="utf-8")
    (out / "sites.csv").write_text(_csv(sites, ["site_id", "site_name", "meter_id", "tariff_file", "base_p_kw",
                                                "base_power_factor"]), encoding="utf-8")
    (out / "capacitors.csv").write_text(_csv(caps, ["site_id", "bank_id", "rated_q_kvar", "control", "step_q_kvar",
                                                    "target_power_factor"]), encoding="utf-8")
    (out / "duty.csv").write_text("profile_id,shaft_load_pct,duration_h_per_yr\n", encoding="utf-8")
    (out / "case.toml").write_text(CASE_TOML.format(n=n_assets, s=n_sites), encoding="utf-8")
    (out / "finance.toml").write_text(_finance_toml(n_assets, budgets), encoding="utf-8")
    _write_profiles(out / "profiles.parquet", _profiles(rng, n_profiles, step_minutes))
    return out


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("out", help="folder to write (new or empty: a case's files left in it would mix with the fleet's)")
    parser.add_argument("--assets", type=int, default=1000, help="motors in the fleet (default 1000)")
    parser.add_argument("--sites", type=int, default=20,
                        help="sites, each with a tariff of its own (default 20, or the number of motors if fewer)")
    parser.add_argument("--seed", type=int, default=20260601, help="random seed (default 20260601): same seed, same fleet")
    parser.add_argument("--budgets", choices=("per_asset", "demo"), default="per_asset",
                        help="capital budgets: the demo's per motor (default) or the demo's own")
    parser.add_argument("--assets-per-profile", type=int, default=ASSETS_PER_PROFILE,
                        help=f"motors sharing one profile (default {ASSETS_PER_PROFILE}; 1: a profile of its own each)")
    parser.add_argument("--step-minutes", type=int, choices=STEPS_MIN, default=60,
                        help="the profiles' step in minutes (default 60: 8,760 a year; 15: 35,040)")
    args = parser.parse_args(argv)
    out = Path(args.out)
    if out.exists() and (not out.is_dir() or any(out.iterdir())):
        parser.exit(2, f"synthetic_fleet: {out} is not an empty folder; give a new or empty one (the files of another "
                       "case left in it would be read with the fleet's)\n")
    if args.assets < 1:
        parser.exit(2, "synthetic_fleet: --assets must be 1 or more\n")
    sites = args.sites if "--sites" in (argv if argv is not None else sys.argv) else min(args.sites, args.assets)
    if not 1 <= sites <= args.assets:
        parser.exit(2, f"synthetic_fleet: --sites must be between 1 and the number of motors ({args.assets})\n")
    written = write_fleet(out, args.assets, sites, args.seed, args.budgets, args.assets_per_profile, args.step_minutes)
    print(f"{written}: {args.assets:,} motors on {sites} site{'s' if sites != 1 else ''}, {args.step_minutes}-min "
          f"profiles, one per {args.assets_per_profile} motors (an invented fleet for benchmarks)")


if __name__ == "__main__":
    main()
