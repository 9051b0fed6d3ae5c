"""A first screen of each site's harmonic distortion and capacitor resonance, today and with a plan's drives.

Drives draw distorted current (a six-pulse rectifier's 5th, 7th, 11th, 13th ... harmonics); flowing through
the supply's short-circuit impedance it distorts the voltage every machine at the bus sees, and a capacitor
bank on the same bus forms with that impedance a parallel resonance that amplifies a harmonic near it. A
plan that puts many motors on drives, or adds capacitors where drives run, can cross the limits the utility
holds the site to. This module estimates, per site, from the supply's short-circuit power and the drives'
rated input:

- each harmonic's voltage at the bus, V_h = h I_h S_drive / S_sc (per unit of the bus voltage; I_h the drive's
  current spectrum per unit of its fundamental, reactive supply impedance rising with the order h), and the
  total, sqrt(sum V_h^2), against IEEE 519's voltage limits for the bus voltage [1];
- the current distortion at the point of supply as a share of the site's maximum demand (total demand
  distortion, TDD = THD_i S_drive / S_L) against IEEE 519's current limits for the ratio S_sc / S_L [1];
- the order of the parallel resonance of the capacitors with the supply, h_r = sqrt(S_sc / Q_c) [2], over the
  range of capacitor kVAr a bank's steps can put in service, and whether it falls near a harmonic the drives
  draw.

The short-circuit power is the transformer's, S_tx 100 / z_pct (the source behind it taken as stiff unless the
site gives its fault level, S_sc = 1 / (1/S_src + z_pct / (100 S_tx))), with IEC 60076-5's minimum impedance
for the rating where none is given [3]. The supply's own distortion, other non-linear loads, cables, the
damping of the site's linear load and the drives' actual spectra are left out: a screen that says where a
harmonic study is needed, not a study.

References
----------
.. [1] IEEE Std 519-2014, *IEEE Recommended Practice and Requirements for Harmonic Control in Electric Power
   Systems*, Table 1 (voltage distortion limits by bus voltage) and Table 2 (current distortion limits,
   120 V to 69 kV, by I_sc / I_L); I_L is the average of the monthly maximum demand currents.
.. [2] R. C. Dugan, M. F. McGranaghan, S. Santoso and H. W. Beaty, *Electrical Power Systems Quality*, 2nd ed.
   New York: McGraw-Hill, 2002, ch. 5 (parallel resonance of a capacitor bank with the system, h_r =
   sqrt(MVA_sc / Mvar_cap)); cited from memory.
.. [3] IEC 60076-5:2006, *Power transformers - Part 5: Ability to withstand short circuit*, Table 1
   (recognized minimum short-circuit impedance by rated power); values from memory.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from models.drives import DEFAULT_FRONT_END, FRONT_END_DEFAULTS, drive_rated_s_kva_for_motor
from models.kept import KeptForLast

#: Harmonic current of a drive per unit of its fundamental, by front end and order, before scaling to the front
#: end's current THD (models.drives.FRONT_END_DEFAULTS) by :func:`drive_spectrum` (common practice, from memory:
#: typical measured spectra). Six-pulse (with or without a choke): the characteristic 6k +/- 1 orders, the 5th
#: largest (total of the shape about 39 %); twelve-pulse: the 12k +/- 1 orders (the 5th and 7th cancelled by its
#: phase-shifting transformer, their residue from imbalance left out); active front end: a little of every order.
SPECTRUM_SHAPES: dict[str, dict[int, float]] = {
    "six_pulse_with_choke": {5: 0.35, 7: 0.12, 11: 0.075, 13: 0.05, 17: 0.04, 19: 0.03, 23: 0.025, 25: 0.02},
    "six_pulse_no_choke": {5: 0.35, 7: 0.12, 11: 0.075, 13: 0.05, 17: 0.04, 19: 0.03, 23: 0.025, 25: 0.02},
    "twelve_pulse": {11: 0.09, 13: 0.06, 23: 0.025, 25: 0.02},
    "active_front_end": {5: 0.02, 7: 0.015, 11: 0.01, 13: 0.01, 17: 0.005, 19: 0.005, 23: 0.005, 25: 0.005},
}
#: The harmonic orders the screen sums (every order of :data:`SPECTRUM_SHAPES`).
ORDERS: tuple[int, ...] = (5, 7, 11, 13, 17, 19, 23, 25)
#: Current THD of a six-pulse drive with a choke, the drive models' default front end.
DRIVE_THD_I_FRAC = FRONT_END_DEFAULTS[DEFAULT_FRONT_END][1]
#: IEEE 519-2014 Table 1: (highest bus voltage [V], individual harmonic limit [%], THD limit [%]).
VOLTAGE_LIMITS_PCT: tuple[tuple[float, float, float], ...] = (
    (1_000.0, 5.0, 8.0), (69_000.0, 3.0, 5.0), (161_000.0, 1.5, 2.5), (np.inf, 1.0, 1.5))
#: IEEE 519-2014 Table 2 (120 V to 69 kV): (lowest I_sc / I_L of the row, TDD limit [%]).
TDD_LIMITS_PCT: tuple[tuple[float, float], ...] = ((0.0, 5.0), (20.0, 8.0), (50.0, 12.0), (100.0, 15.0),
                                                   (1000.0, 20.0))
#: IEC 60076-5 Table 1: (largest rated power of the row [kVA], minimum short-circuit impedance [%]).
TRANSFORMER_IMPEDANCE_PCT: tuple[tuple[float, float], ...] = (
    (630.0, 4.0), (1250.0, 5.0), (2500.0, 6.0), (6300.0, 7.0), (25_000.0, 8.0), (40_000.0, 10.0),
    (63_000.0, 11.0), (100_000.0, 12.5), (np.inf, 12.5))
#: How much a parallel resonance amplifies the harmonic voltage it is tuned to (common practice, from memory: the
#: quality factor of an industrial bus at its resonance, 5-20; 10 taken). A resonance is a finding where the
#: harmonic's voltage so amplified would pass its individual limit.
RESONANCE_AMPLIFICATION = 10.0
#: A resonance within this share of a harmonic's order is taken as tuned to it (common practice, from memory:
#: detuned banks are set 10-15 % below the 5th for that reason).
RESONANCE_BAND_FRAC = 0.10

#: A site supplied at more than this many times its motors' bus voltage takes its supply through its own
#: transformer: IEEE 519's point of common coupling, where the current limits apply, is then the transformer's
#: primary, whose short-circuit power is the source's (``supply_fault_kva``).
PCC_ABOVE_BUS_RATIO = 1.5

#: What the screen is and is not, shown with every table of it.
SCREEN_CAUTION = (
    "A first screen, not a harmonic study: the supply's own distortion, other non-linear loads, cables, the "
    "site's linear load and the drives' actual spectra are left out, and the short-circuit power is the "
    "transformer's (the source behind it stiff unless its fault level is given). Before drives or capacitors are "
    "added, a qualified person confirms the distortion with measurements or a study to IEEE 519 or IEC 61000-3-6 "
    "and the utility's rules; mitigation (line reactors, detuned capacitor banks, filters, multi-pulse or "
    "active-front-end drives) is then a cost of the project.")

#: Columns of :func:`site_screen`'s table.
SCREEN_COLUMNS: tuple[str, ...] = (
    "site_id", "scenario", "drive_kva", "transformer_kva", "transformer_impedance_pct", "impedance_basis",
    "short_circuit_kva", "pcc_short_circuit_kva", "max_demand_kva", "bus_v_v", "voltage_thd_pct", "voltage_thd_limit_pct",
    "worst_harmonic", "worst_harmonic_pct", "harmonic_limit_pct", "current_tdd_pct", "current_tdd_limit_pct",
    "capacitor_kvar_min", "capacitor_kvar_max", "resonance_order_low", "resonance_order_high",
    "resonant_harmonic", "front_ends", "finding")


def drive_spectrum(thd_i_frac: float | None = None, front_end: str = DEFAULT_FRONT_END) -> tuple[np.ndarray, np.ndarray]:
    """The harmonic orders :data:`ORDERS` and a drive's current at each per unit of its fundamental.

    The front end's shape (:data:`SPECTRUM_SHAPES`) scaled so that the root sum of squares is ``thd_i_frac``
    (default the front end's current THD, models.drives.FRONT_END_DEFAULTS); orders the shape lacks are zero.

    Examples
    --------
    >>> h, i = drive_spectrum(0.40)
    >>> h.tolist()[:4], round(float(np.sqrt((i ** 2).sum())), 12)
    ([5, 7, 11, 13], 0.4)
    >>> h, i = drive_spectrum(front_end="twelve_pulse")
    >>> i[:2].tolist(), round(float(np.sqrt((i ** 2).sum())), 12)
    ([0.0, 0.0], 0.12)
    """
    shape_of = SPECTRUM_SHAPES[front_end]
    thd = FRONT_END_DEFAULTS[front_end][1] if thd_i_frac is None else float(thd_i_frac)
    orders = np.array(ORDERS, dtype=int)
    shape = np.array([shape_of.get(int(h), 0.0) for h in orders])
    return orders, shape * (thd / np.sqrt((shape ** 2).sum()))


def harmonic_currents_kva(drive_kva_by_front_end: dict[str, float]) -> np.ndarray:
    """The harmonic currents of a group of drives at each order of :data:`ORDERS`, in kVA at the bus voltage.

    Each front end's drives draw their spectrum (:func:`drive_spectrum`) times their fundamental input; the
    currents of one order add arithmetically (in phase: the worst case, common practice for rectifiers on one bus).

    Examples
    --------
    >>> harmonic_currents_kva({"six_pulse_with_choke": 100.0})[:2].round(4).tolist()
    [36.3238, 12.4539]
    """
    total = np.zeros(len(ORDERS))
    for front_end, kva in drive_kva_by_front_end.items():
        total += float(kva) * drive_spectrum(front_end=front_end)[1]
    return total


def transformer_impedance_pct(rated_kva) -> np.ndarray:
    """IEC 60076-5's minimum short-circuit impedance for a transformer's rated power [%] (NaN for a NaN rating).

    Examples
    --------
    >>> transformer_impedance_pct([500.0, 630.0, 1000.0, 2000.0, 5000.0]).tolist()
    [4.0, 4.0, 5.0, 6.0, 7.0]
    """
    kva = np.asarray(rated_kva, dtype=float)
    edges = np.array([e for e, _ in TRANSFORMER_IMPEDANCE_PCT])
    values = np.array([z for _, z in TRANSFORMER_IMPEDANCE_PCT])
    at = np.searchsorted(edges, np.where(np.isfinite(kva), kva, 0.0), side="left")
    return np.where(np.isfinite(kva), values[np.minimum(at, len(values) - 1)], np.nan)


def short_circuit_kva(transformer_kva, impedance_pct, supply_fault_kva=np.inf) -> np.ndarray:
    """Short-circuit power at the transformer's secondary [kVA]: its own, S_tx 100 / z, in series with the source's.

    A blank (NaN) source fault level is a stiff source; a blank transformer leaves the source's alone; both
    blank give NaN.

    Examples
    --------
    >>> short_circuit_kva([1000.0, 1000.0, np.nan], [5.0, 5.0, 5.0], [np.nan, 100_000.0, 50_000.0]).round(1).tolist()
    [20000.0, 16666.7, 50000.0]
    """
    s_tx = np.asarray(transformer_kva, dtype=float)
    z = np.asarray(impedance_pct, dtype=float) / 100.0
    s_src = np.asarray(supply_fault_kva, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        inv_tx = np.where(np.isfinite(s_tx) & (s_tx > 0), z / s_tx, 0.0)
        inv_src = np.where(np.isfinite(s_src) & (s_src > 0), 1.0 / s_src, 0.0)
        total = inv_tx + inv_src
        return np.where(total > 0, 1.0 / total, np.nan)


def voltage_harmonics_pct(drive_kva, short_circuit_kva_, thd_i_frac: float = DRIVE_THD_I_FRAC,
                          currents_kva: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Each harmonic's voltage at the bus and the total distortion [% of the fundamental voltage].

    V_h = h I_h / S_sc per unit: the drives' harmonic current I_h (kVA at the bus voltage; six-pulse drives of
    ``drive_kva`` at ``thd_i_frac``, or ``currents_kva`` of :func:`harmonic_currents_kva`, shape (n_sites, n_orders))
    through the supply's reactance at order h, h / S_sc.

    Returns
    -------
    orders : numpy.ndarray of int, shape (n_orders,)
    v_h_pct : numpy.ndarray, shape (n_sites, n_orders)
    thd_pct : numpy.ndarray, shape (n_sites,)

    Examples
    --------
    A 100 kVA drive on a 2,000 kVA short-circuit power: the 5th is 5 x 0.35 x (0.40 / 0.38542) x 100 / 2000
    of the voltage (hand calculation H1 in docs/derivations/harmonic-screen.md).

    >>> h, v, thd = voltage_harmonics_pct([100.0], [2000.0])
    >>> round(float(v[0, 0]), 3), round(float(thd[0]), 3)
    (9.081, 12.962)
    """
    orders, current = drive_spectrum(thd_i_frac)
    s_sc = np.asarray(short_circuit_kva_, dtype=float)
    if currents_kva is None:
        currents_kva = np.asarray(drive_kva, dtype=float)[:, None] * current[None, :]
    v_h = 100.0 * np.asarray(currents_kva, dtype=float) * orders[None, :] / s_sc[:, None]
    return orders, v_h, np.sqrt((v_h ** 2).sum(axis=1))


def voltage_limits_pct(bus_v_v) -> tuple[np.ndarray, np.ndarray]:
    """IEEE 519-2014 Table 1 limits for a bus voltage: (individual harmonic, THD) [%].

    Examples
    --------
    >>> [a.tolist() for a in voltage_limits_pct([400.0, 1000.0, 6600.0, 132_000.0])]
    [[5.0, 5.0, 3.0, 1.5], [8.0, 8.0, 5.0, 2.5]]
    """
    v = np.asarray(bus_v_v, dtype=float)
    edges = np.array([e for e, _, _ in VOLTAGE_LIMITS_PCT])
    at = np.minimum(np.searchsorted(edges, v, side="left"), len(edges) - 1)
    return (np.array([i for _, i, _ in VOLTAGE_LIMITS_PCT])[at], np.array([t for _, _, t in VOLTAGE_LIMITS_PCT])[at])


def tdd_limit_pct(isc_over_il, supply_v_v=np.nan) -> np.ndarray:
    """IEEE 519-2014's total demand distortion limit for a ratio I_sc / I_L and the supply voltage [%].

    Table 2 (120 V to 69 kV; a blank voltage is taken as within it); half of it for a supply above 69 kV up to
    161 kV (Table 3, whose rows are Table 2's halved: from memory); NaN above 161 kV (Table 4, not screened).

    Examples
    --------
    >>> tdd_limit_pct([10.0, 20.0, 35.0, 80.0, 500.0, 2000.0]).tolist()
    [5.0, 8.0, 8.0, 12.0, 15.0, 20.0]
    >>> tdd_limit_pct([80.0, 80.0, 80.0], [20_000.0, 132_000.0, 220_000.0]).tolist()
    [12.0, 6.0, nan]
    """
    r = np.asarray(isc_over_il, dtype=float)
    v = np.asarray(supply_v_v, dtype=float)
    edges = np.array([e for e, _ in TDD_LIMITS_PCT])
    values = np.array([v for _, v in TDD_LIMITS_PCT])
    limit = values[np.maximum(np.searchsorted(edges, np.where(np.isfinite(r), r, 0.0), side="right") - 1, 0)]
    limit = np.where(v > 69_000.0, 0.5 * limit, limit)
    return np.where((v > 161_000.0) | ~np.isfinite(r), np.nan, limit)


def resonance_order(short_circuit_kva_, capacitor_kvar) -> np.ndarray:
    """Harmonic order of the parallel resonance of capacitors with the supply, sqrt(S_sc / Q_c) (inf without any).

    Examples
    --------
    >>> resonance_order([20_000.0, 20_000.0], [800.0, 0.0]).tolist()
    [5.0, inf]
    """
    s = np.asarray(short_circuit_kva_, dtype=float)
    q = np.asarray(capacitor_kvar, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(q > 0, np.sqrt(s / np.where(q > 0, q, 1.0)), np.inf)


def near_harmonics(resonance_orders, harmonic_orders=ORDERS, band_frac: float = RESONANCE_BAND_FRAC) -> np.ndarray:
    """Which harmonic orders some resonance comes within ``band_frac`` of (bool, one per harmonic order).

    Examples
    --------
    >>> near_harmonics([4.6]).tolist()[:3], bool(near_harmonics([5.8, 6.2]).any()), bool(near_harmonics([]).any())
    ([True, False, False], False, False)
    """
    r = np.asarray(resonance_orders, dtype=float).reshape(-1)
    h = np.asarray(harmonic_orders, dtype=float)
    r = r[np.isfinite(r)]
    return (np.abs(r[None, :] / h[:, None] - 1.0) <= band_frac).any(axis=1) if len(r) else np.zeros(len(h), bool)


def capacitor_states_kvar(fixed_kvar: float, stepped: list[tuple[float, float]], max_states: int = 1000) -> np.ndarray:
    """Every kVAr the site's capacitors can have in service: the fixed ones always, each stepped bank at any number
    of its steps (bank, step); sorted, the all-off state of a site without fixed kVAr left out.

    Examples
    --------
    >>> capacitor_states_kvar(0.0, [(60.0, 10.0)]).tolist()
    [10.0, 20.0, 30.0, 40.0, 50.0, 60.0]
    >>> capacitor_states_kvar(150.0, []).tolist(), capacitor_states_kvar(0.0, []).tolist()
    ([150.0], [])
    """
    states = np.array([float(fixed_kvar)])
    for rated, step in stepped:
        n = int(np.floor(rated / step + 1e-9)) if step > 0 else 0
        levels = np.minimum(np.arange(n + 1) * step, rated) if n else np.array([0.0, rated])
        states = np.unique((states[:, None] + levels[None, :]).ravel())[:max_states]
    return states[states > 0]


def monthly_peak_mean_kva(index: pd.DatetimeIndex, p_kw: np.ndarray, q_kvar: np.ndarray) -> float:
    """The mean of the monthly maximum interval kVA of a meter (IEEE 519's I_L, as power) [kVA].

    Examples
    --------
    >>> idx = pd.date_range("2025-01-31 23:00", periods=2, freq="h")
    >>> monthly_peak_mean_kva(idx, np.array([30.0, 60.0]), np.array([40.0, 80.0]))
    75.0
    """
    s = np.hypot(np.asarray(p_kw, dtype=float), np.asarray(q_kvar, dtype=float))
    if not len(s):
        return float("nan")
    month = np.asarray(index.year * 12 + index.month)
    return float(pd.Series(s).groupby(month).max().mean())


def _option_front_ends(case, option_ids) -> np.ndarray:
    """The front end of each option's drive, in the operating result's option order (the default where the
    catalogue gives none or the option has no drive)."""
    options = case.options
    given = (dict(zip(options["option_id"].astype(str), options["drive_front_end"]))
             if options is not None and "drive_front_end" in options else {})
    return np.array([given.get(str(o)) if given.get(str(o)) in FRONT_END_DEFAULTS else DEFAULT_FRONT_END
                     for o in option_ids], dtype=object)


#: The sites' maximum demand of the last operating result asked for (the result files, the report, the workbook and
#: the decision records each screen the same sites).
_DEMANDS = KeptForLast()


def _maximum_demands(case, op) -> dict[str, float]:
    """Each site's maximum demand today (:func:`monthly_peak_mean_kva` of its meter with today's motors) [kVA], made
    once per case and operating result while they live."""
    from models.bill_savings import _chosen_total, site_setups

    def demands() -> dict[str, float]:
        setups = site_setups(case, op.index)
        site_of = np.asarray(op.site_ids, dtype=object)
        out = {}
        for site_id, setup in setups.items():
            members = np.flatnonzero(site_of == site_id)
            if not len(members):
                continue
            zeros = np.zeros(len(members), dtype=int)
            p, q = _chosen_total(op.p_kw, zeros, members), _chosen_total(op.q_kvar, zeros, members)
            meter = setup.site.meter_from_totals(p, q, base_p_kw_profile=setup.base_p_kw_profile)
            out[str(site_id)] = monthly_peak_mean_kva(op.index, meter.p_kw, meter.q_kvar)
        return out

    return _DEMANDS.get(op, demands, beside=case)


def ordinal(n: int) -> str:
    """An order in words' form: 5th, 11th, 23rd.

    Examples
    --------
    >>> [ordinal(n) for n in (1, 2, 3, 5, 11, 12, 13, 21, 23, 25)]
    ['1st', '2nd', '3rd', '5th', '11th', '12th', '13th', '21st', '23rd', '25th']
    """
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"{n}{suffix}"


def _finding(row: dict, near_order: float = np.nan) -> str:
    """The screen's verdict for one site and scenario, in words (``near_order``: the capacitors' resonance order
    nearest the harmonic they are tuned to)."""
    if not np.isfinite(row["short_circuit_kva"]):
        return "not screened: give the site's transformer_kva (or supply_fault_kva)"
    if row["drive_kva"] <= 0:
        return "no drives"
    parts = []
    if row["voltage_thd_pct"] > row["voltage_thd_limit_pct"] or row["worst_harmonic_pct"] > row["harmonic_limit_pct"]:
        parts.append(f"voltage distortion about {row['voltage_thd_pct']:.1f} % (the {ordinal(row['worst_harmonic'])} "
                     f"{row['worst_harmonic_pct']:.1f} %) against limits of {row['voltage_thd_limit_pct']:g} % and "
                     f"{row['harmonic_limit_pct']:g} %")
    if np.isfinite(row["current_tdd_pct"]) and row["current_tdd_pct"] > row["current_tdd_limit_pct"]:
        parts.append(f"current distortion about {row['current_tdd_pct']:.1f} % of the maximum demand against "
                     f"{row['current_tdd_limit_pct']:g} %")
    if row["resonant_harmonic"]:
        parts.append(f"the capacitors resonate near the {ordinal(row['resonant_harmonic'])} harmonic (order "
                     f"{near_order:.1f}), which would lift its voltage past {row['harmonic_limit_pct']:g} %: fit a detuned "
                     "bank")
    note = ("" if np.isfinite(row["current_tdd_pct"])
            else "; current distortion not screened (give supply_fault_kva, the utility's fault level at the supply)")
    if not parts:
        return "within the IEEE 519 limits on this screen" + note
    action = ("a harmonic study and mitigation" if row["scenario"] == "today"
              else "a harmonic study and mitigation before the plan's drives and capacitors are installed")
    return "; ".join(parts) + "; " + action + note


def screen_flags(screen: pd.DataFrame) -> pd.DataFrame:
    """Which limits each row of :func:`site_screen`'s table exceeds.

    Parameters
    ----------
    screen : pandas.DataFrame
        Rows of :func:`site_screen`.

    Returns
    -------
    pandas.DataFrame
        Indexed as ``screen``, boolean columns ``voltage`` (the voltage THD or the worst harmonic above its limit),
        ``current`` (the current TDD above its limit, where screened), ``resonance`` (a resonance finding) and
        ``any`` of them.
    """
    with np.errstate(invalid="ignore"):
        voltage = ((screen["voltage_thd_pct"] > screen["voltage_thd_limit_pct"])
                   | (screen["worst_harmonic_pct"] > screen["harmonic_limit_pct"])).fillna(False)
        current = (screen["current_tdd_pct"] > screen["current_tdd_limit_pct"]).fillna(False)
    resonance = pd.to_numeric(screen["resonant_harmonic"], errors="coerce").fillna(0) > 0
    flags = pd.DataFrame({"voltage": voltage.astype(bool), "current": current.astype(bool),
                          "resonance": resonance.astype(bool)}, index=screen.index)
    flags["any"] = flags.any(axis=1)
    return flags


def plan_screen_text(screen: pd.DataFrame, site_ids=None, brief: bool = False) -> str:
    """The plan's harmonic screen in one or two sentences for the pages that carry the plan: the sites (of
    ``site_ids``, default all) whose plan row passes a limit, with the figures against the limits, and that the
    study and the mitigation it asks for are not in the plan's capital or NPV; "" where none does. ``brief``: the
    sites only, in one sentence (a page's notice line).

    Examples
    --------
    >>> row = {"site_id": "S1", "scenario": "plan", "voltage_thd_pct": 14.8, "voltage_thd_limit_pct": 8.0,
    ...        "worst_harmonic_pct": 10.4, "harmonic_limit_pct": 5.0, "current_tdd_pct": 42.6,
    ...        "current_tdd_limit_pct": 12.0, "resonant_harmonic": 0}
    >>> plan_screen_text(pd.DataFrame([row])).split(". ")[0]
    'With the plan, site S1 (voltage THD 14.8 % against 8 %; current TDD 42.6 % against 12 %) fails the harmonic screen'
    >>> plan_screen_text(pd.DataFrame([row]), brief=True)
    "With the plan, site S1 fails the harmonic screen; its mitigation is not in the plan's figures."
    """
    rows = screen[screen["scenario"].astype(str) == "plan"]
    if site_ids is not None:
        rows = rows[rows["site_id"].astype(str).isin({str(s) for s in site_ids})]
    if rows.empty:
        return ""
    flags = screen_flags(rows)
    said = []
    for k, r in rows[flags["any"]].iterrows():
        parts = []
        if flags.at[k, "voltage"]:
            parts.append(f"voltage THD {r['voltage_thd_pct']:.1f} % against {r['voltage_thd_limit_pct']:g} %")
        if flags.at[k, "current"]:
            parts.append(f"current TDD {r['current_tdd_pct']:.1f} % against {r['current_tdd_limit_pct']:g} %")
        if flags.at[k, "resonance"]:
            parts.append(f"a capacitor resonance near the {ordinal(int(r['resonant_harmonic']))} harmonic")
        said.append(f"site {r['site_id']} ({'; '.join(parts)})")
    if not said:
        return ""
    fails = "fails" if len(said) == 1 else "fail"
    if brief:
        names = [str(r["site_id"]) for _, r in rows[flags["any"]].iterrows()]
        return (f"With the plan, site{'s' if len(names) > 1 else ''} {' and '.join(names)} {fails} the harmonic screen; "
                "its mitigation is not in the plan's figures.")
    return (f"With the plan, {' and '.join([', '.join(said[:-1]), said[-1]] if len(said) > 1 else said)} {fails} the "
            "harmonic screen. A harmonic study, and the mitigation it asks for (line reactors, detuned banks, filters, "
            "multi-pulse or active-front-end drives), come before the plan's drives and capacitors are installed; "
            "their cost is not in the plan's capital or NPV.")


def site_screen(case, op, plan: pd.DataFrame | None = None) -> pd.DataFrame:
    """The harmonic screen of every site, today and (with ``plan``) after it: one row per site and scenario.

    Parameters
    ----------
    case : models.case.Case
        Its sites may give ``transformer_kva``, ``transformer_impedance_pct`` and ``supply_fault_kva``; its
        capacitors table the banks in service today.
    op : models.operation.OperatingResult
        Today's per-interval power (the site's maximum demand) and each option's terminal capacitor [kVAr].
    plan : pandas.DataFrame, optional
        asset_id, option_id of the plan's projects.

    Returns
    -------
    pandas.DataFrame
        :data:`SCREEN_COLUMNS`: the drives' rated input [kVA], the supply's short-circuit power [kVA], the site's
        maximum demand (mean of monthly peaks, today's) [kVA], the estimated voltage THD and worst harmonic
        against their limits [%], the current TDD against its limit [%], the capacitors in service [kVAr] and
        their resonance orders, the drive harmonic they are tuned to (0: none) and the finding in words.
        ``scenario`` is "today" or "plan"; ``pcc_short_circuit_kva`` is the short-circuit power where the current
        limits apply.

    Notes
    -----
    Drive-fed today: assets whose ``speed_control`` is ``drive`` (six-pulse with a choke); with the plan also those
    whose project is a drive option (models.options.DRIVE_TECHNOLOGIES), with the option's ``drive_front_end``;
    ``front_ends`` lists the drives' kVA by front end. Capacitors: the fixed banks always, a stepped bank at any
    number of its steps (:func:`capacitor_states_kvar`), and the plan's motor-terminal capacitors (all in service);
    the resonance orders span those states, and ``resonant_harmonic`` is the lowest harmonic the drives draw that
    some state comes within :data:`RESONANCE_BAND_FRAC` of and whose voltage, amplified
    :data:`RESONANCE_AMPLIFICATION` times, would pass its individual limit (0: none). The bus voltage is the highest rated
    voltage of the site's drive-fed motors, today or with the plan, the same in both rows (of all its motors when
    none is on a drive): a site is one bus, and its finding says so where its motors run at several voltages. The current limits apply at the point of
    common coupling: the transformer's primary, with the source's fault level, where the site's ``supply_v_v``
    is above :data:`PCC_ABOVE_BUS_RATIO` times the bus voltage (not screened without ``supply_fault_kva``), else
    the bus itself.
    """
    from models.options import DRIVE_TECHNOLOGIES
    from models.plan import plan_choice

    sites = case.sites.reset_index(drop=True)
    assets = case.assets
    on_drive_today = assets["speed_control"].to_numpy(dtype=object) == "drive"
    chosen = plan_choice(op, plan) if plan is not None else np.zeros(len(op.asset_ids), dtype=int)
    tech = np.asarray(op.technologies, dtype=object)[chosen]
    on_drive_plan = on_drive_today | np.isin(tech, DRIVE_TECHNOLOGIES)
    # each drive's front end: today's drives the default; a drive option's its own (a motor on a drive today keeps
    # that drive unless its project brings one)
    option_front_end = _option_front_ends(case, op.option_ids)
    front_today = np.full(len(chosen), DEFAULT_FRONT_END, dtype=object)
    front_plan = np.where(np.isin(tech, DRIVE_TECHNOLOGIES), option_front_end[chosen], front_today)
    terminal_kvar = np.where(tech == "capacitor", op.capacitor_q_kvar[np.arange(len(chosen)), chosen], 0.0)
    terminal_kvar = np.nan_to_num(terminal_kvar)
    rated = assets["rated_p_kw"].to_numpy(dtype=float)
    eff = assets["rated_efficiency_pct"].to_numpy(dtype=float) / 100.0
    v_v = assets["rated_v_v"].to_numpy(dtype=float)
    site_of = assets["site_id"].to_numpy(dtype=object)

    def column(name: str) -> np.ndarray:
        return pd.to_numeric(sites[name], errors="coerce").to_numpy(dtype=float) if name in sites else np.full(len(sites), np.nan)

    s_tx = column("transformer_kva")
    z_given = column("transformer_impedance_pct")
    z = np.where(np.isfinite(z_given), z_given, transformer_impedance_pct(s_tx))
    basis = np.where(np.isfinite(z_given), "given", np.where(np.isfinite(s_tx), "IEC 60076-5 minimum (assumed)", ""))
    fault = column("supply_fault_kva")
    s_sc = short_circuit_kva(s_tx, z, fault)
    supply_v = column("supply_v_v")
    caps = case.capacitors  # (always a table: empty, with its columns, where the case gives none)
    demands = _maximum_demands(case, op)
    # one bus a site, on the same basis today and with the plan: the highest voltage of the motors on a drive in
    # either (of all the site's motors when none is)
    fed = on_drive_today | (on_drive_plan if plan is not None else on_drive_today)
    site_bus_v = []
    for site_id in sites["site_id"].astype(str):
        members = np.flatnonzero(site_of == site_id)
        drives = members[fed[members]]
        site_bus_v.append(float(np.max(v_v[drives])) if len(drives)
                          else (float(np.max(v_v[members])) if len(members) else 400.0))
    rows = []
    for k, site_id in enumerate(sites["site_id"].astype(str)):
        members = np.flatnonzero(site_of == site_id)
        demand = demands.get(site_id, float("nan"))
        banks = caps[caps["site_id"].astype(str) == site_id]
        fixed_kvar = float(banks.loc[banks["control"] == "fixed", "rated_q_kvar"].sum())
        steps = banks[banks["control"] != "fixed"]
        stepped = list(zip(steps["rated_q_kvar"].astype(float), steps["step_q_kvar"].astype(float)))
        for scenario, on_drive, front, extra_kvar in (("today", on_drive_today, front_today, 0.0),
                                                      ("plan", on_drive_plan, front_plan, float(terminal_kvar[members].sum()))):
            if scenario == "plan" and plan is None:
                continue
            drives = members[on_drive[members]]
            by_front_end: dict[str, float] = {}
            for fe in np.unique(front[drives]).tolist():
                mine = drives[front[drives] == fe]
                # the drive's fundamental input at its motor's rating: P / (efficiency x its displacement power factor)
                by_front_end[fe] = float(np.sum(drive_rated_s_kva_for_motor(rated[mine], eff[mine],
                                                                            FRONT_END_DEFAULTS[fe][0])))
            drive_kva = float(sum(by_front_end.values()))
            currents = harmonic_currents_kva(by_front_end)
            bus_v = site_bus_v[k]
            orders, v_h, thd = voltage_harmonics_pct([drive_kva], [s_sc[k]], currents_kva=currents[None, :])
            worst = int(np.argmax(v_h[0]))
            limit_h, limit_thd = voltage_limits_pct([bus_v])
            # the point of common coupling: the transformer's primary where the site takes a higher voltage than
            # its motors' bus (its short-circuit power the source's, unknown when not given), else the bus
            pcc_kva = fault[k] if supply_v[k] > PCC_ABOVE_BUS_RATIO * bus_v else s_sc[k]
            tdd = (100.0 * float(np.sqrt((currents ** 2).sum())) / demand if demand > 0 and np.isfinite(pcc_kva)
                   else float("nan"))
            # every kVAr the capacitors can have in service, and the order each resonates at; a resonance is a
            # finding at a harmonic the drives draw whose voltage, amplified by it, would pass its limit
            states = capacitor_states_kvar(fixed_kvar + extra_kvar, stepped)
            resonances = resonance_order(np.full(len(states), s_sc[k]), states)
            tuned = near_harmonics(resonances) & (RESONANCE_AMPLIFICATION * v_h[0] > limit_h[0]) & (currents > 0)
            row = {"site_id": site_id, "scenario": scenario, "drive_kva": drive_kva, "transformer_kva": s_tx[k],
                   "transformer_impedance_pct": z[k], "impedance_basis": basis[k], "short_circuit_kva": s_sc[k],
                   "pcc_short_circuit_kva": pcc_kva, "max_demand_kva": demand, "bus_v_v": bus_v,
                   "voltage_thd_pct": float(thd[0]), "voltage_thd_limit_pct": float(limit_thd[0]),
                   # (no drive, no harmonic: 0, as resonant_harmonic says none)
                   "worst_harmonic": int(orders[worst]) if drive_kva > 0 else 0, "worst_harmonic_pct": float(v_h[0, worst]),
                   "harmonic_limit_pct": float(limit_h[0]), "current_tdd_pct": tdd,
                   "current_tdd_limit_pct": (float(tdd_limit_pct([pcc_kva / demand], [supply_v[k]])[0]) if demand > 0
                                             else float("nan")),
                   "capacitor_kvar_min": float(states.min()) if len(states) else 0.0,
                   "capacitor_kvar_max": float(states.max()) if len(states) else 0.0,
                   "resonance_order_low": float(resonances.min()) if len(states) else np.inf,
                   "resonance_order_high": float(resonances.max()) if len(states) else np.inf,
                   "resonant_harmonic": int(orders[tuned][0]) if tuned.any() else 0,
                   "front_ends": ", ".join(f"{fe} {kva_:,.0f} kVA" for fe, kva_ in sorted(by_front_end.items()))}
            if not np.isfinite(s_sc[k]):
                for name in ("voltage_thd_pct", "worst_harmonic_pct", "current_tdd_pct", "current_tdd_limit_pct",
                             "resonance_order_low", "resonance_order_high"):
                    row[name] = float("nan")
            near = (float(resonances[np.argmin(np.abs(resonances - row["resonant_harmonic"]))])
                    if row["resonant_harmonic"] else np.nan)
            row["finding"] = _finding(row, near)
            if len(np.unique(v_v[members])) > 1 and np.isfinite(s_sc[k]) and drive_kva > 0:
                row["finding"] += (f"; motors at {len(np.unique(v_v[members]))} voltages screened as one bus at "
                                   f"{bus_v:g} V (a transformer between them changes the figures)")
            rows.append(row)
    return pd.DataFrame(rows, columns=list(SCREEN_COLUMNS))
