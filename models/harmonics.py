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

from models.drives import DEFAULT_FRONT_END, FRONT_END_DEFAULTS

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
#: The six-pulse shape (a drive fitted today and the catalogue's drives where they name no front end).
SIX_PULSE_SPECTRUM: dict[int, float] = SPECTRUM_SHAPES[DEFAULT_FRONT_END]
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


def resonant_harmonic(order_low, order_high, orders=None, band_frac: float = RESONANCE_BAND_FRAC) -> np.ndarray:
    """The lowest drive harmonic the resonance range [low, high] comes within ``band_frac`` of (0: none).

    Examples
    --------
    >>> resonant_harmonic([4.6, 5.8, 3.0, np.inf], [4.7, 6.2, 3.2, np.inf]).tolist()
    [5, 0, 0, 0]
    """
    lo = np.asarray(order_low, dtype=float)
    hi = np.asarray(order_high, dtype=float)
    h = np.asarray(ORDERS if orders is None else orders, dtype=float)
    near = (lo[:, None] <= h[None, :] * (1.0 + band_frac)) & (hi[:, None] >= h[None, :] * (1.0 - band_frac))
    first = np.argmax(near, axis=1)
    return np.where(near.any(axis=1), h[first], 0.0).astype(int)


def drive_input_kva(rated_p_kw, efficiency_frac, displacement_pf=FRONT_END_DEFAULTS[DEFAULT_FRONT_END][0]) -> np.ndarray:
    """A drive's fundamental input at its motor's rating [kVA]: P_rated / (efficiency x displacement power factor).

    Examples
    --------
    >>> round(float(drive_input_kva(90.0, 0.95)[()]), 3)
    97.667
    """
    return np.asarray(rated_p_kw, dtype=float) / (np.asarray(efficiency_frac, dtype=float)
                                                  * np.asarray(displacement_pf, dtype=float))


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


def _finding(row: dict) -> str:
    """The screen's verdict for one site and scenario, in words."""
    if not np.isfinite(row["short_circuit_kva"]):
        return "not screened: give the site's transformer_kva (or supply_fault_kva)"
    if row["drive_kva"] <= 0:
        return "no drives"
    parts = []
    if row["voltage_thd_pct"] > row["voltage_thd_limit_pct"] or row["worst_harmonic_pct"] > row["harmonic_limit_pct"]:
        parts.append(f"voltage distortion about {row['voltage_thd_pct']:.1f} % (the {row['worst_harmonic']}th "
                     f"{row['worst_harmonic_pct']:.1f} %) against limits of {row['voltage_thd_limit_pct']:g} % and "
                     f"{row['harmonic_limit_pct']:g} %")
    if np.isfinite(row["current_tdd_pct"]) and row["current_tdd_pct"] > row["current_tdd_limit_pct"]:
        parts.append(f"current distortion about {row['current_tdd_pct']:.1f} % of the maximum demand against "
                     f"{row['current_tdd_limit_pct']:g} %")
    if row["resonant_harmonic"]:
        lo, hi = row["resonance_order_low"], row["resonance_order_high"]
        span = f"{lo:.1f}" if f"{lo:.1f}" == f"{hi:.1f}" else f"{lo:.1f}-{hi:.1f}"
        parts.append(f"the capacitors resonate near the {row['resonant_harmonic']}th harmonic (order {span}): a "
                     "detuned bank")
    note = ("" if np.isfinite(row["current_tdd_pct"])
            else "; current distortion not screened (give supply_fault_kva, the utility's fault level at the supply)")
    if not parts:
        return "within the IEEE 519 limits on this screen" + note
    return "; ".join(parts) + "; a harmonic study and mitigation before the drives are installed" + note


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
    ``front_ends`` lists the drives' kVA by front end. A resonance is tuned only to an order the drives draw. Capacitors: the fixed banks always, a stepped bank from none to
    all its kVAr, and the plan's motor-terminal capacitors (all in service). The bus voltage is the highest rated
    voltage of the site's drive-fed motors (of all its motors when none): a site is one bus, and its finding says
    so where its motors run at several voltages. The current limits apply at the point of
    common coupling: the transformer's primary, with the source's fault level, where the site's ``supply_v_v``
    is above :data:`PCC_ABOVE_BUS_RATIO` times the bus voltage (not screened without ``supply_fault_kva``), else
    the bus itself.
    """
    from models.bill_savings import _chosen_total, site_setups
    from models.options import DRIVE_TECHNOLOGIES

    sites = case.sites.reset_index(drop=True)
    assets = case.assets
    asset_pos = {a: i for i, a in enumerate(op.asset_ids)}
    option_pos = {o: j for j, o in enumerate(op.option_ids)}
    on_drive_today = assets["speed_control"].to_numpy(dtype=object) == "drive"
    chosen = np.zeros(len(op.asset_ids), dtype=int)
    if plan is not None and len(plan):
        for a, o in zip(plan["asset_id"], plan["option_id"]):
            if a in asset_pos and o in option_pos:
                chosen[asset_pos[a]] = option_pos[o]
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
    caps = case.capacitors if case.capacitors is not None else pd.DataFrame(columns=["site_id", "rated_q_kvar", "control"])
    setups = site_setups(case, op.index)
    rows = []
    for k, site_id in enumerate(sites["site_id"].astype(str)):
        members = np.flatnonzero(site_of == site_id)
        if len(members) and site_id in setups:
            p = _chosen_total(op.p_kw, np.zeros(len(members), dtype=int), members)
            q = _chosen_total(op.q_kvar, np.zeros(len(members), dtype=int), members)
            meter = setups[site_id].site.meter_from_totals(p, q, base_p_kw_profile=setups[site_id].base_p_kw_profile)
            demand = monthly_peak_mean_kva(op.index, meter.p_kw, meter.q_kvar)
        else:
            demand = float("nan")
        banks = caps[caps["site_id"].astype(str) == site_id]
        fixed_kvar = float(banks.loc[banks["control"] == "fixed", "rated_q_kvar"].sum())
        stepped_kvar = float(banks.loc[banks["control"] != "fixed", "rated_q_kvar"].sum())
        for scenario, on_drive, front, extra_kvar in (("today", on_drive_today, front_today, 0.0),
                                                      ("plan", on_drive_plan, front_plan, float(terminal_kvar[members].sum()))):
            if scenario == "plan" and plan is None:
                continue
            drives = members[on_drive[members]]
            by_front_end: dict[str, float] = {}
            for fe in np.unique(front[drives]).tolist():
                mine = drives[front[drives] == fe]
                by_front_end[fe] = float(drive_input_kva(rated[mine], eff[mine], FRONT_END_DEFAULTS[fe][0]).sum())
            drive_kva = float(sum(by_front_end.values()))
            currents = harmonic_currents_kva(by_front_end)
            bus_v = float(np.max(v_v[drives])) if len(drives) else (float(np.max(v_v[members])) if len(members) else 400.0)
            orders, v_h, thd = voltage_harmonics_pct([drive_kva], [s_sc[k]], currents_kva=currents[None, :])
            worst = int(np.argmax(v_h[0]))
            limit_h, limit_thd = voltage_limits_pct([bus_v])
            # the point of common coupling: the transformer's primary where the site takes a higher voltage than
            # its motors' bus (its short-circuit power the source's, unknown when not given), else the bus
            pcc_kva = fault[k] if supply_v[k] > PCC_ABOVE_BUS_RATIO * bus_v else s_sc[k]
            tdd = (100.0 * float(np.sqrt((currents ** 2).sum())) / demand if demand > 0 and np.isfinite(pcc_kva)
                   else float("nan"))
            q_lo, q_hi = fixed_kvar + extra_kvar, fixed_kvar + extra_kvar + stepped_kvar
            q_lo_on = q_lo if q_lo > 0 else (min(stepped_kvar, float(banks.get("step_q_kvar", pd.Series(dtype=float))
                                                                     .fillna(banks["rated_q_kvar"] / 6.0).min()))
                                             if stepped_kvar > 0 else 0.0)
            h_hi, h_lo = resonance_order([s_sc[k]], [q_lo_on])[0], resonance_order([s_sc[k]], [q_hi])[0]
            row = {"site_id": site_id, "scenario": scenario, "drive_kva": drive_kva, "transformer_kva": s_tx[k],
                   "transformer_impedance_pct": z[k], "impedance_basis": basis[k], "short_circuit_kva": s_sc[k],
                   "pcc_short_circuit_kva": pcc_kva, "max_demand_kva": demand, "bus_v_v": bus_v,
                   "voltage_thd_pct": float(thd[0]), "voltage_thd_limit_pct": float(limit_thd[0]),
                   "worst_harmonic": int(orders[worst]), "worst_harmonic_pct": float(v_h[0, worst]),
                   "harmonic_limit_pct": float(limit_h[0]), "current_tdd_pct": tdd,
                   "current_tdd_limit_pct": (float(tdd_limit_pct([pcc_kva / demand], [supply_v[k]])[0]) if demand > 0
                                             else float("nan")),
                   "capacitor_kvar_min": q_lo, "capacitor_kvar_max": q_hi,
                   "resonance_order_low": h_lo, "resonance_order_high": h_hi,
                   "resonant_harmonic": (int(resonant_harmonic([h_lo], [h_hi], orders[currents > 0])[0])
                                         if q_hi > 0 and drive_kva > 0 else 0),
                   "front_ends": ", ".join(f"{fe} {kva_:,.0f} kVA" for fe, kva_ in sorted(by_front_end.items()))}
            if not np.isfinite(s_sc[k]):
                for name in ("voltage_thd_pct", "worst_harmonic_pct", "current_tdd_pct", "current_tdd_limit_pct",
                             "resonance_order_low", "resonance_order_high"):
                    row[name] = float("nan")
            row["finding"] = _finding(row)
            if len(np.unique(v_v[members])) > 1 and np.isfinite(s_sc[k]) and drive_kva > 0:
                row["finding"] += (f"; motors at {len(np.unique(v_v[members]))} voltages screened as one bus at "
                                   f"{bus_v:g} V (a transformer between them changes the figures)")
            rows.append(row)
    return pd.DataFrame(rows, columns=list(SCREEN_COLUMNS))
