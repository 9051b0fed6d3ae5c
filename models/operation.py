"""Every asset under every option: shaft power, speed, input kW and kVAr at the supply, per time step.

This module couples the case (assets, load profiles, options) to the machine models. For each option it
finds the shaft power the driven machine draws (the speed change of a lower-slip or synchronous machine
raises it on centrifugal loads unless a remedy holds the speed; a throttled load moved to speed control
follows its system curve), runs the machine model (induction, line-start PM, PM or reluctance on a
drive, an added drive, wound-field synchronous, or the existing motor with a terminal capacitor), and
returns what the site meter sees. Assets with interval profiles are evaluated per interval; assets with
a duty table or annual hours are evaluated per load state and reach the meter as their expected power.
"""

from __future__ import annotations

import contextlib
import functools

import os
import tempfile
import threading
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, replace

import numba
import numpy as np
import pandas as pd

from models import drives, induction, loads, synchronous, tabulation
from models.options import DRIVE_TECHNOLOGIES
from models.defaults import catalogue_efficiency_pct, class_floor_pct, default_power_factor
from models.profiles import LoadStates, analysis_index, asset_loads
from models.regulations import MAX_RULED_V_V

#: Loss kinds reported per asset and option.
LOSS_KINDS: tuple[str, ...] = ("motor", "drive", "excitation")
#: Start duty -> (load inertia / rotor inertia, start load torque / rated torque) for the line-start screen
#: (common practice: centrifugal pumps start light with little inertia; fans carry inertia; crushers,
#: loaded conveyors and mixers start heavy).
START_DUTY_SCREEN: dict[str, tuple[float, float]] = {"light": (2.0, 0.2), "normal": (8.0, 0.5), "heavy": (30.0, 1.0)}
#: Starts per hour and supply dip assumed for the line-start screen (common practice), where the register
#: gives no ``starts_per_hour``.
SCREEN_STARTS_PER_HOUR = 2.0
#: Starts per hour assumed for a motor switched on and off by a level or pressure switch (``speed_control``
#: ``on_off``) without ``starts_per_hour``: sumps and receivers are commonly sized for up to about 10 starts an
#: hour at the inflow that cycles the pump most (common practice, from memory; fewer for large motors).
ON_OFF_SCREEN_STARTS_PER_HOUR = 10.0
SCREEN_VOLTAGE_DIP_FRAC = 0.10
#: Exponent k of an interval's mean shaft power against a replacement's speed, P_new = P_ref (n_new/n_ref)^k, for a
#: constant-torque load (conveyors, positive-displacement machines): turned faster, such a load does the same work
#: in less running time (its loaded kW rises with the speed, its energy per unit of product does not), so the
#: mean power of an interval, which the meter and the bills read, is kept. Common practice for a process whose
#: throughput is set upstream; a machine that runs fixed hours whatever it delivers would take 1.
CONSTANT_TORQUE_RISE_EXPONENT = 0.0
#: Exponent of the shaft power against the speed *while it runs* of a load started and stopped to move a set
#: amount (``speed_control`` ``on_off``: a sump or tank pump on a level switch, a compressor on a pressure
#: switch): the cube for a centrifugal load (the affinity laws), the speed itself for a constant-torque one.
#: Turned faster it also moves the amount in less running time (flow with the speed), which :func:`_on_off`
#: applies, so an interval's mean power rises with the square of the speed for a centrifugal load and stays
#: for a constant-torque one (energy per volume with the square of the speed; common practice, the affinity
#: laws with a fixed pumped volume, friction head only).
ON_OFF_RUNNING_EXPONENTS = {"variable_torque": 3.0, "constant_torque": 1.0}
#: Lowest speed a drive runs a centrifugal pump or fan at continuously [frac of its speed today] (common practice,
#: from memory: 25-40 % for motor cooling, the pump's minimum flow and the velocity that keeps solids moving);
#: below the flow it gives, a drive on a load switched on and off cycles at that speed (:func:`_on_off_on_a_drive`).
MIN_DRIVE_SPEED_FRAC = 0.3
#: The caution of a drive option that runs a pump switched on and off continuously at the inflow.
ON_OFF_DRIVE_TEXT = ("a level or pressure controller in place of the switches: the drive runs the pump or fan at the "
                     "demand (cycling below its minimum speed); check the velocity that keeps solids moving in a sump "
                     "and its rising main, and the pump's minimum continuous flow")
#: A new premium motor's rated slip relative to the old one scales with its losses, within these bounds
#: (rotor copper loss = slip x air-gap power; common practice).
SLIP_SCALING_BOUNDS = (0.6, 1.0)
#: Power-factor gain of an IE4 over an IE3 induction motor of the same rating (common practice, small).
IE4_POWER_FACTOR_GAIN = 0.01
#: Losses of a wound-field synchronous motor relative to an induction motor of the same rating
#: (common practice, from memory: large synchronous machines reach 97-98 %).
WFSM_LOSS_RATIO_TO_INDUCTION = 0.8
#: A capacitor at the motor terminals is sized to at most this share of the no-load magnetising kVAr,
#: to avoid self-excitation (common practice, NEMA MG 1 Part 14 guidance).
CAPACITOR_MAX_NO_LOAD_SHARE = 0.9
#: Shaft power of a pump or fan at its design point (valve or damper fully open) as a share of the motor
#: rating when the profile never goes higher: motors are usually sized 10-15 % above the duty point
#: (common practice).
DESIGN_SHAFT_LOAD_FRAC = 0.9
#: Shaft load, as a share of rating, that a speed-coupled replacement is allowed to reach before the
#: result is flagged (the motor would be overloaded).
OVERLOAD_FLAG_FRAC = 1.0


@dataclass(frozen=True)
class OperatingResult:
    """Per-step power at the supply and yearly totals for every asset and option.

    Attributes
    ----------
    index : pandas.DatetimeIndex
        Analysis year (interval starts, tz-aware).
    interval_h : float
        Interval length [h].
    asset_ids, site_ids : numpy.ndarray of str
        One per asset, in case order.
    option_ids : numpy.ndarray of str
        One per option, in catalogue order (the first is today's motor).
    technologies : numpy.ndarray of str
        Technology of each option.
    applies : numpy.ndarray of bool, shape (n_assets, n_options)
    reason : numpy.ndarray of str, shape (n_assets, n_options)
        Why an option does not apply ("" where it does).
    p_kw, q_kvar : numpy.ndarray, shape (n_options, n_assets, n_steps)
        Active and reactive power at the supply per interval [kW], [kVAr] (mean over the interval;
        reactive positive lagging). Where an option does not apply, today's values are repeated.
    energy_kwh : numpy.ndarray, shape (n_assets, n_options)
        Yearly input energy [kWh].
    shaft_energy_kwh : numpy.ndarray, shape (n_assets, n_options)
        Yearly shaft energy [kWh].
    losses_kwh : numpy.ndarray, shape (n_assets, n_options, len(LOSS_KINDS))
        Yearly losses by kind [kWh].
    lagging_kvarh, leading_kvarh : numpy.ndarray, shape (n_assets, n_options)
        Yearly reactive energy drawn (lagging) and supplied (leading) at the motor [kVArh].
    running_h : numpy.ndarray, shape (n_assets,)
        Hours per year the asset runs [h].
    mean_speed_rpm : numpy.ndarray, shape (n_assets, n_options)
        Running-hour mean speed of the driven shaft [rpm].
    capacitor_q_kvar : numpy.ndarray, shape (n_assets, n_options)
        Terminal capacitor size of capacitor options [kVAr].
    interval_data : numpy.ndarray of bool, shape (n_assets,)
        True where the asset has an interval profile.
    flags : pandas.DataFrame
        asset_id, option_id, flag: cautions (starting screen, overload, excitation limits, data notes).
    curves : models.tabulation.CurveBook, optional
        A block's options other than today's, kept compact (:func:`site_blocks` with ``curves``): then
        ``p_kw`` and ``q_kvar`` hold today's motors only, shape (1, n_assets, n_steps), and every
        option's rows are read through the book (:meth:`~models.tabulation.CurveBook.fill`). None: the
        arrays hold every row.
    """

    index: pd.DatetimeIndex
    interval_h: float
    asset_ids: np.ndarray
    site_ids: np.ndarray
    option_ids: np.ndarray
    technologies: np.ndarray
    applies: np.ndarray
    reason: np.ndarray
    p_kw: np.ndarray
    q_kvar: np.ndarray
    energy_kwh: np.ndarray
    shaft_energy_kwh: np.ndarray
    losses_kwh: np.ndarray
    lagging_kvarh: np.ndarray
    leading_kvarh: np.ndarray
    running_h: np.ndarray
    mean_speed_rpm: np.ndarray
    capacitor_q_kvar: np.ndarray
    interval_data: np.ndarray
    flags: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=["asset_id", "option_id", "flag"]))
    curves: tabulation.CurveBook | None = None

    def option_position(self, option_id: str) -> int:
        """Return the position of an option id."""
        hits = np.flatnonzero(self.option_ids == option_id)
        if not len(hits):
            raise ValueError(f"unknown option '{option_id}'")
        return int(hits[0])

    def asset_position(self, asset_id: str) -> int:
        """Return the position of an asset id."""
        hits = np.flatnonzero(self.asset_ids == asset_id)
        if not len(hits):
            raise ValueError(f"unknown asset '{asset_id}'")
        return int(hits[0])


# ---------------------------------------------------------------------------------------------------
# Per-asset parameters
# ---------------------------------------------------------------------------------------------------
def asset_arrays(assets: pd.DataFrame) -> dict[str, np.ndarray]:
    """Return the per-asset numbers the machine models need, as arrays of shape (n_assets,)."""
    a = assets
    speed_control = a["speed_control"].to_numpy(dtype=object)
    variable = a["load_type"].to_numpy(dtype=object) == "variable_torque"
    return {
        "rated_p_kw": a["rated_p_kw"].to_numpy(dtype=float),
        "poles": a["poles"].to_numpy(dtype=float),
        "f_hz": a["supply_f_hz"].to_numpy(dtype=float),
        "v_v": a["rated_v_v"].to_numpy(dtype=float),
        "sync_rpm": a["sync_speed_rpm"].to_numpy(dtype=float),
        "eff_frac": a["rated_efficiency_pct"].to_numpy(dtype=float) / 100.0,
        "pf": a["rated_power_factor"].to_numpy(dtype=float),
        "speed_rpm": a["rated_speed_rpm"].to_numpy(dtype=float),
        "eff75_frac": a["efficiency_75_pct"].to_numpy(dtype=float) / 100.0,
        "eff50_frac": a["efficiency_50_pct"].to_numpy(dtype=float) / 100.0,
        "pf75": a["power_factor_75"].to_numpy(dtype=float),
        "pf50": a["power_factor_50"].to_numpy(dtype=float),
        "rewinds": a["rewind_count"].to_numpy(dtype=float),
        "rewind_loss": (a["rewind_loss_pct_points"].to_numpy(dtype=float) if "rewind_loss_pct_points" in a
                        else np.full(len(a), induction.DEFAULT_REWIND_LOSS_PCT_POINTS)),
        "exponent": np.where(a["load_type"].to_numpy(dtype=object) == "variable_torque", 3.0, 1.0),
        # what a speed rise does to the mean power of an interval: the cube for a centrifugal load, nothing for a
        # constant-torque one, which does the same work in less running time; for one switched on and off, its
        # law while it runs (its shorter running time is applied by _on_off)
        "rise_exponent": np.where(speed_control == "on_off",
                                  np.where(variable, ON_OFF_RUNNING_EXPONENTS["variable_torque"],
                                           ON_OFF_RUNNING_EXPONENTS["constant_torque"]),
                                  np.where(variable, 3.0, CONSTANT_TORQUE_RISE_EXPONENT)),
        "on_off": speed_control == "on_off",
        "starts_per_hour": (a["starts_per_hour"].to_numpy(dtype=float) if "starts_per_hour" in a
                            else np.full(len(a), np.nan)),
        # the shaft load while an on/off motor runs, where the register gives it [kW] (NaN: from its profile)
        "running_load_kw": (a["running_load_pct"].to_numpy(dtype=float) / 100.0 * a["rated_p_kw"].to_numpy(dtype=float)
                            if "running_load_pct" in a else np.full(len(a), np.nan)),
        "throttled": speed_control == "throttled",
        "has_drive": speed_control == "drive",
        "static_head": a["static_head_frac"].to_numpy(dtype=float),
        "start_duty": a["start_duty"].to_numpy(dtype=object),
        "wound_field_today": (a["machine_type"].to_numpy(dtype=object) == "wound_field_synchronous"
                              if "machine_type" in a else np.zeros(len(a), dtype=bool)),
        # a synchronous machine today (wound-field or permanent-magnet): no slip of its own to scale
        "synchronous_today": (np.isin(a["machine_type"].to_numpy(dtype=object), SYNCHRONOUS_MACHINE_TYPES)
                              if "machine_type" in a else np.zeros(len(a), dtype=bool)),
    }


#: Kinds of machine in the register that run at synchronous speed today.
SYNCHRONOUS_MACHINE_TYPES = ("wound_field_synchronous", "pm_synchronous")


def _covers(rows: np.ndarray, n: int) -> bool:
    """True when sorted unique positions ``rows`` are all of 0..n-1."""
    return len(rows) == n


def _take(arrays: dict[str, np.ndarray], rows: np.ndarray) -> dict[str, np.ndarray]:
    n = len(next(iter(arrays.values()))) if arrays else 0
    if _covers(rows, n):
        return arrays
    return {k: v[rows] for k, v in arrays.items()}


def _with_class_efficiencies(arr: dict[str, np.ndarray], classes) -> dict[str, np.ndarray]:
    """``arr`` with :func:`class_efficiency_frac` of each class stored (per asset, so sliced with the rest).

    A class whose efficiency cannot be computed is left out (it is then computed, and fails, where used).
    """
    out = dict(arr)
    for cls in classes:
        try:
            out[f"class_efficiency_frac:{cls}"] = class_efficiency_frac(arr, cls)
        except (ValueError, KeyError):
            pass
    return out


def _take_params(params: induction.InductionParams, rows: np.ndarray) -> induction.InductionParams:
    """The calibrated motors of a subset of assets (calibration is element-wise: slicing equals recalibrating)."""
    from dataclasses import fields, replace

    if _covers(rows, len(np.atleast_1d(params.rated_p_kw))):
        return params
    return replace(params, **{f.name: np.asarray(getattr(params, f.name))[rows] for f in fields(params)
                              if np.ndim(getattr(params, f.name))})


def existing_motor(arr: dict[str, np.ndarray], extra_rewinds: int = 0) -> induction.InductionParams:
    """Calibrate today's induction motors (optionally after one more rewind).

    Today's machine is modelled by the induction motor's losses whatever its type, at a slip of at most
    0.1 %; a wound-field synchronous machine today (``wound_field_today``) runs at unity power factor, its
    field set so (the usual setting where no reactive power is asked of it), so its kVAr is nil.
    """
    speed = np.minimum(arr["speed_rpm"], arr["sync_rpm"] * (1 - 1e-3))
    params = _calibrated_today(arr, speed, extra_rewinds)
    wound = arr.get("wound_field_today")
    if wound is None or not np.any(wound):
        return params
    return replace(params, q_constant_kvar=np.where(wound, 0.0, params.q_constant_kvar),
                   q_load_kvar=np.where(wound, 0.0, params.q_load_kvar),
                   rated_power_factor=np.where(wound, 1.0, params.rated_power_factor))


def _calibrated_today(arr: dict[str, np.ndarray], speed: np.ndarray, extra_rewinds: int,
                      calibrate=induction.calibrate_induction):
    return calibrate(
        arr["rated_p_kw"], arr["eff_frac"], arr["pf"], speed, arr["sync_rpm"],
        efficiency_75_frac=arr["eff75_frac"], efficiency_50_frac=arr["eff50_frac"],
        power_factor_75=arr["pf75"], power_factor_50=arr["pf50"], rewind_count=arr["rewinds"] + extra_rewinds,
        rewind_loss_pct_points=arr.get("rewind_loss", induction.DEFAULT_REWIND_LOSS_PCT_POINTS))


def today_calibration_failures(arr: dict[str, np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """Where today's motors cannot be calibrated as :func:`existing_motor` calibrates them, for the case check.

    Parameters
    ----------
    arr : dict of numpy.ndarray
        :func:`asset_arrays` of the register, defaults filled in.

    Returns
    -------
    quantity, message : numpy.ndarray of object, shape (n_assets,)
        The input the first failed rule points at and its message, "" where the motor calibrates
        (:func:`models.induction.calibration_failures`).
    """
    speed = np.minimum(arr["speed_rpm"], arr["sync_rpm"] * (1 - 1e-3))
    return _calibrated_today(arr, speed, 0, calibrate=induction.calibration_failures)


def class_efficiency_frac(arr: dict[str, np.ndarray], efficiency_class: str) -> np.ndarray:
    """Full-load efficiency of a new catalogue machine of a class: class minimum less 10 % of its losses.

    Above the class scope (over 1000 kW) the existing motor's losses are scaled by the class-to-class
    loss ratio of a 1000 kW motor instead. A value stored in ``arr`` under ``class_efficiency_frac:<class>``
    (:func:`_with_class_efficiencies`) is returned as it is.
    """
    stored = arr.get(f"class_efficiency_frac:{efficiency_class}")
    if stored is not None:
        return stored
    floor = class_floor_pct(arr["rated_p_kw"], arr["poles"], arr["f_hz"], efficiency_class)
    eta = catalogue_efficiency_pct(floor) / 100.0
    # above 1000 kW: the class step at 1000 kW applied to today's losses
    ratio = (100.0 - floor) / (100.0 - class_floor_pct(1000.0, arr["poles"], arr["f_hz"], "IE2"))
    large = arr["rated_p_kw"] > 1000.0
    eta_large = 1.0 - np.minimum(ratio, 1.0) * (1.0 - arr["eff_frac"])
    return np.where(large, np.maximum(eta_large, arr["eff_frac"]), eta)


# ---------------------------------------------------------------------------------------------------
# Load coupling
# ---------------------------------------------------------------------------------------------------
@dataclass
class _Load:
    """The reference load of a group of assets on a (n, m) grid of steps or states."""

    p_ref_kw: np.ndarray      # shaft power with today's motor [kW]
    n_ref_known: np.ndarray | None  # today's shaft speed [rpm], or None until first asked (see n_ref_rpm)
    running: np.ndarray       # bool
    weight_h: np.ndarray      # hours each column stands for, (n, m)
    p_design_kw: np.ndarray   # design (valve-open) shaft power per asset [kW], (n, 1)
    controlled: tuple[np.ndarray, np.ndarray] | None = None  # _speed_controlled's result, once computed
    running_weight: tuple[np.ndarray, np.ndarray] | None = None  # (weight where running, its row sums), once computed
    existing: induction.InductionParams | None = None  # today's motors, for a speed not yet computed
    #: shaft power while an on/off asset runs [kW], (n, 1): NaN for the others; None where every column is a
    #: running state of its own (load states, a grid's loads evaluated as such)
    on_kw: np.ndarray | None = None

    @property
    def n_ref_rpm(self) -> np.ndarray:
        """Today's shaft speed at the reference load [rpm], computed on first use (element-wise: a group
        whose intervals are all read from its grid never needs it per interval)."""
        if self.n_ref_known is None:
            self.n_ref_known = np.asarray(induction.induction_speed_rpm(self.existing, self.p_ref_kw), dtype=float)
        return self.n_ref_known

    def rows(self, sub: np.ndarray) -> "_Load":
        """The same load for a subset of its assets (element-wise quantities, so sliced, not recomputed)."""
        if _covers(sub, self.p_ref_kw.shape[0]):
            return self
        controlled = None if self.controlled is None else (self.controlled[0][sub], self.controlled[1][sub])
        running_weight = None if self.running_weight is None else (self.running_weight[0][sub], self.running_weight[1][sub])
        w = self.weight_h
        # one row of weights for every asset (interval data) stays one row, broadcast
        weight = np.broadcast_to(w[:1], (len(sub),) + w.shape[1:]) if w.shape[0] and w.strides[0] == 0 else w[sub]
        n_ref = None if self.n_ref_known is None else self.n_ref_known[sub]
        existing = None if n_ref is not None else _take_params(self.existing, sub)
        return _Load(self.p_ref_kw[sub], n_ref, self.running[sub], weight, self.p_design_kw[sub], controlled,
                     running_weight, existing, None if self.on_kw is None else self.on_kw[sub])

    def weight_running(self) -> tuple[np.ndarray, np.ndarray]:
        """Hours each column stands for where the asset runs (0 elsewhere) (n, m), and their sums (n,) [h]."""
        if self.running_weight is None:
            run_w = np.where(self.running, self.weight_h, 0.0)
            self.running_weight = (run_w, run_w.sum(axis=1))
        return self.running_weight


def _reference_load(arr, existing: induction.InductionParams, values: np.ndarray, is_input_kw: np.ndarray,
                    weight_h: np.ndarray, intervals: bool = True) -> _Load:
    """Today's shaft load of a group from its profile values (shaft-load fractions, or measured input kW
    where ``is_input_kw``), where it runs, and each asset's design shaft power.

    With ``intervals`` (each column an interval's mean, not a load state of its own) an on/off asset's
    intervals are read as its running load run for part of the interval (``on_kw``, see :func:`_on_off`).

    The shaft loads, where the asset runs and each row's peak are one compiled pass (:func:`_reference_rows`);
    measured-input rows are first turned into shaft power by today's motor on those rows alone (the
    model is element-wise, so the values are those of the whole group).
    """
    rated = np.ascontiguousarray(arr["rated_p_kw"], dtype=float)
    values = np.ascontiguousarray(values, dtype=float)
    n, m = values.shape
    p_ref = np.empty((n, m))
    is_input_kw = np.asarray(is_input_kw, dtype=bool)
    on_off = np.asarray(arr.get("on_off", np.zeros(n, dtype=bool)), dtype=bool) & intervals
    if is_input_kw.any():
        inputs = np.flatnonzero(is_input_kw & ~on_off)
        if len(inputs):
            p_ref[inputs] = induction.shaft_from_input_kw(_take_params(existing, inputs), values[inputs])
        cycled = np.flatnonzero(is_input_kw & on_off)
        if len(cycled):
            p_ref[cycled] = _on_off_shaft_from_input(arr, existing, values, cycled)
    weight = np.broadcast_to(weight_h, (n, m))
    running = np.empty((n, m), dtype=bool)
    peak = np.empty(n)
    _reference_rows(values, rated, ~is_input_kw, weight, p_ref, running, peak)
    p_design = np.maximum(peak[:, None], DESIGN_SHAFT_LOAD_FRAC * rated[:, None])
    on_kw = None
    if on_off.any():  # the load while it runs: the register's, else the highest interval mean of the year
        given = np.asarray(arr["running_load_kw"], dtype=float)
        on_kw = np.where(on_off, np.where(np.isfinite(given), given, peak), np.nan)[:, None]
    return _Load(p_ref, None, running, weight, p_design, existing=existing, on_kw=on_kw)  # speed on first use


def _on_off_shaft_from_input(arr, existing: induction.InductionParams, values: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """Mean shaft load [kW] of on/off assets (rows ``rows`` of a group) from their measured mean input [kW].

    Such a motor runs at its running load P_on, drawing P_in(P_on) from the supply, for the share d of the
    interval it runs, so the interval's mean input is d P_in(P_on) and its mean shaft load d P_on: the mean
    shaft load is the mean input times P_on / P_in(P_on), linear in the input (turning the mean input itself
    into shaft power through the motor's part-load efficiency would read the light load the motor never
    runs at). P_on is the register's ``running_load_pct`` where given (its input from today's motor), else
    the shaft load of the highest mean input of the year (taken as an interval run throughout).
    """
    motors = _take_params(existing, rows)
    v = values[rows]
    peak_in = np.max(np.where(v > 0.0, v, 0.0), axis=1)
    given = np.asarray(arr["running_load_kw"], dtype=float)[rows]
    has = np.isfinite(given) & (given > 0.0)
    p_on = np.where(has, given, np.asarray(induction.shaft_from_input_kw(motors, peak_in[:, None]), dtype=float)[:, 0])
    p_in_on = np.where(has, induction._input_reactive_speed(motors, np.where(has, given, 0.0)[:, None])[0][:, 0], peak_in)
    ratio = np.where(p_in_on > 0.0, p_on / np.where(p_in_on > 0.0, p_in_on, 1.0), 0.0)
    return np.where(v > 0.0, v * ratio[:, None], 0.0)


@numba.njit(nogil=True, cache=True)
def _reference_rows(values, rated, from_values, weight, p_ref, running, peak):  # pragma: no cover - compiled
    """One pass of :func:`_reference_load`: as numpy's p = values * rated (rows ``from_values``; the others
    are already in ``p_ref``), running = p > 0, peak = max over the row of where(running & (weight > 0), p, 0).
    """
    n, m = p_ref.shape
    for i in range(n):
        top = 0.0
        scale = rated[i]
        own = from_values[i]
        for t in range(m):
            v = values[i, t] * scale if own else p_ref[i, t]
            p_ref[i, t] = v
            on = v > 0.0
            running[i, t] = on
            if on and weight[i, t] > 0.0 and v > top:
                top = v
        peak[i] = top


def _speed_controlled(arr, load: _Load) -> tuple[np.ndarray, np.ndarray]:
    """Shaft power and speed fraction once a drive controls the flow (throttle removed where there was one)."""
    if load.controlled is not None:
        return load.controlled
    p = load.p_ref_kw
    speed_frac = load.n_ref_rpm / arr["sync_rpm"][:, None]  # today's speed share; the rules scale their rows
    # existing drive or unthrottled load: the drive keeps today's flow; a variable-torque load already on a
    # drive runs at the speed its power implies on the affinity law (design power at today's rated speed).
    # Each rule is worked on its own rows only (every quantity is element-wise: the values are those of
    # the rule applied to the whole group and selected)
    p_new = p
    drive = np.flatnonzero(np.asarray(arr["has_drive"], dtype=bool))
    throttled = np.asarray(arr["throttled"], dtype=bool) & (np.asarray(arr["exponent"]) == 3.0)
    drive = drive[~throttled[drive]]
    if len(drive):
        p_design = load.p_design_kw[drive]
        ratio = np.clip(np.where(p_design > 0, p[drive] / p_design, 0.0), 0.0, None)
        speed_frac[drive] = ratio ** (1.0 / arr["exponent"][drive, None]) * speed_frac[drive]
    rows = np.flatnonzero(throttled)
    if len(rows):
        p_rows = p[rows]
        moved = loads.throttled_to_speed_control(p_rows, load.p_design_kw[rows],
                                                 np.broadcast_to(arr["static_head"][rows, None], p_rows.shape))
        p_new = p.copy()
        p_new[rows] = np.asarray(moved.shaft_p_kw, dtype=float)
        speed_frac[rows] = np.asarray(moved.speed_frac, dtype=float) * speed_frac[rows]
    speed_frac = np.where(load.running, np.clip(speed_frac, 0.05, 1.2), 0.0)
    return np.where(load.running, p_new, 0.0), speed_frac


def _coupled(arr, load: _Load, speed_of_new, remedy: str, fixed_speed_rpm=None,
             new_motor: induction.InductionParams | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Shaft power and speed of a replacement machine on the same driven machine.

    With ``new_motor`` (new induction motors whose speed is ``speed_of_new``) the coupled load is solved
    by :func:`models.induction.coupled_load_kw`, the generic solver's values in one compiled pass."""
    if remedy in ("trim_or_pulley", "speed_control"):
        speed = fixed_speed_rpm if fixed_speed_rpm is not None else speed_of_new(load.p_ref_kw)
        return load.p_ref_kw, np.broadcast_to(speed, load.p_ref_kw.shape) * load.running
    exponent = arr["rise_exponent"][:, None]
    if fixed_speed_rpm is not None:
        p_new = loads.shaft_power_at_speed_kw(load.p_ref_kw, np.where(load.running, load.n_ref_rpm, 1.0),
                                              np.broadcast_to(fixed_speed_rpm, load.p_ref_kw.shape), exponent)
        speed = np.broadcast_to(fixed_speed_rpm, load.p_ref_kw.shape)
    elif new_motor is not None and load.p_ref_kw.ndim == 2:
        p_new, speed = induction.coupled_load_kw(new_motor, load.p_ref_kw, np.where(load.running, load.n_ref_rpm, 1.0),
                                                 exponent)
    else:
        solved = loads.solve_speed_coupled_load(load.p_ref_kw, np.where(load.running, load.n_ref_rpm, 1.0),
                                                speed_of_new, np.broadcast_to(exponent, load.p_ref_kw.shape))
        p_new, speed = np.asarray(solved.shaft_p_kw, dtype=float), np.asarray(solved.speed_rpm, dtype=float)
    held = arr["has_drive"][:, None]  # an existing drive keeps holding the process speed
    p_new = np.where(held, load.p_ref_kw, p_new)
    speed = np.where(held, load.n_ref_rpm, speed)
    return np.where(load.running, p_new, 0.0), np.where(load.running, speed, 0.0)


# ---------------------------------------------------------------------------------------------------
# Machines
# ---------------------------------------------------------------------------------------------------
@dataclass
class _Point:
    p_kw: np.ndarray
    q_kvar: np.ndarray
    shaft_kw: np.ndarray
    speed_rpm: np.ndarray
    loss_motor_kw: np.ndarray
    loss_drive_kw: np.ndarray
    loss_excitation_kw: np.ndarray
    flags: list[tuple[int, str]] = field(default_factory=list)  # (row in group, text)


def _zeros(shape) -> None:
    """A loss kind the machine does not have: None, read as zero in every interval (no array is made)."""
    return None


@dataclass
class _Parts:
    """A group's operating point computed in parts: ``parts`` = [(rows of the group, _Point of those rows)].

    The machine models are element-wise per asset, so each part is exactly what the whole would hold in
    its rows; yearly sums are taken part by part and the whole is assembled only when asked for.
    """

    n_rows: int
    parts: list[tuple[np.ndarray, _Point]]
    flags: list[tuple[int, str]] = field(default_factory=list)

    def whole(self) -> _Point:
        """The parts gathered into one point of the group's rows."""
        first = self.parts[0][1]
        shape = (self.n_rows,) + first.p_kw.shape[1:]
        out = {}
        for name in _POINT_ARRAYS:
            values = [getattr(pt, name) for _, pt in self.parts]
            if all(v is None for v in values):
                out[name] = None
                continue
            target = np.empty(shape)
            for (rows, _), v in zip(self.parts, values):
                target[rows] = 0.0 if v is None else v
            out[name] = target
        return _Point(**out, flags=list(self.flags))


def _whole(pt) -> _Point:
    return pt.whole() if isinstance(pt, _Parts) else pt


def _zero_where_stopped(x: np.ndarray, stopped: np.ndarray) -> np.ndarray:
    """``np.where(running, x, 0.0)`` in place on a fresh array ``x``."""
    np.copyto(x, 0.0, where=stopped)
    return x


def _induction_on_line(params, shaft_kw, running) -> _Point:
    p_in, q, speed = induction._input_reactive_speed(params, shaft_kw)
    stopped = ~running
    loss = _zero_where_stopped(np.subtract(p_in, shaft_kw), stopped)
    p = _zero_where_stopped(p_in, stopped)
    q = _zero_where_stopped(q, stopped)
    return _Point(p, q, shaft_kw, _zero_where_stopped(speed, stopped), loss, _zeros(p.shape), _zeros(p.shape))


def _front_end(option: Mapping | None) -> str:
    """The front end of an option's drive (:data:`models.drives.DEFAULT_FRONT_END` where it gives none)."""
    value = None if option is None else option.get("drive_front_end")
    return value if isinstance(value, str) and value in drives.FRONT_END_DEFAULTS else drives.DEFAULT_FRONT_END


def _with_front_end_losses(p_kw: np.ndarray, q_kvar: np.ndarray, loss_drive_kw: np.ndarray, front_end: str):
    """Input, reactive power and drive loss with the front end's losses (:data:`models.drives.FRONT_END_LOSS_RATIO`
    times a six-pulse drive's): the extra loss is drawn at the front end's displacement power factor."""
    ratio = drives.FRONT_END_LOSS_RATIO[front_end]
    if ratio == 1.0:
        return p_kw, q_kvar, loss_drive_kw
    extra = (ratio - 1.0) * loss_drive_kw
    dpf = drives.FRONT_END_DEFAULTS[front_end][0]
    tan_phi = np.sqrt(max(1.0 - dpf * dpf, 0.0)) / dpf
    return p_kw + extra, q_kvar + extra * tan_phi, loss_drive_kw + extra


def _induction_on_drive(arr, params, shaft_kw, speed_frac, running, front_end: str = drives.DEFAULT_FRONT_END) -> _Point:
    """An induction motor fed by a drive (today's drive, or one added): its losses at the drive's speed and
    the shaft's torque (:func:`models.induction.input_on_drive_kw`), not at the line's frequency; the drive's
    displacement power factor, harmonic current and losses those of its front end."""
    p_in = np.asarray(induction.input_on_drive_kw(params, np.where(running, shaft_kw, 0.0), speed_frac), dtype=float)
    safe_speed = np.where(speed_frac > 0.05, speed_frac, 0.05)
    torque_frac = np.where(running, shaft_kw / arr["rated_p_kw"][:, None] / safe_speed, 0.0)
    s_kva = drives.drive_rated_s_kva_for_motor(arr["rated_p_kw"], arr["eff_frac"], arr["pf"])
    motor_loss = p_in - shaft_kw
    dpf, thd_i = drives.FRONT_END_DEFAULTS[front_end]
    fed = drives.induction_motor_with_added_drive(np.where(running, p_in, 0.0), np.clip(speed_frac, 0.0, 1.5),
                                                  np.clip(torque_frac, 0.0, 2.0), s_kva[:, None],
                                                  motor_losses_kw=np.where(running, motor_loss, 0.0), dpf=dpf,
                                                  thd_i_frac=thd_i)
    p_fed, q_fed, loss_fed = _with_front_end_losses(np.asarray(fed.p_kw, dtype=float), np.asarray(fed.q_kvar, dtype=float),
                                                    np.asarray(fed.drive_loss_kw, dtype=float), front_end)
    p = np.where(running, p_fed, 0.0)
    q = np.where(running, q_fed, 0.0)
    loss_drive = np.where(running, loss_fed, 0.0)
    loss_motor = np.where(running, motor_loss + fed.pwm_extra_loss_kw, 0.0)
    speed = np.where(running, speed_frac * arr["sync_rpm"][:, None], 0.0)
    return _Point(p, q, shaft_kw, speed, loss_motor, loss_drive, _zeros(p.shape))


_POINT_ARRAYS = ("p_kw", "q_kvar", "shaft_kw", "speed_rpm", "loss_motor_kw", "loss_drive_kw", "loss_excitation_kw")


def _line_or_drive(arr, params, load: _Load, shaft_kw: np.ndarray) -> _Point:
    """An induction motor on the line, or on the drive already fitted where there is one.

    Each model runs on its own assets only (the machine models are element-wise per asset).
    """
    held = arr["has_drive"]
    if not held.any():
        return _induction_on_line(params, shaft_kw, load.running)
    if held.all():
        _, speed_frac = _speed_controlled(arr, load)
        return _induction_on_drive(arr, params, shaft_kw, speed_frac, load.running)
    on, off = np.flatnonzero(held), np.flatnonzero(~held)
    load_on = load.rows(on)
    _, speed_frac = _speed_controlled(_take(arr, on), load_on)
    fed = _induction_on_drive(_take(arr, on), _take_params(params, on), shaft_kw[on], speed_frac, load_on.running)
    line = _induction_on_line(_take_params(params, off), shaft_kw[off], load.running[off])
    return _Parts(len(held), [(on, fed), (off, line)])


def _today(arr, existing, load: _Load) -> _Point:
    """Today's motor, on the line or on its existing drive."""
    return _line_or_drive(arr, existing, load, load.p_ref_kw)


def _new_induction(arr, existing, load: _Load, option: Mapping) -> _Point:
    eff = class_efficiency_frac(arr, option["efficiency_class"])
    old_loss = 1.0 - arr["eff_frac"]
    scale = np.clip((1.0 - eff) / np.where(old_loss > 0, old_loss, 1.0), *SLIP_SCALING_BOUNDS)
    # today's slip, scaled with the losses; a synchronous machine today has none, so an induction motor in its
    # place takes the typical slip of its size (it turns slower than the machine it replaces)
    synchronous = np.asarray(arr.get("synchronous_today", np.zeros(len(eff), dtype=bool)), dtype=bool)
    base_slip = np.where(synchronous, induction.default_rated_slip_frac(arr["rated_p_kw"]), existing.rated_slip_frac)
    slip = base_slip * scale
    # a new motor's power factor: the typical one of its size, or today's where that is higher (a new motor is
    # taken as no worse than the one it replaces: a like-for-like change moves no kVAr it did not earn)
    typical = default_power_factor(arr["rated_p_kw"], arr["poles"])
    today = np.where(synchronous, typical, np.nan_to_num(arr["pf"], nan=0.0))
    pf = np.clip(np.maximum(typical, today)
                 + (IE4_POWER_FACTOR_GAIN if option["efficiency_class"] in ("IE4", "IE5") else 0.0), 0.5, 0.97)
    new = induction.calibrate_induction(arr["rated_p_kw"], eff, pf, arr["sync_rpm"] * (1 - slip), arr["sync_rpm"])
    # the coupling keeps the load >= 0 (checked once on entry), so the speed needs no sign test per pass
    shaft, _ = _coupled(arr, load, lambda p: induction._speed_rpm_unchecked(new, p), option["speed_remedy"],
                        new_motor=new)
    return _line_or_drive(arr, new, load, np.asarray(shaft, dtype=float))


#: Year before which a winding is taken as built without converter-duty insulation (common practice: such
#: ratings spread through the 1990s; a value from memory, used only to word the caution below).
DRIVE_INSULATION_YEAR = 2000


def drive_on_existing_motor_caution(year_installed, rewind_count) -> list[str]:
    """The caution of a drive added to an existing motor, one text per motor.

    Parameters
    ----------
    year_installed : array_like of float
        Year each motor was installed (NaN when not known).
    rewind_count : array_like of float
        Rewinds so far (NaN when not known).

    Returns
    -------
    list of str
        A caution for every motor; for one installed before :data:`DRIVE_INSULATION_YEAR`, rewound, or of
        unknown age it names why that motor is most at risk.

    Notes
    -----
    A drive's fast-rising voltage pulses stress the winding's turn-to-turn insulation beyond what a sine
    supply does, and its common-mode voltage drives currents through the bearings. A winding not rated
    for converter supply (an older motor, or one rewound without converter-grade insulation) may fail
    early on a drive unless an output filter is fitted; bearings may need insulation or a shaft grounding
    ring [1]_ [2]_ [3]_.

    References
    ----------
    .. [1] IEC TS 60034-25:2014, *Rotating electrical machines - Part 25: AC electrical machines used in
       power drive systems - Application guide* (cited from memory).
    .. [2] IEC 60034-18-41:2014, *Partial discharge free electrical insulation systems (Type I) used in
       rotating electrical machines fed from voltage converters* (cited from memory).
    .. [3] NEMA MG 1-2016, Part 31, *Definite-purpose inverter-fed polyphase motors* (cited from memory).

    Examples
    --------
    >>> texts = drive_on_existing_motor_caution([1996.0, 2015.0], [2.0, 0.0])
    >>> texts[0].split(":")[0]
    'drive on an existing motor (installed 1996, rewound 2 times)'
    >>> texts[1].split(":")[0]
    'drive on an existing motor'
    """
    year = np.asarray(year_installed, dtype=float)
    rewinds = np.asarray(rewind_count, dtype=float)
    out = []
    for y, r in zip(year.ravel(), rewinds.ravel()):
        why = []
        if not np.isfinite(y):
            why.append("age not known")
        elif y < DRIVE_INSULATION_YEAR:
            why.append(f"installed {int(y)}")
        if np.isfinite(r) and r > 0:
            why.append("rewound once" if r == 1 else f"rewound {int(r)} times")
        head = "drive on an existing motor" + (f" ({', '.join(why)})" if why else "")
        out.append(f"{head}: a qualified person to confirm its winding suits converter supply (else an output "
                   "filter) and its bearings are guarded from shaft currents")
    return out


#: Flag of a synchronous-speed machine whose load goes beyond its rating.
_OVERLOAD_TEXT = "at synchronous speed the load exceeds the motor rating in some intervals: size up or remedy the speed"
#: New machines of the catalogue whose class levels and cost curves are those of low-voltage motors.
MEDIUM_VOLTAGE_CAUTIONED = ("induction", "line_start_pm", "pm_drive", "reluctance_drive")
#: Their caution on a motor rated above :data:`models.regulations.MAX_RULED_V_V`.
MEDIUM_VOLTAGE_TEXT = ("a medium-voltage motor (rated above 1,000 V): this option's efficiency class levels and "
                       "capital curve are those of low-voltage motors, and the minimum-efficiency rules do not cover "
                       "it; take its efficiency and price from a maker's quote")
#: Equipment added to today's motor whose cost curves are those of low-voltage equipment.
MEDIUM_VOLTAGE_PRICED = ("capacitor", "add_drive")
#: Their caution on a motor rated above :data:`models.regulations.MAX_RULED_V_V`.
MEDIUM_VOLTAGE_EQUIPMENT_TEXT = ("a medium-voltage motor (rated above 1,000 V): this option's capital curve is that of "
                                 "low-voltage equipment; a medium-voltage capacitor bank or drive, with its switchgear "
                                 "and protection, costs more: take its price from a supplier's quote")


def hazardous_area_caution(area: str, technology: str, certified: bool = False) -> str:
    """The caution of an option for a motor in a hazardous area (its ``hazardous_area`` class), "" in none;
    ``certified``: the catalogue's row lists the areas it is certified for (its price is then that equipment's).

    Notes
    -----
    Equipment in an explosive atmosphere must be certified for its zone (IEC 60079-0 and -14: ATEX or IECEx;
    NEC articles 500/505 in North America); a motor fed by a drive must be certified for converter supply
    with that drive, and an Ex motor keeps its certification only if repaired to IEC 60079-19 [1]_ [2]_.

    References
    ----------
    .. [1] IEC 60079-14:2013, *Explosive atmospheres - Part 14: Electrical installations design, selection and
       erection* (cited from memory).
    .. [2] IEC 60079-19:2019, *Explosive atmospheres - Part 19: Equipment repair, overhaul and reclamation*
       (cited from memory).

    Examples
    --------
    >>> hazardous_area_caution("zone_2", "rewind")
    'hazardous area (zone 2): only a repairer working to IEC 60079-19 may rewind an Ex motor, or it loses its certification'
    >>> hazardous_area_caution("none", "induction")
    ''
    """
    if not isinstance(area, str) or area in ("", "none"):
        return ""
    head = f"hazardous area ({area.replace('_', ' ')}): "
    if technology == "rewind":
        return head + "only a repairer working to IEC 60079-19 may rewind an Ex motor, or it loses its certification"
    if technology == "capacitor":
        return head + "the capacitor bank must be certified for it or stand outside it"
    if technology == "add_drive":
        return head + ("today's motor must be certified for converter supply with this drive (IEC 60079-14), or the "
                       "drive cannot be added, and the drive itself stands outside the area")
    return head + ("the new motor (and its drive) must be certified for it (ATEX/IECEx, or NEC 500/505) and for "
                   "converter supply where a drive feeds it" + ("" if certified else
                                                               ", and the catalogue's price is for standard equipment"))


def _held_beyond_cap(shaft: np.ndarray, shaft_eval: np.ndarray) -> np.ndarray | None:
    """Input scale beyond a model's load cap: shaft / cap where the load exceeds the cap, else 1 (None
    when it never does).

    A machine model evaluated at its cap (``shaft_eval = min(shaft, cap)``) gives the input of the capped
    load; multiplied by this, the input of the actual load at the cap's efficiency (losses scale with
    it), so input = shaft + losses still holds and the efficiency never passes the cap's.
    """
    over = shaft > shaft_eval
    if not over.any():
        return None
    return np.where(over, shaft / np.where(shaft_eval > 0.0, shaft_eval, 1.0), 1.0)


def _line_start_pm(arr, load: _Load, option: Mapping) -> _Point:
    eff = class_efficiency_frac(arr, option["efficiency_class"])
    sync = arr["sync_rpm"][:, None]
    shaft, speed = _coupled(arr, load, None, option["speed_remedy"], fixed_speed_rpm=sync)
    rated = arr["rated_p_kw"][:, None]
    flags: list[tuple[int, str]] = []
    over = np.flatnonzero((shaft > OVERLOAD_FLAG_FRAC * rated + 1e-9).any(axis=1))
    for i in over:
        flags.append((int(i), _OVERLOAD_TEXT))
    shaft_eval = np.minimum(shaft, 1.2 * rated)
    pt = synchronous.lspm_operating_point(shaft_eval, arr["rated_p_kw"], eff, arr["poles"], arr["f_hz"])
    run = load.running
    scale = _held_beyond_cap(shaft, shaft_eval)
    p_in = pt.p_in_kw if scale is None else pt.p_in_kw * scale
    p = np.where(run, p_in, 0.0)
    inertia, start_torque = (np.array([START_DUTY_SCREEN.get(d, START_DUTY_SCREEN["normal"])[k] for d in arr["start_duty"]])
                             for k in (0, 1))
    screen = synchronous.lspm_starting_screen(inertia, start_torque, screen_starts_per_hour(arr), SCREEN_VOLTAGE_DIP_FRAC)
    given = np.isfinite(np.asarray(arr.get("starts_per_hour", np.full(len(rated), np.nan)), dtype=float))
    for i in np.flatnonzero(np.asarray(screen.status) != "ok"):
        assumed = ("; the starts are assumed (give starts_per_hour)" if np.asarray(screen.frequent_starts)[i] and not given[i]
                   else "")
        flags.append((int(i), f"line-start screen: {screen.status[i]} ({screen.reasons[i]}{assumed})"))
    loss = pt.p_in_kw - shaft_eval if scale is None else p_in - shaft
    return _Point(p, np.where(run, pt.q_kvar, 0.0), shaft, np.where(run, speed, 0.0),
                  np.where(run, loss, 0.0), _zeros(p.shape), _zeros(p.shape), flags)


def screen_starts_per_hour(arr) -> np.ndarray:
    """Starts per hour of each asset for the line-start screen [1/h]: the register's ``starts_per_hour``, else
    :data:`ON_OFF_SCREEN_STARTS_PER_HOUR` for an on/off motor and :data:`SCREEN_STARTS_PER_HOUR` for the others.

    >>> screen_starts_per_hour({"rated_p_kw": np.ones(3), "starts_per_hour": np.array([np.nan, np.nan, 1.0]),
    ...                         "on_off": np.array([False, True, True])}).tolist()
    [2.0, 10.0, 1.0]
    """
    n = len(arr["rated_p_kw"])
    given = np.asarray(arr.get("starts_per_hour", np.full(n, np.nan)), dtype=float)
    on_off = np.asarray(arr.get("on_off", np.zeros(n, dtype=bool)), dtype=bool)
    return np.where(np.isfinite(given), given, np.where(on_off, ON_OFF_SCREEN_STARTS_PER_HOUR, SCREEN_STARTS_PER_HOUR))


def _synchronous_on_drive(arr, load: _Load, option: Mapping, kind: str) -> _Point:
    eff = class_efficiency_frac(arr, option["efficiency_class"])
    shaft, speed_frac = _speed_controlled(arr, load)
    safe = np.where(speed_frac > 0.05, speed_frac, 0.05)
    torque = np.where(load.running, shaft / arr["rated_p_kw"][:, None] / safe, 0.0)
    front_end = _front_end(option)
    dpf, thd_i = drives.FRONT_END_DEFAULTS[front_end]
    pt = synchronous.drive_fed_synchronous_operating_point(np.clip(speed_frac, 0.0, 1.0), np.clip(torque, 0.0, 1.5),
                                                           arr["rated_p_kw"], eff, kind, dpf=dpf, thd_i_frac=thd_i)
    run = load.running
    shaft_out = np.where(run, np.asarray(pt.p_shaft_kw, dtype=float), 0.0)
    motor_loss = (np.asarray(pt.motor_copper_loss_kw) + np.asarray(pt.motor_iron_loss_kw)
                  + np.asarray(pt.motor_friction_loss_kw) + np.asarray(pt.motor_stray_loss_kw))
    p_in, q, loss_drive = _with_front_end_losses(np.asarray(pt.p_in_kw, dtype=float), np.asarray(pt.q_kvar, dtype=float),
                                                 np.asarray(pt.drive_loss_kw, dtype=float), front_end)
    return _Point(np.where(run, p_in, 0.0), np.where(run, q, 0.0), shaft_out,
                  np.where(run, speed_frac * arr["sync_rpm"][:, None], 0.0), np.where(run, motor_loss, 0.0),
                  np.where(run, loss_drive, 0.0), _zeros(shaft.shape))


def _added_drive(arr, existing, load: _Load, option: Mapping | None = None) -> _Point:
    shaft, speed_frac = _speed_controlled(arr, load)
    return _induction_on_drive(arr, existing, shaft, speed_frac, load.running, _front_end(option))


#: Caution on a wound-field machine run at a setpoint of its own (power factor or kVAr) rather than following the site.
WFSM_SETPOINT_TEXT = ("runs at a reactive setpoint of its own, whatever the site needs: where the site needs less, "
                      "its meter runs leading (export of kVAr); check the utility's rules on leading power factor "
                      "(a tariff without a leading clause prices none of it), or set it to follow the site")


def _wound_field(arr, load: _Load, option: Mapping, site_other=None) -> _Point:
    """A wound-field synchronous motor replacing today's machine; site_other = (p_kw, q_kvar) without it."""
    rated = arr["rated_p_kw"]
    eff = 1.0 - WFSM_LOSS_RATIO_TO_INDUCTION * (1.0 - np.maximum(arr["eff_frac"], class_efficiency_frac(arr, "IE3")))
    design_pf = float(option["wfsm_power_factor"]) if np.isfinite(option["wfsm_power_factor"]) else 0.9
    params = synchronous.wfsm_parameters_from_rating(rated, arr["v_v"], rated_efficiency_frac=eff,
                                                     rated_power_factor=design_pf, rated_leading=True)
    sync = arr["sync_rpm"][:, None]
    shaft, speed = _coupled(arr, load, None, option["speed_remedy"], fixed_speed_rpm=sync)
    shaft_eval = np.minimum(shaft, 1.1 * rated[:, None])
    mode = option["wfsm_mode"]
    kwargs = {}
    if mode == "follow_site" and site_other is not None:
        kwargs = {"mode": "follow_site", "site_p_kw_other": site_other[0], "site_q_kvar_other": site_other[1],
                  "site_target_power_factor": float(option["site_target_power_factor"])}
    elif mode == "fixed_kvar":
        kwargs = {"mode": "kvar", "q_setpoint_kvar": float(option["wfsm_q_kvar"])}
    else:
        kwargs = {"mode": "power_factor", "power_factor_setpoint": design_pf, "setpoint_leading": True}
    pt = synchronous.wfsm_operating_point(shaft_eval, **params, **kwargs, detail=False)
    run = load.running
    flags: list[tuple[int, str]] = []
    for name, text in (("limited_by_field_current", "field-current ceiling"), ("limited_by_stator_current", "stator-current rating"),
                       ("limited_by_load_angle", "load-angle limit")):
        hit = np.asarray(getattr(pt, name), dtype=bool) & run
        share = hit.sum(axis=1) / np.maximum(run.sum(axis=1), 1)
        for i in np.flatnonzero(share > 0.0005):
            flags.append((int(i), f"reactive output held back by the {text} in {100 * share[i]:.1f} % of running intervals"))
    if mode == "follow_site" and site_other is None:
        for i in range(len(rated)):
            flags.append((i, "no interval data: runs at its power-factor setpoint instead of following the site"))
    if mode != "follow_site":  # a setpoint of its own: the site may be driven leading
        for i in range(len(rated)):
            flags.append((i, WFSM_SETPOINT_TEXT))
    for i in np.flatnonzero((shaft > OVERLOAD_FLAG_FRAC * rated[:, None] + 1e-9).any(axis=1)):
        flags.append((int(i), _OVERLOAD_TEXT))
    loss_exc = np.add(pt.field_copper_loss_kw, pt.exciter_loss_kw)
    scale = _held_beyond_cap(shaft, shaft_eval)
    p_in = pt.p_in_kw
    if scale is None:
        loss_motor = np.subtract(p_in, shaft_eval)
    else:  # beyond the evaluation cap the input follows the load at the cap's efficiency
        p_in = p_in * scale
        loss_exc *= scale
        loss_motor = np.subtract(p_in, shaft)
    loss_motor -= loss_exc
    stopped = ~run
    # 0 where the machine stands still, as numpy.where(run, value, 0) would give; in place where the value
    # is this call's own array
    p_in, q, loss_motor, loss_exc = (_zero_where(v, stopped) for v in (p_in, pt.q_kvar, loss_motor, loss_exc))
    return _Point(p_in, q, shaft, np.where(run, speed, 0.0), loss_motor, _zeros(shaft.shape), loss_exc, flags)


def _zero_where(values, stopped: np.ndarray) -> np.ndarray:
    """``numpy.where(~stopped, values, 0.0)``, written into ``values`` itself when it is a plain writable array."""
    values = np.asarray(values)
    if values.dtype != np.float64 or not values.flags.writeable or values.shape != stopped.shape or 0 in values.strides:
        return np.where(stopped, 0.0, values)
    np.copyto(values, 0.0, where=stopped)
    return values


def capacitor_size_kvar(existing: induction.InductionParams, target_power_factor) -> np.ndarray:
    """Size a motor-terminal capacitor: what full load needs to reach the target, at most 90 % of no-load kVAr.

    Notes
    -----
    Q_c = min(P_in,r (tan phi_r - tan phi_target), 0.9 Q_0), with Q_0 the no-load magnetising kVAr: a larger
    capacitor switched with the motor can self-excite it after disconnection (common practice).
    """
    p_in = existing.rated_p_kw / existing.rated_efficiency_frac
    tan_r = np.tan(np.arccos(existing.rated_power_factor))
    tan_t = np.tan(np.arccos(np.asarray(target_power_factor, dtype=float)))
    need = np.maximum(p_in * (tan_r - tan_t), 0.0)
    return np.minimum(need, CAPACITOR_MAX_NO_LOAD_SHARE * existing.q_constant_kvar)


@numba.njit(nogil=True, cache=True)
def _capacitor_sums(p0, q0, rows, q_cap, lag, lead):  # pragma: no cover - compiled
    """Sums over the steps of :func:`capacitor_rows_kvar`'s rows ``rows`` (banks ``q_cap``), lagging into ``lag`` and
    leading into ``lead`` [kVAr x steps]: the values of numpy's ``np.maximum(q, 0).sum(axis=1)`` and
    ``np.maximum(-q, 0)``'s, summed in step order (so not always the same last bits as numpy's pairwise sums);
    today's rows hold no NaN (a NaN step would be left out here, not carried)."""
    for k in range(len(rows)):
        i = rows[k]
        c = q_cap[k]
        a = 0.0
        b = 0.0
        for t in range(p0.shape[1]):
            if p0[i, t] != 0.0:
                q = q0[i, t] - c
                if q > 0.0:
                    a += q
                elif q < 0.0:
                    b -= q
        lag[k] = a
        lead[k] = b


def capacitor_rows_kvar(p0_kw: np.ndarray, q0_kvar: np.ndarray, q_cap_kvar) -> np.ndarray:
    """Per-interval kVAr of a motor with a terminal capacitor, from today's rows of the same motor.

    Parameters
    ----------
    p0_kw, q0_kvar : numpy.ndarray, shape (n_assets, n_steps)
        Today's motor at its supply: kW and kVAr per interval.
    q_cap_kvar : numpy.ndarray, shape (n_assets,)
        The capacitor's kVAr (:func:`capacitor_size_kvar`).

    Returns
    -------
    numpy.ndarray, shape (n_assets, n_steps)
        q0 - Q_c while the motor draws power (p0 != 0), 0 while it is stopped.

    Notes
    -----
    The capacitor is switched with the motor and changes neither its kW nor its speed (its own losses, a
    fraction of a watt per kVAr for a dry film unit, common practice from memory, are left out), so the
    option's kW is today's, row for row, and only its kVAr moves. Derived from today's rows, the option's
    rows need no model evaluation of their own and are the same bits wherever they are computed (a site's
    run, a recomputation, a curve book).

    References
    ----------
    NEMA MG 1, Part 14, guidance on power-factor correction capacitors switched with the motor (from memory);
    docs/models.md, step 3.
    """
    q_cap = np.asarray(q_cap_kvar, dtype=float)[:, None]
    return np.where(p0_kw != 0.0, q0_kvar - q_cap, 0.0)


def _evaluate(option: Mapping, arr, existing, load: _Load, site_other=None) -> _Point:
    """An option's operating point on a group's load: :func:`_on_off` where some assets are switched on and
    off, else :func:`_evaluate_running` (every column's load run throughout its hours)."""
    on_off = arr.get("on_off")
    if on_off is not None and np.asarray(on_off, dtype=bool).any():
        return _on_off(option, arr, existing, load, site_other)
    return _evaluate_running(option, arr, existing, load, site_other)


def _on_off(option: Mapping, arr, existing, load: _Load, site_other=None) -> _Point:
    """An option on a group whose on/off assets run at their running load for part of each column's hours.

    An on/off asset (``arr["on_off"]``) with a running load ``load.on_kw`` runs at P_on for the share
    d = P / P_on of an interval whose mean shaft load is P (P > P_on: the interval is taken as running
    throughout at its mean, d = 1); a load state (no ``on_kw``) runs at its own load, d = 1. The option is
    evaluated at the load it runs at; turned faster by the option, the asset draws its running law's power,
    P_on r^k (``rise_exponent`` k: 3 for a centrifugal load, 1 for a constant-torque one), and moves its amount
    in 1/r of the time. The interval's means are the running values times d / r, with r = (P_shaft / P_on)^(1/k)
    from the option's running shaft power: its kW, kVAr, shaft power and losses; its speed is the running
    speed. Other assets of the group are evaluated as they are (d = r = 1).

    So the kVAr of a motor running a quarter of an hour at 80 % load is a quarter of its kVAr at 80 %, not its
    kVAr at 20 % (most of a motor's kVAr is its magnetising current, drawn at any load while it runs), and a
    terminal capacitor switched with it corrects a quarter of its kVAr.

    References
    ----------
    docs/derivations/loads-speed-coupling.md, "A pump switched on and off" and "An on/off motor's interval".
    """
    on = np.asarray(arr["on_off"], dtype=bool)[:, None]
    p = load.p_ref_kw
    running_at = p
    if load.on_kw is not None:
        running_at = np.where(on & (load.on_kw > p) & load.running, load.on_kw, p)
    run_load = _Load(running_at, None, load.running, load.weight_h, load.p_design_kw,
                     existing=existing if load.existing is None else load.existing)
    if load.on_kw is None and load.n_ref_known is not None:
        run_load.n_ref_known = load.n_ref_known  # the same loads: today's speed already known
    share = np.where(running_at > 0.0, p / np.where(running_at > 0.0, running_at, 1.0), 1.0)
    driven = None
    if option["technology"] in DRIVE_TECHNOLOGIES:  # a drive may run the load at the inflow instead
        driven = _on_off_on_a_drive(arr, run_load, on, share)
        if driven is not None:
            share = driven[1]
            driven = driven[0]
    pt = _evaluate_running(option, arr, existing, run_load, site_other)
    exponent = np.asarray(arr["rise_exponent"], dtype=float)[:, None]

    def scaled(part: _Point, rows) -> None:
        shaft = part.shaft_kw
        on_rows, at, k = on[rows], running_at[rows], exponent[rows]
        # the running time of the option against today's: 1/r, r^k = P_shaft / P_on (not where a drive sets the flow)
        ok = on_rows & (shaft > 0.0) & (at > 0.0) & (k > 0.0)
        if driven is not None:
            ok = ok & ~driven[rows]
        time_frac = np.where(ok, np.power(np.where(ok, at / np.where(ok, shaft, 1.0), 1.0),
                                          1.0 / np.where(k > 0.0, k, 1.0)), 1.0)
        factor = np.where(on_rows, share[rows] * time_frac, 1.0)
        for name in ("p_kw", "q_kvar", "shaft_kw", "loss_motor_kw", "loss_drive_kw", "loss_excitation_kw"):
            value = getattr(part, name)
            if value is not None:
                setattr(part, name, value * factor)  # (not in place: a value may be the load's own array)

    if isinstance(pt, _Parts):
        for rows, part in pt.parts:
            scaled(part, rows)
    else:
        scaled(pt, slice(None))
    if driven is not None:
        pt.flags.extend((int(i), ON_OFF_DRIVE_TEXT) for i in np.flatnonzero(driven.any(axis=1)))
    return pt


def _on_off_on_a_drive(arr, run_load: _Load, on: np.ndarray, share: np.ndarray):
    """A drive on centrifugal loads switched on and off: where it takes less shaft energy, the drive runs the load
    at the interval's mean flow instead of cycling it at full speed.

    An interval whose mean flow is the share d of the flow while the load runs today (its running load taken as
    its design point on the system curve) can be met continuously at flow d, at the speed and shaft power of a
    speed-controlled pump on the system curve with the asset's static head (:func:`models.loads.speed_frac_for_flow`,
    :func:`models.loads.speed_controlled_shaft_frac`, which take the pump's efficiency off its best point into
    account). Below the flow q_min at :data:`MIN_DRIVE_SPEED_FRAC` the drive cycles the load at q_min for d / q_min
    of the interval. The drive does so where that shaft energy, (d / q) f(q) with q = max(d, q_min), is below
    the d of cycling at full speed (a static-head system may gain nothing): the choice weighs shaft energy only (the
    drive is in circuit either way; the motor's and the drive's part-speed losses, a few per cent, may tip a case
    near the break-even the other way). Sets ``run_load.controlled`` (the shaft
    power while running and the speed fraction) and returns (where the drive sets the flow (n, m), the share of each
    interval it runs), or None where it never does.

    References
    ----------
    I. J. Karassik et al., *Pump Handbook*, 4th ed. McGraw-Hill, 2008, sec. 2.1 and ch. 13 (system curves,
    speed control); docs/derivations/loads-speed-coupling.md, "A drive on a pump switched on and off".
    """
    rows = on[:, 0] & (np.asarray(arr["exponent"]) == 3.0) & ~np.asarray(arr["has_drive"], dtype=bool)
    rows &= ~np.asarray(arr["throttled"], dtype=bool)
    if not rows.any():
        return None
    h_s = np.clip(np.nan_to_num(np.asarray(arr["static_head"], dtype=float)), 0.0, 1.0)[:, None]
    h0 = loads.DEFAULT_SHUTOFF_HEAD_PU
    q_min = np.sqrt(np.maximum(MIN_DRIVE_SPEED_FRAC ** 2 * h0 - h_s, 0.0) / (h0 - h_s))
    d = np.clip(share, 0.0, 1.0)
    q = np.maximum(d, q_min)
    frac = np.asarray(loads.speed_controlled_shaft_frac(q, h_s, h0), dtype=float)
    speed = np.asarray(loads.speed_frac_for_flow(q, h_s, h0), dtype=float)
    run_share = np.where(q > 0.0, d / np.where(q > 0.0, q, 1.0), 0.0)
    driven = rows[:, None] & run_load.running & (run_share * frac < d)
    if not driven.any():
        return None
    shaft, speed_frac = _speed_controlled(arr, run_load)  # cycling at today's speed
    run_load.controlled = (np.where(driven, run_load.p_ref_kw * frac, shaft), np.where(driven, speed_frac * speed, speed_frac))
    return driven, np.where(driven, run_share, share)


def _evaluate_running(option: Mapping, arr, existing, load: _Load, site_other=None) -> _Point:
    """An option's operating point with every column's load run throughout its hours."""
    tech = option["technology"]
    if tech == "existing":
        return _today(arr, existing, load)
    if tech == "rewind":
        return _today(arr, existing_motor(arr, extra_rewinds=1), load)
    if tech == "induction":
        return _new_induction(arr, existing, load, option)
    if tech == "line_start_pm":
        return _line_start_pm(arr, load, option)
    if tech in ("pm_drive", "reluctance_drive"):
        return _synchronous_on_drive(arr, load, option, "pm" if tech == "pm_drive" else "synrm")
    if tech == "add_drive":
        return _added_drive(arr, existing, load, option)
    if tech == "wound_field":
        return _wound_field(arr, load, option, site_other)
    if tech == "capacitor":
        base = _today(arr, existing, load)
        q_cap = capacitor_size_kvar(existing, option["target_power_factor"])[:, None]
        for rows, part in (base.parts if isinstance(base, _Parts) else [(slice(None), base)]):
            part.q_kvar = np.where(load.running[rows], part.q_kvar - q_cap[rows], 0.0)
        return base
    raise ValueError(f"unknown technology '{tech}'")


# ---------------------------------------------------------------------------------------------------
# Orchestration over a case: by site, in blocks of assets
# ---------------------------------------------------------------------------------------------------
#: Largest block of assets the machine models evaluate together, in asset-steps (n_assets x n_steps).
#: The models' temporaries are each about 8 bytes x this (4 MiB at the default), which bounds memory
#: whatever the fleet size; 59 assets per block on an hourly year. Blocks that fit the processor's cache
#: run faster: on a 534-asset site, 2**19 took 6.1 s against 9.4 s for 2**22 (bench, docs/scale.md).
CHUNK_ELEMENTS = 2**19
#: Asset-steps per block when the block keeps its options as curve tables (:func:`site_blocks` with
#: ``curves``): per interval it holds today's power, the reference load and the grid's cells and positions
#: (about 60 bytes per asset-step with the models' temporaries) instead of every option's power, so
#: blocks can be 16 times larger, 957 assets on an hourly year (the models on the grids run on larger
#: batches, and a site of up to that size needs one pass): 2.6-2.9 s against 3.6-3.9 s for the machines
#: of four 460-534-asset sites with blocks of 2**19 (single thread, docs/performance.md).
CURVE_CHUNK_ELEMENTS = 2**23
#: Keep every option's per-interval power in memory when p_kw and q_kvar together take at most this many
#: bytes (2 GiB: a 1,000-asset fleet of 11 options on an hourly year takes 1.5 GiB). Above it, today's
#: motors are kept per interval and the other options are recomputed site by site when asked for
#: (:class:`SiteIntervalStore`).
DENSE_INTERVAL_BUDGET_BYTES = 2 * 2**30
#: Above the dense budget, today's per-interval power (p_kw and q_kvar, 16 bytes per asset-step) is held
#: in memory up to this many bytes (4 GiB: about 30,000 assets on an hourly year, 7,600 on a 15-minute
#: one); beyond it, in a temporary file mapped into memory, whose pages the system may write out and
#: drop when memory runs short, so a larger fleet costs disk (the same size) rather than memory.
TODAY_IN_MEMORY_BUDGET_BYTES = 4 * 2**30
#: While a run reads the plan's rows again (its check of reactive projects, then its bills), rows of
#: other options recomputed for a fleet above the dense budget are kept up to this many bytes and read
#: again instead of recomputed (:func:`kept_rows`; 1 GiB: the 6,000 chosen rows of a 10,000-asset fleet
#: on an hourly year take 0.8 GiB).
KEPT_ROWS_BUDGET_BYTES = 2**30
#: A fleet above the dense budget keeps the curve books of its sites' blocks (each option's tables and the
#: rows of their own, :class:`models.tabulation.CurveBook`) up to this many bytes, site by site in the order
#: they finish: any row of a site whose books are all kept is then read through them (an interpolation,
#: the same bits) instead of recomputed. 2.5 GiB: the books of a 10,000-asset fleet of 11 options on an
#: hourly year take about 2.1 GiB (220 KiB per asset, docs/performance.md); a larger fleet keeps as many
#: whole sites as fit and recomputes the others (a site whose blocks do not all fit keeps none).
KEPT_BOOKS_BUDGET_BYTES = 5 * 2**29
#: Sites worked at once by one process (:func:`models.scenario.physics`): one per core, at most two, as
#: on the 2-core reference machine (each thread holds one site's blocks; common practice for a laptop).
PHYSICS_THREADS = max(1, min(2, os.cpu_count() or 1))


@dataclass(frozen=True)
class MemoryBudgets:
    """What a run keeps in memory, and how large its tabulated blocks are.

    The defaults (:func:`default_budgets`) are sized for a machine of 24 GiB; a run on a smaller one is
    given budgets that fit the memory it may use (:func:`models.estimate.budgets_within`). Smaller budgets
    keep less and recompute more, with the same numbers: a row recomputed is the first pass's, bit for bit.

    Attributes
    ----------
    dense_bytes : int
        Every option's per-interval power is kept while it fits in this many bytes
        (:data:`DENSE_INTERVAL_BUDGET_BYTES`).
    today_in_memory_bytes : int
        Today's per-interval power above it lives in a mapped temporary file
        (:data:`TODAY_IN_MEMORY_BUDGET_BYTES`).
    kept_rows_bytes : int
        Rows recomputed for the plan are kept up to this many bytes (:data:`KEPT_ROWS_BUDGET_BYTES`).
    kept_books_bytes : int
        The sites' curve books are kept up to this many bytes (:data:`KEPT_BOOKS_BUDGET_BYTES`).
    curve_chunk_elements : int
        Asset-steps of a block that keeps its options as curve tables (:data:`CURVE_CHUNK_ELEMENTS`; not
        fitted to a memory limit: smaller blocks did not lower the measured peak).
    """

    dense_bytes: int
    today_in_memory_bytes: int
    kept_rows_bytes: int
    kept_books_bytes: int
    curve_chunk_elements: int


def default_budgets() -> MemoryBudgets:
    """The module's budgets as they are now (:data:`DENSE_INTERVAL_BUDGET_BYTES` and the rest)."""
    return MemoryBudgets(int(DENSE_INTERVAL_BUDGET_BYTES), int(TODAY_IN_MEMORY_BUDGET_BYTES),
                         int(KEPT_ROWS_BUDGET_BYTES), int(KEPT_BOOKS_BUDGET_BYTES), int(CURVE_CHUNK_ELEMENTS))


#: Tabulated machine models (:mod:`models.tabulation`): grid nodes per asset. Each option's curve is
#: evaluated at 2 x this - 1 loads per asset instead of once per interval.
TABLE_NODES = 129
#: Largest interpolation error a tabulated row may carry, as a fraction of the asset's rated input power
#: (kW and kVAr quantities) or of its synchronous speed (speed); a row above it is evaluated per interval.
TABLE_TOLERANCE_FRAC = 1e-5
#: Tabulate only when an asset has at least this many intervals (below, evaluating them is as cheap).
TABLE_MIN_STEPS = 8 * TABLE_NODES
#: Grid nodes of the second, finer grid tried for a row whose curve bends too sharply for the first (a
#: kink's error falls with the cell width, a smooth curve's with its square); used for profiles of at
#: least 8 x this many intervals; rows that still fail are evaluated per interval.
FINE_TABLE_NODES = 4 * (TABLE_NODES - 1) + 1
#: A row that fails even the finer grid is read from it in its good cells and evaluated interval by interval
#: in the failing ones (a kink inside them) when at most this share of its running intervals falls there;
#: above it, every interval of the row is evaluated (it saves nothing to interpolate the rest).
MAX_EXACT_SHARE = 0.5
#: Tabulate the machine models where it pays (False: evaluate every interval, the reference path).
TABULATE = True


def case_index(case) -> pd.DatetimeIndex:
    """Return the analysis index of a case (:func:`models.profiles.analysis_index` over the profiles in use)."""
    used = set(case.assets["profile_id"].dropna()) | set(case.sites["base_profile_id"].dropna())
    return analysis_index(case.profiles, case.settings.time_zone, used)


def site_partition(case) -> list[tuple[str, np.ndarray]]:
    """Return the sites in order of first appearance in the asset register, each with its assets' positions.

    Each site's meter and tariff are independent of the others', so the analysis runs site by site; the
    positions are in case order, so results merge back into the asset register's order.
    """
    site_ids = case.assets["site_id"].to_numpy(dtype=object)
    order: dict[str, list[int]] = {}
    for i, s in enumerate(site_ids):
        order.setdefault(s, []).append(i)
    return [(s, np.asarray(rows, dtype=int)) for s, rows in order.items()]


def asset_blocks(n_assets: int, n_steps: int, chunk_assets: int | None = None) -> list[np.ndarray]:
    """Split positions 0..n_assets-1 into consecutive blocks of at most ``chunk_assets`` assets.

    Parameters
    ----------
    n_assets, n_steps : int
        Assets of one site and steps of the analysis year.
    chunk_assets : int, optional
        Block size [assets], >= 1; default ``CHUNK_ELEMENTS // n_steps`` (at least 1).
    """
    size = int(chunk_assets) if chunk_assets is not None else max(1, CHUNK_ELEMENTS // max(n_steps, 1))
    if size < 1:
        raise ValueError("chunk_assets must be >= 1")
    return [np.arange(start, min(start + size, n_assets)) for start in range(0, n_assets, size)]


def site_case(case, site_id: str):
    """Return the case cut down to one site: its assets, site row, banks, tariff and the profiles they use."""
    from dataclasses import replace

    assets = case.assets[case.assets["site_id"] == site_id].reset_index(drop=True)
    sites = case.sites[case.sites["site_id"] == site_id].reset_index(drop=True)
    used = set(assets["profile_id"].dropna()) | set(sites["base_profile_id"].dropna())
    info = case.profile_info
    if isinstance(info, pd.DataFrame) and "profile_id" in info.columns:
        info = info[info["profile_id"].isin(used)].reset_index(drop=True)
    defaults = case.defaults
    if isinstance(defaults, pd.DataFrame) and "asset_id" in defaults.columns:
        defaults = defaults[defaults["asset_id"].isin(set(assets["asset_id"]))].reset_index(drop=True)
    tariff_files = set(sites["tariff_file"].dropna()) if "tariff_file" in sites else set()
    return replace(case, assets=assets, sites=sites,
                   capacitors=case.capacitors[case.capacitors["site_id"] == site_id].reset_index(drop=True),
                   profiles={k: v for k, v in case.profiles.items() if k in used}, profile_info=info, defaults=defaults,
                   tariffs={k: v for k, v in case.tariffs.items() if k in tariff_files})


def _site_base(case, site_id: str, index: pd.DatetimeIndex) -> tuple[np.ndarray, np.ndarray, float]:
    """A site's meter without its motors: base load (n_steps,) [kW], its kVAr (n_steps,) and the fixed
    banks' kVAr [kVAr]."""
    from models.profiles import conform

    row = case.sites.set_index("site_id").loc[site_id]
    if row["base_profile_id"] is not None and row["base_profile_id"] in case.profiles:
        base_p = conform(case.profiles[row["base_profile_id"]], index)[0]
    else:
        base_p = np.full(len(index), float(row["base_p_kw"]))
    base_q = base_p * np.tan(np.arccos(float(row["base_power_factor"])))
    caps = case.capacitors
    fixed = caps[(caps["site_id"] == site_id) & (caps["control"] == "fixed")]["rated_q_kvar"].sum()
    return base_p, base_q, float(fixed)


def _site_other(base: tuple[np.ndarray, np.ndarray, float], total_p: np.ndarray, total_q: np.ndarray, own_p: np.ndarray,
                own_q: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Site meter without each of some assets of one site (today's fleet, base load, fixed banks) [kW], [kVAr].

    ``base`` is :func:`_site_base` of the site; ``total_p``, ``total_q`` are the site's today's totals over
    all its assets (n_steps,); ``own_p``, ``own_q`` each asset's own today's power (n, n_steps):
    p = (total - own) + base, q = ((total - own) + base kVAr) - fixed banks, in that order.
    """
    p_other = np.subtract(total_p[None, :], own_p)
    p_other += base[0]
    q_other = np.subtract(total_q[None, :], own_q)
    q_other += base[1]
    q_other -= base[2]
    return p_other, q_other


@dataclass(frozen=True)
class _TodayOfBlock:
    """Today's motors of a block as a first pass computed them: per-interval power and yearly values."""

    p_kw: np.ndarray
    q_kvar: np.ndarray
    energy_kwh: np.ndarray
    shaft_energy_kwh: np.ndarray
    losses_kwh: np.ndarray
    lagging_kvarh: np.ndarray
    leading_kvarh: np.ndarray
    mean_speed_rpm: np.ndarray
    running_h: np.ndarray
    flags: list

    @classmethod
    def of(cls, part: OperatingResult, p_kw: np.ndarray, q_kvar: np.ndarray) -> "_TodayOfBlock":
        """From a today-only block result, with its per-interval rows kept elsewhere (``p_kw``, ``q_kvar``)."""
        today_id = part.option_ids[0]
        flags = [r._asdict() for r in part.flags.itertuples(index=False) if r.option_id == today_id]
        return cls(p_kw, q_kvar, part.energy_kwh[:, 0].copy(), part.shaft_energy_kwh[:, 0].copy(),
                   part.losses_kwh[:, 0].copy(), part.lagging_kvarh[:, 0].copy(), part.leading_kvarh[:, 0].copy(),
                   part.mean_speed_rpm[:, 0].copy(), part.running_h.copy(), flags)


def _grid_load(existing: induction.InductionParams, load: _Load, grid: tabulation.Grid) -> _Load:
    """The reference load of a group of assets at their grid's loads (every column a running state)."""
    p = grid.p_grid_kw
    n_ref = np.asarray(induction.induction_speed_rpm(existing, p), dtype=float)
    return _Load(p, n_ref, p > 0.0, np.ones(p.shape), load.p_design_kw, on_kw=load.on_kw)


def _point_flags(pt) -> list[tuple[int, str]]:
    """A point's flags, (row of the group, text), parts' own flags included."""
    if not isinstance(pt, _Parts):
        return list(pt.flags)
    out = list(pt.flags)
    for part_rows, part in pt.parts:
        out.extend((int(part_rows[i]), text) for i, text in part.flags)
    return out


def _take_point(pt: _Point, rows: np.ndarray) -> _Point:
    """The rows ``rows`` (unique, sorted) of a point on a grid, its flags renumbered."""
    at = {int(r): k for k, r in enumerate(rows)}
    return _Point(*(None if v is None else np.broadcast_to(v, pt.p_kw.shape)[rows]
                    for v in (getattr(pt, name) for name in _POINT_ARRAYS)),
                  flags=[(at[i], text) for i, text in pt.flags if i in at])


def _cells_hold(pt: _Point, arr) -> np.ndarray:
    """Cells (bool, (n, n_nodes - 1)) whose every quantity interpolates within :data:`TABLE_TOLERANCE_FRAC`
    (:func:`_tabulation_holds`, cell by cell: a row holds where all its cells do)."""
    tol_kw = (0.5 * TABLE_TOLERANCE_FRAC * arr["rated_p_kw"] / arr["eff_frac"])[:, None]
    ok = None
    for name in _POINT_ARRAYS:
        values = getattr(pt, name)
        if values is None:
            continue
        tol = 0.5 * TABLE_TOLERANCE_FRAC * arr["sync_rpm"][:, None] if name == "speed_rpm" else tol_kw
        holds = tabulation.cell_errors(np.broadcast_to(values, pt.p_kw.shape)) <= tol
        ok = holds if ok is None else ok & holds
    return ok


def _tabulation_holds(pt: _Point, arr) -> np.ndarray:
    """Rows (bool, (n,)) whose every quantity interpolates within :data:`TABLE_TOLERANCE_FRAC`.

    The measured error is at the cells' midpoints; a kink inside a cell can err up to twice that, so
    the midpoint error must stay within half the tolerance.
    """
    tol_kw = 0.5 * TABLE_TOLERANCE_FRAC * arr["rated_p_kw"] / arr["eff_frac"]
    ok = np.ones(len(tol_kw), dtype=bool)
    for name in ("p_kw", "q_kvar", "shaft_kw", "loss_motor_kw", "loss_drive_kw", "loss_excitation_kw"):
        values = getattr(pt, name)
        if values is not None:
            ok &= tabulation.midpoint_error(np.broadcast_to(values, pt.p_kw.shape)) <= tol_kw
    ok &= tabulation.midpoint_error(np.broadcast_to(pt.speed_rpm, pt.p_kw.shape)) <= 0.5 * TABLE_TOLERANCE_FRAC * arr["sync_rpm"]
    return ok


def _operate_block(case, index: pd.DatetimeIndex, rows: np.ndarray, site_totals=None,
                   only_today: bool = False, wanted=None, buffers: "_BlockBuffers | None" = None,
                   today: _TodayOfBlock | None = None, site_constants: "_SiteConstants | None" = None,
                   needed: dict | None = None, power_only: bool = False, curves: bool = False,
                   today_into: tuple[np.ndarray, np.ndarray] | None = None) -> OperatingResult:
    """Run the options on a block of assets of a one-site case.

    ``site_totals`` = (p_kw, q_kvar) of today's motors over the whole site (n_steps,) each; default the
    block's own totals (the block is the whole site). With ``only_today`` only today's motors run; with
    ``wanted`` (option positions) only those options run besides today's (each option is evaluated on
    its own, so the values are those of a full run; the others' per-interval rows and yearly values are
    left undefined). With ``buffers`` the per-interval arrays are views of those buffers (every element
    written by this call when every option runs).
    With ``today`` (a first pass's result for the same block) today's motors are not run again. With
    ``site_constants`` (:func:`_site_constants` of the same case) the per-asset numbers and today's
    calibrated motors are sliced from the site's instead of computed for the block. With ``needed``
    (option position -> bool per block asset, with ``wanted``) an option's per-interval values are
    written for those assets only (the others' rows of that option are left undefined); every model
    works element by element (no value depends on the other assets evaluated with it), so an option is
    evaluated on those assets only and the values written are those of a full run. With
    ``power_only`` only the per-interval ``p_kw`` and ``q_kvar`` are computed (yearly values and flags
    are left at zero or empty), for callers that read nothing else. With ``curves`` the options other
    than today's are kept in the result's ``curves`` book, as tables where tabulated and as rows of its
    own elsewhere, and an option that does not apply repeats today's row through the book; ``p_kw``
    and ``q_kvar`` then hold today's motors only, shape (1, n_assets, n_steps) (the values read through
    the book are those of a run without it). With ``curves`` and ``today_into`` ((n_assets, n_steps)
    float64 arrays, plain numpy) today's motors are written straight there: the result's ``p_kw`` and
    ``q_kvar`` are views of them.
    """
    from dataclasses import replace

    from models.options import applicability

    a = case.assets.iloc[rows].reset_index(drop=True)
    block = replace(case, assets=a)
    if site_constants is not None and site_constants.options is not None:
        options, option_rows = site_constants.options, site_constants.option_rows
    else:
        options = options_with_baseline(case.options)
        option_rows = _option_rows(options)
    interval_h = float((index[1] - index[0]).total_seconds() / 3600.0) if len(index) > 1 else 1.0
    year_h = len(index) * interval_h
    # class efficiencies are per asset: computed once per block (or site), sliced with the rest for each option
    existing_all = None
    if site_constants is not None:
        arr_all = _take(site_constants.arrays, rows)
        existing_all = _take_params(site_constants.existing, rows)
    else:
        arr_all = asset_arrays(a)
        if not only_today:
            arr_all = _with_class_efficiencies(arr_all, _catalogue_classes(options))
    n_a, n_o, n_t = len(a), len(options), len(index)
    applies, reason = applicability(options, a, case.settings.region, case.settings.purchase_date)
    applies[:, 0] = True
    reason[:, 0] = ""
    if site_constants is not None and site_constants.loads is not None:
        interval_rows, values, is_input, states, notes = _block_loads(site_constants.loads, rows, a["asset_id"])
    else:
        interval_rows, values, is_input, states, notes = asset_loads(block, index)
    groups = _load_groups(arr_all, existing_all, interval_rows, values, is_input, states, n_t, interval_h)
    idle = (_measured_below_no_load(groups, values, is_input, interval_h) + _throttled_below_zero_flow(groups)
            + _throttled_design_assumed(groups))
    del values
    # interval assets with long profiles: each option's curve on a grid of loads, interpolated per interval
    grids = {}
    if TABULATE and n_t >= TABLE_MIN_STEPS and len(interval_rows):
        _, _, arr, existing, load = groups[0]
        grid = tabulation.locate(load.p_ref_kw, load.running, interval_h, TABLE_NODES)
        grid_load = _grid_load(existing, load, grid)
        if not only_today:
            grid_load.controlled = _speed_controlled(arr, grid_load)
        grids["interval"] = (grid, grid_load)

    if curves and (wanted is not None or needed is not None):
        raise ValueError("curves keeps every option: it does not combine with wanted or needed")
    # with curves the arrays hold today's motors only: every other option goes to the book
    n_rows_o = 1 if only_today or curves else n_o
    if curves and today_into is not None:  # today's rows straight into the caller's arrays (no copy)
        p_kw, q_kvar = today_into[0][None], today_into[1][None]
    elif buffers is not None:
        # every element read later is written below (today's rows by today's motors; each option's rows by
        # the option or, where it does not apply, by today's values; with ``wanted``, the rows of the
        # options asked for), so reused memory needs no clearing
        p_kw, q_kvar = buffers.views(n_rows_o, n_a, n_t)
    else:
        # uninitialised memory: every element read later is written below (a zeroed array would cost a
        # page fault and a clearing per page on first touch, several times one pass)
        p_kw = np.empty((n_rows_o, n_a, n_t))
        q_kvar = np.empty((n_rows_o, n_a, n_t))
    book = tabulation.CurveBook(1 if only_today else n_o, n_a) if curves else None
    energy = np.zeros((n_a, n_o))
    shaft_energy = np.zeros((n_a, n_o))
    losses = np.zeros((n_a, n_o, len(LOSS_KINDS)))
    lag = np.zeros((n_a, n_o))
    lead = np.zeros((n_a, n_o))
    speed = np.zeros((n_a, n_o))
    running_h = np.zeros(n_a)
    cap_q = np.zeros((n_a, n_o))
    flags: list[dict] = [{"asset_id": r.asset_id, "option_id": "", "flag": r.note} for r in notes.itertuples(index=False)]
    flags += [{"asset_id": a["asset_id"].iloc[i], "option_id": "", "flag": text} for i, text in idle]
    site_base: dict = {}  # the site's meter without its motors, once a wound-field machine asks for it
    asset_ids = a["asset_id"].to_numpy(dtype=object)
    site_ids = a["site_id"].to_numpy(dtype=object)
    option_ids = options["option_id"].to_numpy(dtype=object)

    def store(o: int, kind: str, rows_: np.ndarray, sub: np.ndarray, pt, load: _Load) -> None:
        if isinstance(pt, _Parts):
            for part_rows_, part in pt.parts:
                store_part(o, kind, rows_, sub[part_rows_], part, load, part_rows_)
            for i, text in pt.flags:
                flags.append({"asset_id": asset_ids[rows_[sub][i]], "option_id": option_ids[o], "flag": text})
        else:
            store_part(o, kind, rows_, sub, pt, load)

    # (two closures, neither calling itself: a self-referencing closure is a reference cycle that would keep
    # this block's arrays alive until the garbage collector runs)
    def store_part(o: int, kind: str, rows_: np.ndarray, sub: np.ndarray, pt: _Point, load: _Load, part_rows=None) -> None:
        idx = rows_[sub]
        w = None
        if kind != "interval":
            w = load.weight_h if part_rows is None else load.weight_h[part_rows]
        if book is not None and o > 0:  # the option's own rows, kept by the book
            if kind == "interval":
                book.add_rows(o, idx, pt.p_kw, pt.q_kvar)
            else:
                shape = (len(idx), n_t)
                book.add_rows(o, idx, np.broadcast_to(((pt.p_kw * w).sum(axis=1) / year_h)[:, None], shape),
                              np.broadcast_to(((pt.q_kvar * w).sum(axis=1) / year_h)[:, None], shape))
        elif kind == "interval":
            at = _as_slice(idx)
            p_kw[o, at] = pt.p_kw
            q_kvar[o, at] = pt.q_kvar
        else:
            p_kw[o, idx] = ((pt.p_kw * w).sum(axis=1) / year_h)[:, None]
            q_kvar[o, idx] = ((pt.q_kvar * w).sum(axis=1) / year_h)[:, None]
        if power_only:
            return
        if kind == "interval":  # every interval weighs interval_h: sum, then scale
            energy[idx, o] = pt.p_kw.sum(axis=1) * interval_h
            shaft_energy[idx, o] = pt.shaft_kw.sum(axis=1) * interval_h
            for k, loss in enumerate((pt.loss_motor_kw, pt.loss_drive_kw, pt.loss_excitation_kw)):
                losses[idx, o, k] = 0.0 if loss is None else loss.sum(axis=1) * interval_h
            part = np.maximum(pt.q_kvar, 0.0)
            lag[idx, o] = part.sum(axis=1) * interval_h
            np.negative(pt.q_kvar, out=part)
            np.maximum(part, 0.0, out=part)
            lead[idx, o] = part.sum(axis=1) * interval_h
        else:
            energy[idx, o] = (pt.p_kw * w).sum(axis=1)
            shaft_energy[idx, o] = (pt.shaft_kw * w).sum(axis=1)
            for k, loss in enumerate((pt.loss_motor_kw, pt.loss_drive_kw, pt.loss_excitation_kw)):
                losses[idx, o, k] = 0.0 if loss is None else (loss * w).sum(axis=1)
            lag[idx, o] = (np.maximum(pt.q_kvar, 0.0) * w).sum(axis=1)
            lead[idx, o] = (np.maximum(-pt.q_kvar, 0.0) * w).sum(axis=1)
        run_w, run_h = load.weight_running()
        if part_rows is not None:
            run_w, run_h = run_w[part_rows], run_h[part_rows]
        speed[idx, o] = (pt.speed_rpm * run_w).sum(axis=1) / np.maximum(run_h, 1e-12)
        for i, text in pt.flags:
            flags.append({"asset_id": asset_ids[idx[i]], "option_id": option_ids[o], "flag": text})

    def store_tabulated(o: int, rows_: np.ndarray, sub: np.ndarray, ok: np.ndarray, pt: _Point,
                        grid: tabulation.Grid, at_grid: np.ndarray | None = None) -> None:
        """Store the rows ``sub[ok]`` of a group from the option's values on their grid ``pt`` (rows ``sub``,
        rows ``at_grid`` of the grid; default the same positions)."""
        at_grid = sub if at_grid is None else at_grid
        if needed is not None and o in needed:  # rows nobody will read are not interpolated
            keep = np.asarray(needed[o])[rows_[sub]]
            if not keep.all():
                if not (ok & keep).any():
                    return
                pt = _Point(*(None if v is None else np.broadcast_to(v, pt.p_kw.shape)[keep]
                              for v in (getattr(pt, name) for name in _POINT_ARRAYS)), flags=[])
                sub, ok, at_grid = sub[keep], ok[keep], at_grid[keep]
        good = sub[ok]
        idx = rows_[good]
        whole = bool(ok.all()) and _covers(at_grid, grid.cell.shape[0])
        sel = None if whole else at_grid[ok]

        def tables_of(values):
            values = np.broadcast_to(values, pt.p_kw.shape)
            return tabulation.tables(values if ok.all() else values[ok])

        p_tables, q_tables = tables_of(pt.p_kw), tables_of(pt.q_kvar)
        if book is not None and o > 0:  # read through the book: nothing written per interval
            book.add(o, idx, grid, at_grid[ok], p_tables, q_tables)
        else:  # straight into the option's rows (no temporary)
            tabulation.interpolate_pair(grid, *p_tables, *q_tables, out_a=p_kw[o], out_b=q_kvar[o], rows=at_grid[ok],
                                        out_rows=idx)
        if power_only:
            return
        energy[idx, o] = tabulation.weighted_sums(grid, *p_tables, rows=sel)
        lag[idx, o], lead[idx, o] = tabulation.signed_sums(grid, *q_tables, interval_h, rows=sel)
        shaft_energy[idx, o] = tabulation.weighted_sums(grid, *tables_of(pt.shaft_kw), rows=sel)
        for k, loss in enumerate((pt.loss_motor_kw, pt.loss_drive_kw, pt.loss_excitation_kw)):
            losses[idx, o, k] = 0.0 if loss is None else tabulation.weighted_sums(grid, *tables_of(loss), rows=sel)
        hours = grid.hours_h.sum(axis=1) if sel is None else grid.hours_h[sel].sum(axis=1)
        speed[idx, o] = tabulation.weighted_sums(grid, *tables_of(pt.speed_rpm), rows=sel) / np.maximum(hours, 1e-12)
        for i, text in _point_flags(pt):
            if ok[i]:
                flags.append({"asset_id": asset_ids[rows_[sub[i]]], "option_id": option_ids[o], "flag": text})

    def by_parts(o: int, option: Mapping, kind: str, rows_: np.ndarray, sub: np.ndarray, arr_s, existing_s,
                 load: _Load, follows_site: bool = False) -> None:
        """Evaluate an option per interval (or load state) on the rows ``sub`` of a group and store it, in
        parts of at most :data:`CHUNK_ELEMENTS` asset-steps (the models' temporaries stay bounded whatever
        the block's size; every model works element by element, so the values are those of one part).
        With ``follows_site`` each part gets the site meter without its own assets (wound-field machines).
        """
        step = max(1, CHUNK_ELEMENTS // max(load.p_ref_kw.shape[1], 1))
        for start in range(0, len(sub), step):
            sel = np.arange(start, min(start + step, len(sub)))
            whole = len(sel) == len(sub)
            sub_c = sub[sel]
            load_c = load.rows(sub_c)
            site_other = None
            if follows_site:
                idx = rows_[sub_c]
                if "base" not in site_base:
                    site_base["base"] = _site_base(case, str(site_ids[0]), index)
                site_other = _site_other(site_base["base"], site_totals[0], site_totals[1], p_kw[0, idx], q_kvar[0, idx])
            pt = _evaluate(option, arr_s if whole else _take(arr_s, sel),
                           existing_s if whole else _take_params(existing_s, sel), load_c, site_other)
            store(o, kind, rows_, sub_c, pt, load_c)

    def run(o: int, option: Mapping, kind: str, rows_: np.ndarray, sub: np.ndarray, arr_s, existing_s,
            load: _Load, follows_site: bool = False) -> None:
        """Evaluate an option on the rows ``sub`` of a group (on their grid where there is one) and store it.

        ``load`` is the whole group's: its per-interval rows are sliced only where they are evaluated."""
        tab = grids.get(kind)
        if tab is None or option["technology"] == "wound_field":  # a wound-field machine may follow the site
            by_parts(o, option, kind, rows_, sub, arr_s, existing_s, load, follows_site)
            return
        grid, grid_load = tab
        pt = _evaluate(option, arr_s, existing_s, grid_load.rows(sub))
        flat = _whole(pt)
        ok = _tabulation_holds(flat, arr_s)
        flat.flags = _point_flags(pt)
        if ok.any():
            store_tabulated(o, rows_, sub, ok, flat, grid)
        if ok.all():
            return
        # the curve bends too sharply for the grid: a finer grid for those rows, then every interval
        bad = np.flatnonzero(~ok)
        load_b, arr_b, existing_b = load.rows(sub[bad]), _take(arr_s, bad), _take_params(existing_s, bad)
        if load_b.p_ref_kw.shape[1] >= 8 * FINE_TABLE_NODES:
            # the coarse grid's placing refined (the same bits as placing the loads afresh, without cube roots)
            fine = tabulation.refine(grid, sub[bad], (FINE_TABLE_NODES - 1) // (TABLE_NODES - 1), interval_h)
            if fine is None:
                fine = tabulation.locate(load_b.p_ref_kw, load_b.running, interval_h, FINE_TABLE_NODES)
            fine_load = _grid_load(existing_b, load_b, fine)
            if grid_load.controlled is not None:
                fine_load.controlled = _speed_controlled(arr_b, fine_load)
            pt_fine = _evaluate(option, arr_b, existing_b, fine_load)
            flat_fine = _whole(pt_fine)
            ok_fine = _tabulation_holds(flat_fine, arr_b)
            flat_fine.flags = _point_flags(pt_fine)
            if ok_fine.any():
                store_tabulated(o, rows_, sub[bad], ok_fine, flat_fine, fine, at_grid=np.arange(len(bad)))
            if ok_fine.all():
                return
            still = np.flatnonzero(~ok_fine)
            bad = bad[still]
            arr_b, existing_b = _take(arr_b, still), _take_params(existing_b, still)
            # the cells that fail (a kink inside them): their intervals evaluated one by one, the rest read
            # from the fine grid, row by row where few enough intervals fall in failing cells
            flat_still = _take_point(flat_fine, still)  # (the fine grid's rows: those that failed the first, in order)
            cells_ok = _cells_hold(flat_still, arr_b)
            cell = fine.cell[still]
            top = fine.n_nodes - 1
            exact = (cell != top) & ~np.take_along_axis(np.pad(cells_ok, ((0, 0), (0, 1)), constant_values=True),
                                                          cell.astype(np.intp), axis=1)
            few = exact.sum(axis=1) <= MAX_EXACT_SHARE * np.maximum((cell != top).sum(axis=1), 1)
            if few.any():
                by_cells(o, option, rows_, sub[bad[few]], _take(arr_b, np.flatnonzero(few)),
                         _take_params(existing_b, np.flatnonzero(few)), load, fine, still[few],
                         _take_point(flat_still, np.flatnonzero(few)), exact[few])
            if few.all():
                return
            many = np.flatnonzero(~few)
            bad = bad[many]
            arr_b, existing_b = _take(arr_b, many), _take_params(existing_b, many)
        by_parts(o, option, kind, rows_, sub[bad], arr_b, existing_b, load)

    def by_cells(o: int, option: Mapping, rows_: np.ndarray, sub: np.ndarray, arr_s, existing_s, load: _Load,
                 grid: tabulation.Grid, grid_rows: np.ndarray, pt: _Point, exact: np.ndarray) -> None:
        """Store the rows ``sub`` of a group from their grid (rows ``grid_rows`` of ``grid``, the model's
        values ``pt`` on it), every interval marked in ``exact`` (n, n_steps) evaluated on its own instead.

        The models are element-wise, so each exact interval is evaluated as a row of one column (its asset's
        constants, its load), all of them in one call; the flags are the grid's (taken over the same loads).
        """
        load_s = load.rows(sub)
        values = {}
        for name in _POINT_ARRAYS:
            v = getattr(pt, name)
            values[name] = None if v is None else tabulation.interpolate(grid, *tabulation.tables(v), rows=grid_rows)
        r_k, t_k = np.nonzero(exact)
        if len(r_k):
            one = {key: v[r_k] for key, v in arr_s.items()}  # (positions repeat: not _take, which assumes unique)
            from dataclasses import fields, replace

            motors = replace(existing_s, **{f.name: np.asarray(getattr(existing_s, f.name))[r_k] for f in fields(existing_s)
                                           if np.ndim(getattr(existing_s, f.name))})
            n_ref = None if load_s.n_ref_known is None else load_s.n_ref_known[r_k, t_k][:, None]
            load_k = _Load(load_s.p_ref_kw[r_k, t_k][:, None], n_ref, np.ones((len(r_k), 1), dtype=bool),
                           np.full((len(r_k), 1), interval_h), load_s.p_design_kw[r_k], existing=motors,
                           on_kw=None if load_s.on_kw is None else load_s.on_kw[r_k])
            pt_k = _whole(_evaluate(option, one, motors, load_k))
            for name in _POINT_ARRAYS:
                if values[name] is not None:
                    got = getattr(pt_k, name)
                    values[name][r_k, t_k] = 0.0 if got is None else np.broadcast_to(got, (len(r_k), 1))[:, 0]
        store(o, "interval", rows_, sub, _Point(**values, flags=list(pt.flags)), load_s)

    def with_capacitor(o: int, idx: np.ndarray, q_cap_kvar: np.ndarray) -> None:
        """Store option ``o`` (a terminal capacitor) on the interval rows ``idx`` from today's rows
        (:func:`capacitor_rows_kvar`): kW, energy, losses and speed are today's; kVAr and its sums its own."""
        if book is not None:
            book.shift(o, idx, q_cap_kvar)
        if book is None:  # the option's own rows
            step = max(1, CHUNK_ELEMENTS // max(n_t, 1))
            for start in range(0, len(idx), step):  # bounded temporaries whatever the block's size
                part, q_part = idx[start:start + step], q_cap_kvar[start:start + step]
                p_kw[o, part] = p_kw[0, part]
                q_kvar[o, part] = capacitor_rows_kvar(p_kw[0, part], q_kvar[0, part], q_part)
        if power_only:
            return
        # the yearly kVArh from today's rows in one pass (no per-interval array: the book reads the rows)
        lag_kvarh, lead_kvarh = np.empty(len(idx)), np.empty(len(idx))
        _capacitor_sums(p_kw[0], q_kvar[0], np.asarray(idx, dtype=np.intp), np.asarray(q_cap_kvar, dtype=float),
                        lag_kvarh, lead_kvarh)
        lag[idx, o] = lag_kvarh * interval_h
        lead[idx, o] = lead_kvarh * interval_h
        for target in (energy, shaft_energy, speed):
            target[idx, o] = target[idx, 0]
        losses[idx, o] = losses[idx, 0]
        chosen = set(asset_ids[idx].tolist())  # today's flags hold for the same motor with its capacitor
        flags.extend([{**f, "option_id": option_ids[o]} for f in list(flags)
                      if f["option_id"] == option_ids[0] and f["asset_id"] in chosen])

    # today's motors first
    for kind, rows_, arr, existing, load in groups:
        if not only_today and kind not in grids:
            # element-wise: computed once, sliced for each option (today's drives compute their own)
            load.controlled = _speed_controlled(arr, load)
        if today is None:
            run(0, option_rows[0], kind, rows_, np.arange(len(rows_)), arr, existing, load)
            running_h[rows_] = grids[kind][0].hours_h.sum(axis=1) if kind in grids else load.weight_running()[1]
            if load.on_kw is not None and not power_only:
                # an on/off asset runs the share min(P / P_on, 1) of each interval it runs in
                cyc = np.flatnonzero(np.isfinite(load.on_kw[:, 0]) & (load.on_kw[:, 0] > 0.0))
                if len(cyc):
                    on_kw = load.on_kw[cyc]
                    shares = np.minimum(load.p_ref_kw[cyc] / on_kw, 1.0)
                    running_h[rows_[cyc]] = np.where(load.running[cyc], shares, 0.0).sum(axis=1) * interval_h
    if today is not None:  # the same block's first pass: the same numbers
        p_kw[0], q_kvar[0] = today.p_kw, today.q_kvar
        energy[:, 0], shaft_energy[:, 0], losses[:, 0] = today.energy_kwh, today.shaft_energy_kwh, today.losses_kwh
        lag[:, 0], lead[:, 0], speed[:, 0] = today.lagging_kvarh, today.leading_kvarh, today.mean_speed_rpm
        running_h[:] = today.running_h
        flags.extend(today.flags)
    if site_totals is None:
        site_totals = (p_kw[0].sum(axis=0), q_kvar[0].sum(axis=0))
    for o in range(1, 1 if only_today else n_o):
        if wanted is not None and o not in wanted:
            continue
        option = option_rows[o]
        for kind, rows_, arr, existing, load in groups:
            sub = np.flatnonzero(applies[rows_, o])
            if needed is not None and o in needed:
                # each row's values do not depend on the rows evaluated with it: only the rows asked for
                sub = sub[np.asarray(needed[o], dtype=bool)[rows_[sub]]]
            if not len(sub):
                continue
            arr_s = _take(arr, sub)
            existing_s = _take_params(existing, sub)
            if option["technology"] == "capacitor":
                cap_q[rows_[sub], o] = capacitor_size_kvar(existing_s, option["target_power_factor"])
                if kind == "interval":  # per interval: today's rows, the bank's kVAr taken off
                    cycled = np.asarray(arr_s.get("on_off", np.zeros(len(sub), dtype=bool)), dtype=bool)
                    if not cycled.all():
                        with_capacitor(o, rows_[sub[~cycled]], cap_q[rows_[sub[~cycled]], o])
                    if not cycled.any():
                        continue
                    # an on/off motor's bank corrects its kVAr only for the share of the interval it runs:
                    # evaluated as an option (_on_off), not shifted from today's rows
                    keep = np.flatnonzero(cycled)
                    sub, arr_s, existing_s = sub[keep], _take(arr_s, keep), _take_params(existing_s, keep)
            run(o, option, kind, rows_, sub, arr_s, existing_s, load,
                follows_site=option["technology"] == "wound_field" and kind == "interval")
    # a drive added to an existing motor: the motor's insulation and bearings must suit it (load-independent)
    for o in range(1, 1 if only_today else n_o):
        if option_rows[o]["technology"] != "add_drive" or needed is not None or (wanted is not None and o not in wanted):
            continue
        on = np.flatnonzero(applies[:, o])
        texts = drive_on_existing_motor_caution(a["year_installed"].to_numpy(dtype=float)[on],
                                                a["rewind_count"].to_numpy(dtype=float)[on])
        flags.extend({"asset_id": asset_ids[i], "option_id": option_ids[o], "flag": text} for i, text in zip(on, texts))
    # a motor in a hazardous area: every option's equipment must be certified for it (load-independent)
    area = a["hazardous_area"].fillna("none").to_numpy(dtype=object) if "hazardous_area" in a else None
    if area is not None and (area != "none").any():
        for o in range(1, 1 if only_today else n_o):
            if (option_rows[o]["technology"] == "existing" or needed is not None
                    or (wanted is not None and o not in wanted)):
                continue
            listed = option_rows[o].get("hazardous_areas")
            certified = isinstance(listed, str) and bool(listed.strip())
            for i in np.flatnonzero(applies[:, o] & (area != "none")):
                flags.append({"asset_id": asset_ids[i], "option_id": option_ids[o],
                              "flag": hazardous_area_caution(str(area[i]), option_rows[o]["technology"], certified)})
    # a new machine of the catalogue offered for a medium-voltage motor: its class levels, rules and cost curves
    # are those of low-voltage motors (load-independent)
    medium = a["rated_v_v"].to_numpy(dtype=float) > MAX_RULED_V_V if "rated_v_v" in a else np.zeros(len(a), bool)
    for o in range(1, 1 if only_today else n_o):
        technology = option_rows[o]["technology"]
        if (technology not in MEDIUM_VOLTAGE_CAUTIONED + MEDIUM_VOLTAGE_PRICED or needed is not None
                or (wanted is not None and o not in wanted)):
            continue
        text = MEDIUM_VOLTAGE_TEXT if technology in MEDIUM_VOLTAGE_CAUTIONED else MEDIUM_VOLTAGE_EQUIPMENT_TEXT
        flags.extend({"asset_id": asset_ids[i], "option_id": option_ids[o], "flag": text}
                     for i in np.flatnonzero(applies[:, o] & medium))
    # options that do not apply repeat today's values
    for o in range(1, 1 if only_today else n_o):
        if wanted is not None and o not in wanted:
            continue
        off = ~applies[:, o]
        at = off if needed is None or o not in needed else off & np.asarray(needed[o], dtype=bool)
        if book is not None:
            book.repeat(o, np.flatnonzero(off))
        elif at.any():  # (with ``needed``, only the rows that will be read)
            p_kw[o, at] = p_kw[0, at]
            q_kvar[o, at] = q_kvar[0, at]
        for target in (energy, shaft_energy, lag, lead, speed):
            target[off, o] = target[off, 0]
        losses[off, o] = losses[off, 0]
    return OperatingResult(
        index=index, interval_h=interval_h, asset_ids=asset_ids, site_ids=site_ids, option_ids=option_ids,
        technologies=options["technology"].to_numpy(dtype=object), applies=applies, reason=reason,
        p_kw=p_kw, q_kvar=q_kvar, energy_kwh=energy, shaft_energy_kwh=shaft_energy, losses_kwh=losses,
        lagging_kvarh=lag, leading_kvarh=lead, running_h=running_h, mean_speed_rpm=speed, capacitor_q_kvar=cap_q,
        interval_data=np.isin(np.arange(n_a), interval_rows),
        flags=pd.DataFrame(flags, columns=["asset_id", "option_id", "flag"]), curves=book,
    )


def operate_site(case, index: pd.DatetimeIndex, chunk_assets: int | None = None) -> OperatingResult:
    """Run every option on every asset of a one-site case, in blocks of bounded size.

    Parameters
    ----------
    case : models.case.Case
        A case whose assets all belong to one site (:func:`site_case`).
    index : pandas.DatetimeIndex
        The analysis index of the whole case (:func:`case_index`), so every site shares one time axis.
    chunk_assets : int, optional
        Block size [assets]; see :func:`asset_blocks`.

    Returns
    -------
    OperatingResult
        For the site's assets, in the case's order; per-interval arrays always dense.

    Notes
    -----
    A site larger than one block runs twice over its blocks: first today's motors only, which gives the
    site's meter totals that wound-field machines following the site need, then every option. The
    result does not depend on the number of blocks: every model works element by element (the
    speed-coupling fixed point stops element by element, :func:`models.loads.solve_speed_coupled_load`).
    """
    sites = case.assets["site_id"].unique()
    if len(sites) > 1:
        raise ValueError(f"operate_site takes a one-site case; this one has sites {', '.join(map(str, sites))}")
    n = len(case.assets)
    if len(asset_blocks(n, len(index), chunk_assets)) <= 1:
        return _operate_block(case, index, np.arange(n))
    merger = _Merger(n, len(index), dense=True)
    for rows, part, _ in site_blocks(case, index, chunk_assets):
        merger.add(rows, part)
    return merger.result()


def _catalogue_classes(options: pd.DataFrame) -> list[str]:
    """Efficiency classes whose class efficiency the options may ask for (the catalogue's, and IE3)."""
    return sorted({c for c in options["efficiency_class"] if isinstance(c, str) and c} | {"IE3"})


@dataclass(frozen=True)
class _SiteConstants:
    """Per-asset numbers of a one-site case (with the catalogue's class efficiencies), today's motors and
    the assets' loads on the analysis index (:func:`models.profiles.asset_loads` of the whole site)."""

    arrays: dict
    existing: induction.InductionParams
    loads: tuple | None = None
    options: pd.DataFrame | None = None  # options_with_baseline of the case
    option_rows: tuple = ()  # each option's row (a dict, _option_rows), taken once per site


def _site_constants(case, index: pd.DatetimeIndex | None = None) -> _SiteConstants:
    """Compute once per site what every block of it slices (element-wise per asset, so the same numbers).

    With ``index``, the loads too: each profile is placed on the index once per site instead of once
    per block and pass (memory: one load value per asset and step of the site while it is worked).
    """
    options = options_with_baseline(case.options)
    arrays = _with_class_efficiencies(asset_arrays(case.assets), _catalogue_classes(options))
    loads = asset_loads(case, index) if index is not None else None
    return _SiteConstants(arrays, existing_motor(arrays), loads, options, _option_rows(options))


def _option_rows(options: pd.DataFrame) -> tuple[dict, ...]:
    """Each option's row as a plain mapping of column -> value (the models read a few fields of an option
    many times per block; a dictionary answers without pandas' index lookup)."""
    return tuple(row.to_dict() for _, row in options.iterrows())


def _block_loads(site_loads: tuple, rows: np.ndarray, block_asset_ids) -> tuple:
    """:func:`models.profiles.asset_loads` of a block of increasing site positions ``rows``, sliced from the site's.

    Each asset's values, states and notes are its own, so slicing gives what the block's own call would
    (notes keep their order: interval assets first, then the others, each in register order).
    """
    interval_rows, values, is_input, states, notes = site_loads
    rows = np.asarray(rows)
    block_states = LoadStates(states.shaft_load_frac[rows], states.duration_h_per_yr[rows])
    block_notes = notes[notes["asset_id"].isin(set(block_asset_ids))].reset_index(drop=True)
    if rows[-1] - rows[0] == len(rows) - 1:  # consecutive positions
        inside = (interval_rows >= rows[0]) & (interval_rows <= rows[-1])
        return interval_rows[inside] - rows[0], values[inside], is_input[inside], block_states, block_notes
    inside = np.isin(interval_rows, rows)
    return (np.searchsorted(rows, interval_rows[inside]), values[inside], is_input[inside], block_states,
            block_notes)


class _BlockBuffers:
    """Per-interval p_kw and q_kvar memory reused from block to block of a site.

    A fresh block-sized array costs its pages' first touch (the system maps and clears them), which on
    a virtual machine is several times one pass over the array; reusing one pair of buffers pays that
    once per site instead of once per block and pass.
    """

    def __init__(self):
        self.p: np.ndarray | None = None
        self.q: np.ndarray | None = None

    def views(self, n_options: int, n_assets: int, n_steps: int) -> tuple[np.ndarray, np.ndarray]:
        """(p_kw, q_kvar) views of shape (n_options, n_assets, n_steps), contents undefined."""
        if self.p is None or self.p.shape[0] < n_options or self.p.shape[1] < n_assets or self.p.shape[2] != n_steps:
            shape = (max(n_options, 0 if self.p is None else self.p.shape[0]),
                     max(n_assets, 0 if self.p is None else self.p.shape[1]), n_steps)
            self.p, self.q = np.empty(shape), np.empty(shape)
        return self.p[:n_options, :n_assets], self.q[:n_options, :n_assets]


def site_blocks(case, index: pd.DatetimeIndex, chunk_assets: int | None = None,
                today_out: tuple[np.ndarray, np.ndarray] | None = None, curves: bool = False,
                buffers: "_BlockBuffers | None" = None, curve_elements: int | None = None):
    """Yield (positions, OperatingResult, (p_kw, q_kvar) site totals of today's motors) block by block.

    The blocks of a one-site case (:func:`asset_blocks`), each with every option; the site totals
    [kW], [kVAr] (n_steps,) are those of the whole site (a first pass over the blocks when there are
    several), the same numbers :func:`operate_site` uses. Memory: one block at a time. With
    ``today_out`` ((n_assets, n_steps) arrays each, e.g. the fleet's rows of this site from
    :meth:`_Merger.today_rows`), today's motors are written there, every row (else into arrays of the
    site's own). With ``curves`` each block's tabulated options are kept in its ``curves`` book instead
    of its per-interval arrays (see :func:`_operate_block`), and the blocks are by default of
    :data:`CURVE_CHUNK_ELEMENTS` asset-steps (``curve_elements`` if given, e.g.
    :attr:`MemoryBudgets.curve_chunk_elements`). ``buffers`` is the block memory to reuse (default fresh).

    Warnings
    --------
    The per-interval arrays of a yielded block (``p_kw``, ``q_kvar``) live in memory reused by the
    next block: use or copy them before asking for the next one (the other fields are the block's own).
    """
    n = len(case.assets)
    if curves and chunk_assets is None:
        elements = CURVE_CHUNK_ELEMENTS if curve_elements is None else int(curve_elements)
        chunk_assets = max(1, elements // max(len(index), 1))
    blocks = asset_blocks(n, len(index), chunk_assets)
    buffers = buffers if buffers is not None else _BlockBuffers()
    if len(blocks) <= 1:
        direct = curves and today_out is not None and all(type(a) is np.ndarray and a.dtype == np.float64
                                                          and a.flags.c_contiguous for a in today_out)
        part = _operate_block(case, index, np.arange(n), buffers=buffers, curves=curves,
                              today_into=today_out if direct else None)
        if today_out is not None and not direct:
            today_out[0][...], today_out[1][...] = part.p_kw[0], part.q_kvar[0]
        yield np.arange(n), part, (part.p_kw[0].sum(axis=0), part.q_kvar[0].sum(axis=0))
        return
    if today_out is not None:
        base_p, base_q = today_out
    else:
        base_p = np.empty((n, len(index)))  # every row written by its block below
        base_q = np.empty((n, len(index)))
    today = []
    constants = _site_constants(case, index)
    for rows in blocks:
        part = _operate_block(case, index, rows, only_today=True, buffers=buffers, site_constants=constants)
        at = _as_slice(rows)
        base_p[at], base_q[at] = part.p_kw[0], part.q_kvar[0]
        today.append(_TodayOfBlock.of(part, base_p[at], base_q[at]))  # the second pass reuses today's motors
        del part
    totals = (base_p.sum(axis=0), base_q.sum(axis=0))
    for rows, today_of_block in zip(blocks, today):
        yield rows, _operate_block(case, index, rows, site_totals=totals, buffers=buffers, today=today_of_block,
                                   site_constants=constants, curves=curves), totals


class _Merger:
    """Gathers OperatingResult parts (disjoint sets of asset positions) into one, part by part."""

    def __init__(self, n_assets: int, n_steps: int, dense: bool = True, recompute=None,
                 today_in_memory_bytes: int | None = None):
        self.n_a, self.n_t = n_assets, n_steps
        self.dense = dense
        self.today_in_memory_bytes = (TODAY_IN_MEMORY_BUDGET_BYTES if today_in_memory_bytes is None
                                      else int(today_in_memory_bytes))
        self.recompute = recompute
        self.first: OperatingResult | None = None
        self.fields: dict[str, np.ndarray] = {}
        self.flags: list[pd.DataFrame] = []
        self.flag_pos: list[np.ndarray] = []
        self.added = 0  # assets received so far
        self.prewritten: np.ndarray | None = None  # assets whose today's rows a site wrote in place (today_rows)

    def _allocate_interval(self, n_options: int) -> None:
        """The fleet's per-interval arrays, uninitialised: every row is written by the part holding it, or
        in place through :meth:`today_rows` (see result())."""
        shape = (n_options, self.n_a, self.n_t) if self.dense else (self.n_a, self.n_t)
        spill = not self.dense and interval_bytes(self.n_a, 1, self.n_t) > self.today_in_memory_bytes
        self.fields["p_kw"] = _file_backed(shape) if spill else np.empty(shape)
        self.fields["q_kvar"] = _file_backed(shape) if spill else np.empty(shape)
        self.prewritten = np.zeros(self.n_a, dtype=bool)

    def today_rows(self, rows: np.ndarray, n_options: int) -> tuple[np.ndarray, np.ndarray] | None:
        """Views of the fleet's rows of today's motors at positions ``rows`` [kW], [kVAr], (len(rows), n_steps)
        each, for a site to write them in place (no copy when its blocks are added); None unless the
        positions are consecutive. The caller must write every row before its parts are added.
        """
        at = _as_slice(rows)
        if not isinstance(at, slice):
            return None
        if "p_kw" not in self.fields:
            self._allocate_interval(n_options)
        self.prewritten[at] = True
        p, q = self.fields["p_kw"], self.fields["q_kvar"]
        return (p[0, at], q[0, at]) if self.dense else (p[at], q[at])

    def add(self, rows: np.ndarray, part: OperatingResult) -> None:
        at = _as_slice(rows)
        self.added += len(rows)
        adopted = False
        if self.first is None:
            self.first = part
            n_o = len(part.option_ids)
            shape = (n_o, self.n_a, self.n_t) if self.dense else (self.n_a, self.n_t)
            whole = isinstance(at, slice) and at.start == 0 and at.stop == self.n_a
            interval = [part.p_kw, part.q_kvar] if self.dense else [part.p_kw[0], part.q_kvar[0]]
            if "p_kw" in self.fields:
                pass  # allocated by today_rows
            elif whole and part.curves is None and all(isinstance(a, np.ndarray) and a.shape == shape
                                                       and a.dtype == np.float64 for a in interval):
                # one part holding every asset in order: its per-interval arrays are the result (no copy)
                self.fields["p_kw"], self.fields["q_kvar"] = interval
                adopted = True
            else:
                self._allocate_interval(n_o)
            for name in _PER_ASSET_FIELDS:
                value = getattr(part, name)
                self.fields[name] = np.zeros((self.n_a,) + value.shape[1:], dtype=value.dtype)
        in_place = self.prewritten is not None and bool(self.prewritten[at].all())  # today's rows already there
        if adopted:
            pass
        elif self.dense and part.curves is not None:  # every option's rows, read through the block's book
            first = 1 if in_place else 0
            book, block_rows = part.curves.arrays(), np.arange(len(rows))
            for o in range(first, len(part.option_ids)):
                tabulation.fill_rows(book, np.full(len(rows), o), block_rows, part.p_kw, part.q_kvar,
                                     self.fields["p_kw"][o], self.fields["q_kvar"][o], np.asarray(rows))
        elif self.dense:
            first = 1 if in_place else 0
            self.fields["p_kw"][first:, at] = part.p_kw[first:]
            self.fields["q_kvar"][first:, at] = part.q_kvar[first:]
        elif not in_place:
            self.fields["p_kw"][at] = part.p_kw[0]
            self.fields["q_kvar"][at] = part.q_kvar[0]
        for name in _PER_ASSET_FIELDS:
            self.fields[name][at] = getattr(part, name)
        if len(part.flags):
            positions = {aid: int(r) for aid, r in zip(part.asset_ids, rows)}
            self.flags.append(part.flags)
            self.flag_pos.append(part.flags["asset_id"].map(positions).to_numpy(dtype=int))

    def result(self) -> OperatingResult:
        if self.added != self.n_a:  # the per-interval arrays are not cleared: every asset must have come
            raise RuntimeError(f"the parts held {self.added} assets of {self.n_a}")
        first = self.first
        f = self.fields
        flags = pd.DataFrame(columns=["asset_id", "option_id", "flag"])
        if self.flags:
            flags = pd.concat(self.flags, ignore_index=True)
            order = np.argsort(np.concatenate(self.flag_pos), kind="stable")
            flags = flags.iloc[order].reset_index(drop=True)
        p, q = f["p_kw"], f["q_kvar"]
        if not self.dense and self.recompute is None:  # today's motors only, as (1, n_assets, n_steps)
            p, q = p[None], q[None]
        elif not self.dense:
            n_o = len(first.option_ids)
            self.recompute.today_p, self.recompute.today_q = p, q
            # terminal capacitors on interval data: today's rows shifted, never recomputed
            # (an on/off motor's bank is evaluated as an option: not derived, recomputed)
            cycled = self.recompute.case.assets["speed_control"].to_numpy(dtype=object) == "on_off"
            derived = ((first.technologies == "capacitor")[None, :] & f["applies"]
                       & (f["interval_data"] & ~cycled)[:, None])
            shift = np.where(derived, f["capacitor_q_kvar"], np.nan)
            p = SiteIntervalStore(p, n_o, self.recompute, "p_kw", shift)
            q = SiteIntervalStore(q, n_o, self.recompute, "q_kvar", shift)
        return OperatingResult(
            index=first.index, interval_h=first.interval_h, asset_ids=f["asset_ids"], site_ids=f["site_ids"],
            option_ids=first.option_ids, technologies=first.technologies, applies=f["applies"], reason=f["reason"],
            p_kw=p, q_kvar=q, energy_kwh=f["energy_kwh"], shaft_energy_kwh=f["shaft_energy_kwh"],
            losses_kwh=f["losses_kwh"], lagging_kvarh=f["lagging_kvarh"], leading_kvarh=f["leading_kvarh"],
            running_h=f["running_h"], mean_speed_rpm=f["mean_speed_rpm"], capacitor_q_kvar=f["capacitor_q_kvar"],
            interval_data=f["interval_data"], flags=flags)


def _file_backed(shape: tuple[int, ...]) -> np.ndarray:
    """An uninitialised float64 array in an anonymous temporary file mapped into memory (removed by the
    system when the file is closed, at the latest when the process ends)."""
    return np.memmap(tempfile.TemporaryFile(prefix="drivecase-"), dtype=np.float64, mode="w+", shape=shape)


def _as_slice(rows: np.ndarray):
    """A slice for consecutive increasing positions (a plain copy), else the positions themselves."""
    rows = np.asarray(rows)
    if len(rows) and rows[-1] - rows[0] == len(rows) - 1 and np.all(np.diff(rows) == 1):
        return slice(int(rows[0]), int(rows[-1]) + 1)
    return rows


_PER_ASSET_FIELDS = ("asset_ids", "site_ids", "applies", "reason", "energy_kwh", "shaft_energy_kwh", "losses_kwh",
                     "lagging_kvarh", "leading_kvarh", "running_h", "mean_speed_rpm", "capacitor_q_kvar", "interval_data")


class _SiteRecompute:
    """Recomputes per-interval power of some options for some assets, block by block, on demand.

    Threads may ask for different sites at once: each keeps its own cache and its own block memory,
    reused from block to block (fresh memory costs page faults on first touch). A site is run again in
    blocks (of :data:`CHUNK_ELEMENTS` asset-steps unless the run's block size was set) with the full
    run's site totals of today's motors, for the options and assets asked for only and for their
    per-interval power only; every model works element by element, so the values are the full run's.
    Today's motors are taken from the full run's arrays, not run again. The latest
    block's result is kept, and so are both quantities of the latest request: asking for the kVAr of
    the rows whose kW were just asked for (a site meter takes both) runs no block again.
    """

    def __init__(self, case, index: pd.DatetimeIndex, chunk_assets: int | None, books_budget: int | None = None,
                 rows_budget: int | None = None):
        self.case, self.index, self.chunk_assets = case, index, chunk_assets
        self.partition = site_partition(case)
        self.site_of = np.zeros(len(case.assets), dtype=int)
        self.local = np.zeros(len(case.assets), dtype=int)
        for k, (_, rows) in enumerate(self.partition):
            self.site_of[rows] = k
            self.local[rows] = np.arange(len(rows))
        self.today_p: np.ndarray | None = None  # set by the merger: today's motors, every asset
        self.today_q: np.ndarray | None = None
        self._local = threading.local()  # each thread keeps its own latest block, request and site
        self._kept: dict | None = None  # (site, option, local row) -> (p_kw row, q_kvar row) inside kept_rows
        self._kept_bytes = 0
        self._kept_budget = 0
        self._kept_lock = threading.Lock()
        self.site_number = {site_id: k for k, (site_id, _) in enumerate(self.partition)}
        self._books: dict[int, list] = {}  # site -> [(site-local rows of a block, its book's arrays)]
        self._books_bytes = 0
        self._books_refused: set[int] = set()  # sites a block of which did not fit
        # the curve books kept, and the rows kept_rows keeps by default [bytes] (the module's budgets unless given)
        self.books_budget = KEPT_BOOKS_BUDGET_BYTES if books_budget is None else int(books_budget)
        self.rows_budget = KEPT_ROWS_BUDGET_BYTES if rows_budget is None else int(rows_budget)

    def keep_book(self, site_id: str, rows: np.ndarray, book: "tabulation.CurveBook") -> bool:
        """Keep a block's curve book (site-local ``rows``, the block's assets in its order) while the books
        kept stay within :attr:`books_budget`; a site whose blocks' books are all kept is read through
        them, and a block that does not fit lets go of its site's books kept before it. Returns whether it
        was kept."""
        return self.keep_arrays(site_id, rows, book.arrays())

    def keep_arrays(self, site_id: str, rows: np.ndarray, arrays: tuple) -> bool:
        """:meth:`keep_book` of a book already turned into its arrays (``CurveBook.arrays``), e.g. one sent
        back by a worker of the Dask engine."""
        size = sum(int(a.nbytes) for a in arrays)
        k = self.site_number[str(site_id)]
        with self._kept_lock:
            if k in self._books_refused or self._books_bytes + size > self.books_budget:
                # a site read through its books needs all of them: the blocks kept so far are let go (their
                # bytes serve whole sites after it) and none of its later blocks is kept
                self._books_refused.add(k)
                dropped = self._books.pop(k, [])
                self._books_bytes -= sum(int(a.nbytes) for _, kept in dropped for a in kept)
                return False
            self._books_bytes += size
            self._books.setdefault(k, []).append((np.asarray(rows, dtype=np.intp), arrays))
        return True

    @property
    def books_bytes(self) -> int:
        """Bytes of the curve books kept now [B]."""
        return self._books_bytes

    def covers(self, k: int) -> bool:
        """Whether site k's kept curve books cover every asset of the site (its rows are read, not recomputed)."""
        return self._booked(k) is not None

    def _booked(self, k: int) -> list | None:
        """Site k's kept books when they cover every asset of the site, else None."""
        blocks = self._books.get(k)
        if not blocks or sum(len(r) for r, _ in blocks) != len(self.partition[k][1]):
            return None
        return blocks

    def _read_books(self, k: int, blocks: list, options: np.ndarray, local: np.ndarray):
        """Rows (options[i], local[i]) of site k read through its kept books: (p_kw, q_kvar)."""
        positions = self.partition[k][1]
        n_t = len(self.index)
        out = (np.empty((len(options), n_t)), np.empty((len(options), n_t)))
        for block_rows, arrays in blocks:
            order = np.argsort(block_rows, kind="stable")
            found = np.searchsorted(block_rows[order], local)
            found = np.minimum(found, len(block_rows) - 1)
            sel = np.flatnonzero(block_rows[order][found] == local)
            if not len(sel):
                continue
            at = order[found[sel]]  # each pair's row in the block
            fleet = _as_slice(positions[block_rows])
            # the block's today's rows, as its arrays held them (a view where the positions are consecutive)
            today_p, today_q = (np.asarray(full[fleet])[None] for full in (self.today_p, self.today_q))
            tabulation.fill_rows(arrays, options[sel], at, today_p, today_q, out[0], out[1], sel)
        return out

    @property
    def _cached(self) -> tuple | None:  # (key, p_kw, q_kvar) of the latest block run
        return getattr(self._local, "cached", None)

    @_cached.setter
    def _cached(self, value) -> None:
        self._local.cached = value

    @property
    def _request(self) -> tuple | None:  # ((k, options, local), p_kw rows, q_kvar rows)
        return getattr(self._local, "request", None)

    @_request.setter
    def _request(self, value) -> None:
        self._local.request = value

    @property
    def _constants(self) -> tuple | None:  # (k, _site_constants of site k)
        return getattr(self._local, "constants", None)

    @_constants.setter
    def _constants(self, value) -> None:
        self._local.constants = value

    @contextlib.contextmanager
    def keeping(self, budget_bytes: int):
        """Inside the block, rows recomputed are kept (up to ``budget_bytes`` of kW and kVAr together) and
        read again without recomputing; all are let go on leaving it."""
        with self._kept_lock:
            outer = self._kept is not None
            if not outer:
                self._kept, self._kept_bytes, self._kept_budget = {}, 0, int(budget_bytes)
        try:
            yield
        finally:
            if not outer:
                with self._kept_lock:
                    self._kept, self._kept_bytes = None, 0

    def values(self, k: int, options: np.ndarray, local: np.ndarray, quantity: int) -> np.ndarray:
        """Rows (options[i], local[i]) of site k, shape (len(options), n_steps)."""
        options, local = np.asarray(options), np.asarray(local)
        request = (k, options.tobytes(), local.tobytes())
        if self._request is not None and self._request[0] == request:
            return self._request[1 + quantity]
        self._request = None
        kept = self._kept
        booked = self._booked(k)
        if booked is not None:  # read through the site's kept curve books: nothing recomputed
            out = self._read_books(k, booked, options, local)
        elif kept is None:
            out = self._computed(k, options, local)
        else:
            keys = [(k, int(o), int(j)) for o, j in zip(options, local)]
            with self._kept_lock:
                found = [kept.get(key) for key in keys]
            missing = np.array([row is None for row in found], dtype=bool)
            out = (np.empty((len(options), len(self.index))), np.empty((len(options), len(self.index))))
            if missing.any():
                fresh = self._computed(k, options[missing], local[missing])
                for qty in (0, 1):
                    out[qty][missing] = fresh[qty]
                size = 2 * fresh[0].shape[1] * fresh[0].itemsize
                with self._kept_lock:
                    if self._kept is kept:  # still the same keeping block
                        for i in np.flatnonzero(missing):
                            if self._kept_bytes + size > self._kept_budget:
                                break
                            if keys[i] not in kept:
                                kept[keys[i]] = (out[0][i].copy(), out[1][i].copy())
                                self._kept_bytes += size
            for i in np.flatnonzero(~missing):
                out[0][i], out[1][i] = found[i]
        self._request = (request,) + out
        return out[quantity]

    def _computed(self, k: int, options: np.ndarray, local: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Rows (options[i], local[i]) of site k recomputed: (p_kw, q_kvar), each (len(options), n_steps)."""
        site_id, rows = self.partition[k]
        n_t = len(self.index)
        # blocks of the assets asked for only (at most CHUNK_ELEMENTS asset-steps each, in register order): the
        # per-interval work of a block (loads, reference load, grid placing) is done for those assets alone.
        # Every option's rows share a block's buffers here, and a thread keeps them from site to site (blocks
        # of the curve blocks' size were measured: the plan's bills 6.1 -> 5.8 s at 10,000 assets, the peak
        # 3.0 -> 3.9 GiB). Every model works element by element, so any block of the same site, with the
        # site's totals of today's motors, gives the full run's values.
        asked = np.unique(local)
        size = int(self.chunk_assets) if self.chunk_assets is not None else max(1, CHUNK_ELEMENTS // max(n_t, 1))
        totals = None
        if len(asked) < len(rows) or len(rows) > size:  # no block is the whole site: the site's totals
            totals = (self.today_p[rows].sum(axis=0), self.today_q[rows].sum(axis=0))
        out = (np.empty((len(options), n_t)), np.empty((len(options), n_t)))
        sub_case = None
        for start in range(0, len(asked), size):
            block = asked[start:start + size]
            sel = np.flatnonzero((local >= block[0]) & (local <= block[-1]))
            at = np.searchsorted(block, local[sel])  # each pair's position in the block
            key = (k, block.tobytes(), options[sel].tobytes(), local[sel].tobytes())
            if self._cached is None or self._cached[0] != key:
                self._cached = None
                sub_case = sub_case if sub_case is not None else site_case(self.case, site_id)
                if self._constants is None or self._constants[0] != k:
                    self._constants = None  # one site's constants at a time
                    self._constants = (k, _site_constants(sub_case, self.index))
                wanted = frozenset(int(o) for o in np.unique(options[sel]))
                needed = {}
                for o in wanted:
                    mask = np.zeros(len(block), dtype=bool)
                    mask[at[options[sel] == o]] = True
                    needed[o] = mask
                positions = rows[block]
                zeros = np.zeros(len(positions))
                today = _TodayOfBlock(self.today_p[positions], self.today_q[positions], zeros, zeros,
                                      np.zeros((len(positions), len(LOSS_KINDS))), zeros, zeros, zeros, zeros, [])
                if getattr(self._local, "buffers", None) is None:
                    self._local.buffers = _BlockBuffers()  # block memory reused from block to block
                op = _operate_block(sub_case, self.index, block, site_totals=totals, wanted=wanted,
                                    site_constants=self._constants[1], needed=needed, today=today, power_only=True,
                                    buffers=self._local.buffers)
                self._cached = (key, op.p_kw, op.q_kvar)
            for qty in (0, 1):
                out[qty][sel] = self._cached[1 + qty][options[sel], at]
        return out

    def __getstate__(self):
        state = dict(self.__dict__)
        del state["_local"], state["_kept_lock"]  # caches stay behind
        state["_kept"], state["_kept_bytes"] = None, 0
        state["_books"], state["_books_bytes"], state["_books_refused"] = {}, 0, set()
        return state

    def __setstate__(self, state):
        self.__dict__.update(state)
        self._local = threading.local()
        self._kept_lock = threading.Lock()


class SiteIntervalStore:
    """Per-interval power of every option, shape (n_options, n_assets, n_steps), kept compact for large fleets.

    Today's motors (option 0) are held in memory; any other option is recomputed when indexed, for the
    blocks of assets and the options asked for only (the same calculation on the same block, so the
    same numbers). Indexing follows numpy's
    rules for integer, slice, boolean and integer-array keys on the first two axes (two index arrays are
    paired, as in ``p_kw[choice, rows]``); ``numpy.asarray`` materialises the whole array.
    """

    def __init__(self, today: np.ndarray, n_options: int, recompute: _SiteRecompute, quantity: str,
                 shift_kvar: np.ndarray | None = None):
        self._today = today
        self._recompute = recompute
        self._k = 0 if quantity == "p_kw" else 1
        self.shape = (n_options,) + today.shape
        self.dtype = today.dtype
        self.ndim = 3
        #: (n_assets, n_options): a terminal capacitor's kVAr where the pair's rows are today's shifted
        #: (:func:`capacitor_rows_kvar`), NaN where they are recomputed
        self._shift = shift_kvar

    def recomputes(self, assets: np.ndarray) -> bool:
        """Whether reading these assets' rows of other options runs the models again: some of their sites'
        curve books were not kept (:meth:`_SiteRecompute.keep_book`)."""
        sites = np.unique(self._recompute.site_of[np.asarray(assets, dtype=int)])
        return not all(self._recompute.covers(int(k)) for k in sites)

    def _shifted(self, options: np.ndarray, assets: np.ndarray) -> np.ndarray:
        """Which pairs are today's rows shifted (bool, (len(pairs),)): read without recomputing."""
        if self._shift is None or not len(options):
            return np.zeros(len(options), dtype=bool)
        return (options != 0) & ~np.isnan(self._shift[assets, options])

    def _shifted_rows(self, options: np.ndarray, assets: np.ndarray) -> np.ndarray:
        """The rows of shifted pairs (:meth:`_shifted`), from today's rows kept in memory."""
        if self._k == 0:
            return self._recompute.today_p[assets]
        return capacitor_rows_kvar(self._recompute.today_p[assets], self._recompute.today_q[assets],
                                   self._shift[assets, options])

    def __len__(self) -> int:
        return self.shape[0]

    @property
    def nbytes(self) -> int:
        """Bytes held in memory (today's motors only)."""
        return int(self._today.nbytes)

    def _other_rows(self, options: np.ndarray, assets: np.ndarray):
        """The rows of the pairs other than today's, in groups: (pair positions, their rows) for the
        capacitor rows taken from today's, then site by site for the rows recomputed or read through books."""
        shifted = self._shifted(options, assets)
        at = np.flatnonzero(shifted)
        if len(at):
            yield at, self._shifted_rows(options[at], assets[at])
        rest = np.flatnonzero((options != 0) & ~shifted)
        if len(rest):
            sites = self._recompute.site_of[assets[rest]]
            for k in np.unique(sites):
                sel = rest[sites == k]
                yield sel, self._recompute.values(int(k), options[sel], self._recompute.local[assets[sel]], self._k)

    def _rows(self, options: np.ndarray, assets: np.ndarray) -> np.ndarray:
        """Values for each (option, asset) pair, shape (len(pairs), n_steps)."""
        out = np.empty((len(options), self.shape[2]), dtype=self.dtype)
        today = options == 0
        out[today] = self._today[assets[today]]
        for at, values in self._other_rows(options, assets):
            out[at] = values
        return out

    def summed_rows(self, options: np.ndarray, assets: np.ndarray) -> np.ndarray:
        """``self[options, assets].sum(axis=0)`` (n_steps,), the rows added one by one in the pairs' order
        (numpy's order for that sum, so the same bits), without gathering the rows into one array:
        today's rows are read where they are kept, the others recomputed site by site."""
        options, assets = np.asarray(options, dtype=int), np.asarray(assets, dtype=int)
        others = {int(i): values[n] for at, values in self._other_rows(options, assets) for n, i in enumerate(at)}
        total = np.zeros(self.shape[2], dtype=self.dtype)
        for i in range(len(options)):
            row = self._today[assets[i]] if options[i] == 0 else others[i]
            if i == 0:
                total[:] = row
            else:
                total += row
        return total

    def __getitem__(self, key):
        if not isinstance(key, tuple):
            key = (key,)
        if len(key) > 3 or any(k is Ellipsis or k is None for k in key):
            raise IndexError("SiteIntervalStore takes up to three keys (option, asset, step), without ... or None")
        ko, ka, kt = key + (slice(None),) * (3 - len(key))
        o_sel = np.arange(self.shape[0])[ko]
        a_sel = np.arange(self.shape[1])[ka]
        if not isinstance(ko, slice) and not isinstance(ka, slice) and np.ndim(o_sel) and np.ndim(a_sel):
            o_b, a_b = np.broadcast_arrays(o_sel, a_sel)  # paired advanced indexing
            values = self._rows(o_b.ravel(), a_b.ravel()).reshape(o_b.shape + (self.shape[2],))
        else:
            o_flat, a_flat = np.ravel(o_sel), np.ravel(a_sel)
            o_pair = np.repeat(o_flat, len(a_flat))
            a_pair = np.tile(a_flat, len(o_flat))
            values = self._rows(o_pair, a_pair).reshape(np.shape(o_sel) + np.shape(a_sel) + (self.shape[2],))
        return values[..., kt]

    def __array__(self, dtype=None, copy=None):
        full = self[:, :]
        return full if dtype is None else full.astype(dtype)


@contextlib.contextmanager
def kept_rows(op: OperatingResult, budget_bytes: int | None = None):
    """Keep the per-interval rows an operating result recomputes, while the block runs.

    A fleet above the dense budget recomputes other options' rows each time they are read
    (:class:`SiteIntervalStore`). Inside ``with kept_rows(op):`` each row recomputed is kept, up to
    ``budget_bytes`` (default the run's, :data:`KEPT_ROWS_BUDGET_BYTES` unless its budgets set another), and read again from memory: the same
    values, since a row does not depend on the rows recomputed with it. Everything kept is let go on
    leaving the block. Nothing changes for a result that keeps every option in memory.
    """
    store = op.p_kw if isinstance(op.p_kw, SiteIntervalStore) else None
    if store is None:
        yield
        return
    with store._recompute.keeping(store._recompute.rows_budget if budget_bytes is None else budget_bytes):
        yield


def operate(case, index: pd.DatetimeIndex | None = None, chunk_assets: int | None = None,
            dense: bool | None = None, on_site: Callable[[str], None] | None = None) -> OperatingResult:
    """Run every applicable option of the case's catalogue on every asset.

    Parameters
    ----------
    case : models.case.Case
        A validated case.
    index : pandas.DatetimeIndex, optional
        Analysis index; default :func:`case_index`.
    chunk_assets : int, optional
        Largest block of assets evaluated together; default from :data:`CHUNK_ELEMENTS`.
    dense : bool, optional
        Keep every option's per-interval power in memory (True) or only today's, recomputing the others
        site by site when indexed (False, :class:`SiteIntervalStore`); default True while p_kw and q_kvar
        fit in :data:`DENSE_INTERVAL_BUDGET_BYTES`.
    on_site : callable, optional
        Called with each site's id once its machines are done (a progress bar's count).

    Returns
    -------
    OperatingResult
        Power at the supply per interval and yearly totals for every asset and option.

    Notes
    -----
    The fleet is worked site by site (:func:`site_partition`; a site's meter and tariff are its own) and
    within a site in blocks of at most ``chunk_assets`` assets (:func:`operate_site`). Order of work in a
    site: today's motors first, which gives the site meter without each asset for wound-field machines
    that follow the site's reactive needs; then each option on the assets it applies to. Shaft load 0
    means the motor is stopped (it draws nothing).
    """
    index = case_index(case) if index is None else index
    partition = site_partition(case)
    n_o = len(options_with_baseline(case.options))
    if dense is None:
        dense = interval_bytes(len(case.assets), n_o, len(index)) <= DENSE_INTERVAL_BUDGET_BYTES
    merger = _Merger(len(case.assets), len(index), dense=dense,
                     recompute=None if dense else _SiteRecompute(case, index, chunk_assets))
    for site_id, rows in partition:
        merger.add(rows, operate_site(site_case(case, site_id), index, chunk_assets))
        if on_site is not None:
            on_site(site_id)
    return merger.result()


def interval_bytes(n_assets: int, n_options: int, n_steps: int) -> int:
    """Bytes that dense per-interval p_kw and q_kvar take (two float64 arrays)."""
    return 2 * 8 * int(n_assets) * int(n_options) * int(n_steps)


def options_with_baseline(options: pd.DataFrame) -> pd.DataFrame:
    """Put today's motor ('existing') first, adding an implicit row when the catalogue has none."""
    tech = options["technology"].to_numpy(dtype=object)
    if (tech == "existing").any():
        first = int(np.flatnonzero(tech == "existing")[0])
        order = [first] + [i for i in range(len(options)) if i != first]
        return options.iloc[order].reset_index(drop=True)
    keep = {c: np.nan for c in options.columns}
    for c in options.columns:
        if c.endswith(("_coef", "_frac", "_per_kvar", "_per_kw_yr")) or c == "midlife_year":
            keep[c] = 0.0
        if c.endswith("_exp"):
            keep[c] = 1.0
    # the shipped catalogue's own keep row where it has the column (today's motor's maintenance, life)
    for c, value in _default_keep_row().items():
        if c in keep:
            keep[c] = value
    keep.update(option_id="keep", technology="existing", label="Keep as is", speed_remedy="none", applications="",
                min_rated_p_kw=0.0, max_rated_p_kw=1e6, illustrative=True)
    return pd.concat([pd.DataFrame([keep]), options], ignore_index=True)


@functools.lru_cache(maxsize=1)
def _default_keep_row() -> dict:
    """The numeric values of the shipped options catalogue's keep row (data/defaults/options.csv), by column."""
    from models import io

    raw, _ = io.read_default_options()
    frame = raw.frame
    rows = frame[frame["technology"].astype(str) == "existing"]
    if rows.empty:
        return {}
    out = {}
    for c, value in rows.iloc[0].items():
        number = pd.to_numeric(pd.Series([value]), errors="coerce").iloc[0]
        if pd.notna(number):
            out[str(c)] = float(number)
    return out


def _load_groups(arr_all, existing_all, interval_rows: np.ndarray, values, is_input, states: LoadStates, n_t: int,
                 interval_h: float) -> list[tuple]:
    """Today's reference load of a block's assets in groups (kind, rows, arrays, today's motors, load):
    "interval" for the assets with an interval profile, "states" for those with load states.
    ``existing_all`` None calibrates today's motors of each group from its arrays."""
    n_a = len(arr_all["rated_p_kw"])
    state_rows = np.setdiff1d(np.arange(n_a), interval_rows)
    groups = []
    for kind, rows_ in (("interval", interval_rows), ("states", state_rows)):
        if not len(rows_):
            continue
        arr = _take(arr_all, rows_)
        existing = existing_motor(arr) if existing_all is None else _take_params(existing_all, rows_)
        if kind == "interval":
            load = _reference_load(arr, existing, values, is_input, np.full((1, n_t), interval_h))
        else:
            load = _reference_load(arr, existing, states.shaft_load_frac[rows_], np.zeros(len(rows_), dtype=bool),
                                   states.duration_h_per_yr[rows_], intervals=False)
        groups.append((kind, rows_, arr, existing, load))
    return groups


def _measured_below_no_load(groups: list[tuple], values: np.ndarray, is_input, interval_h: float
                            ) -> list[tuple[int, str]]:
    """Cautions for the assets whose measured input (a profile of kW at the motor) is above zero but not above
    today's motor's no-load input in some intervals: the model reads no shaft load there, so the intervals count
    as stopped and their measured energy is left out of every option. (block row, caution text) per asset."""
    is_input = np.asarray(is_input, dtype=bool)
    out = []
    for kind, rows_, _arr, _existing, load in groups:
        if kind != "interval" or not is_input.any():
            continue
        inputs = np.flatnonzero(is_input)
        measured = values[inputs]
        lost = (measured > 0.0) & ~load.running[inputs]
        count = lost.sum(axis=1)
        if not count.any():
            continue
        lost_kwh = np.where(lost, measured, 0.0).sum(axis=1) * interval_h
        total_kwh = np.maximum(measured, 0.0).sum(axis=1) * interval_h
        for k in np.flatnonzero(count):
            n, kwh, total, i = int(count[k]), float(lost_kwh[k]), float(total_kwh[k]), inputs[k]
            out.append((int(rows_[i]), f"measured input at or below today's motor's no-load input in {n:,} intervals "
                                       "of the analysis year "
                                       f"({kwh:,.0f} kWh, {100 * kwh / total:.2g} % of the measured energy): counted as "
                                       "stopped, so that energy is in no option (an idling motor reads as stopped); "
                                       "check the logger's scaling and the nameplate"))
    return out


def _throttled_groups(groups: list[tuple]):
    """Each group's throttled centrifugal loads: (block rows, their positions in the group, the group's per-asset
    arrays and load, their hours per column (n, m))."""
    for _kind, rows_, arr, _existing, load in groups:
        throttled = np.flatnonzero(np.asarray(arr["throttled"], dtype=bool) & (np.asarray(arr["exponent"]) == 3.0))
        if len(throttled):
            yield rows_, throttled, arr, load, np.broadcast_to(load.weight_h, load.running.shape)[throttled]


def _throttled_below_zero_flow(groups: list[tuple]) -> list[tuple[int, str]]:
    """Cautions for the throttled pumps and fans whose shaft load falls below their zero-flow power
    (:data:`models.loads.DEFAULT_THROTTLED_ZERO_FLOW_POWER_FRAC` of the design power) in some of their running
    hours: the flow read from the throttled power is nil there, so the speed-control options are taken at zero
    flow whatever the load was. (block row, caution text) per asset."""
    out = []
    zero_flow = loads.DEFAULT_THROTTLED_ZERO_FLOW_POWER_FRAC
    for rows_, throttled, _arr, load, weight in _throttled_groups(groups):
        below = (load.p_ref_kw[throttled] < zero_flow * load.p_design_kw[throttled]) & load.running[throttled]
        if not below.any():
            continue
        below_h = np.where(below, weight, 0.0).sum(axis=1)
        running_h = np.where(load.running[throttled], weight, 0.0).sum(axis=1)
        for k in np.flatnonzero(below_h > 0):
            share = 100 * below_h[k] / running_h[k]
            out.append((int(rows_[throttled[k]]),
                        f"throttled load below the zero-flow power ({100 * zero_flow:.0f} % of design power) in "
                        f"{share:.2g} % of running hours ({below_h[k]:,.0f} h): the flow read from it is nil there, "
                        "so the speed-control options are taken at zero flow in those hours; check the design "
                        "power and the throttling"))
    return out


#: A throttled load whose highest running load is below this share of its rating is told that its design power
#: is assumed: the assumed design power is then more than a fifth above any load seen (our threshold).
DESIGN_ASSUMED_TOLD_FRAC = 0.75


def _throttled_design_assumed(groups: list[tuple]) -> list[tuple[int, str]]:
    """Cautions for the throttled pumps and fans whose highest running load is below :data:`DESIGN_ASSUMED_TOLD_FRAC`
    of their rating. Their design (valve-open) power is then :data:`DESIGN_SHAFT_LOAD_FRAC` of the rating, an
    assumption: the flow read from the throttled power, and with it a drive's saving, rest on it (a steady light
    load reads as a deeply throttled one, where an oversized pump is as likely). (block row, caution text) per
    asset."""
    out = []
    for rows_, throttled, arr, load, weight in _throttled_groups(groups):
        rated = np.asarray(arr["rated_p_kw"], dtype=float)[throttled]
        seen = np.where(load.running[throttled] & (weight > 0), load.p_ref_kw[throttled], 0.0).max(axis=1)
        for k in np.flatnonzero((seen > 0) & (seen < DESIGN_ASSUMED_TOLD_FRAC * rated)):
            out.append((int(rows_[throttled[k]]),
                        f"throttled, highest load {100 * seen[k] / rated[k]:.0f} % of rating: its design (valve-open) "
                        f"power is taken as {100 * DESIGN_SHAFT_LOAD_FRAC:.0f} % of rating, and the flow read from "
                        "its power and a drive's saving rest on that; confirm the design point (a steady light load "
                        "may be an oversized pump rather than a throttled one)"))
    return out


def _design_shaft_kw(case, assets: pd.DataFrame, arr, existing: induction.InductionParams) -> np.ndarray:
    """Design (valve-open) shaft power of some assets [kW], (n, 1), from their profiles or duty as
    :func:`_operate_block` computes it."""
    from dataclasses import replace

    index = case_index(case)
    interval_h = float((index[1] - index[0]).total_seconds() / 3600.0) if len(index) > 1 else 1.0
    interval_rows, values, is_input, states, _ = asset_loads(replace(case, assets=assets), index)
    design = np.empty((len(assets), 1))
    for _, rows_, _, _, load in _load_groups(arr, existing, interval_rows, values, is_input, states, len(index),
                                             interval_h):
        design[rows_] = load.p_design_kw
    return design


def performance_curves(case, asset_id: str, load_frac=None) -> pd.DataFrame:
    """Efficiency, power factor and kVAr against shaft load for every option of one asset.

    Parameters
    ----------
    case : models.case.Case
    asset_id : str
    load_frac : array_like, optional
        Shaft loads of today's machine [-]; default 0.05 to 1.25.

    Returns
    -------
    pandas.DataFrame
        option_id, load_frac, shaft_p_kw, p_in_kw, q_kvar, efficiency_frac, power_factor (supply side),
        for the options that apply to the asset.
    """
    from models.options import applicability

    load_frac = np.linspace(0.05, 1.25, 49) if load_frac is None else np.asarray(load_frac, dtype=float)
    a = case.assets
    pos = np.flatnonzero(a["asset_id"].to_numpy(dtype=object) == asset_id)
    if not len(pos):
        raise ValueError(f"unknown asset '{asset_id}'")
    options = options_with_baseline(case.options)
    ok, _ = applicability(options, a.iloc[pos], case.settings.region, case.settings.purchase_date)
    ok[:, 0] = True
    arr = _take(asset_arrays(a), pos)
    existing = existing_motor(arr)
    # (each point a load the motor runs at, not an interval's mean: an on/off motor's curve is its running one)
    load = _reference_load(arr, existing, load_frac[None, :], np.zeros(1, dtype=bool), np.ones((1, len(load_frac))),
                           intervals=False)
    # the design (valve-open) power is the asset's own, from its profile or duty, as in the yearly run; the
    # loads asked for here are only where the curves are drawn (they must not move the design point)
    load.p_design_kw = _design_shaft_kw(case, a.iloc[pos].reset_index(drop=True), arr, existing)
    frames = []
    for o in np.flatnonzero(ok[0]):
        option = options.iloc[o]
        pt = _whole(_evaluate(option, arr, existing, load))
        p, q = pt.p_kw[0], pt.q_kvar[0]
        s = np.hypot(p, q)
        frames.append(pd.DataFrame({
            "option_id": option["option_id"], "load_frac": load_frac, "shaft_p_kw": pt.shaft_kw[0], "p_in_kw": p,
            "q_kvar": q, "efficiency_frac": np.where(p > 0, pt.shaft_kw[0] / np.where(p > 0, p, 1.0), np.nan),
            "power_factor": np.where(s > 0, p / np.where(s > 0, s, 1.0), np.nan)}))
    return pd.concat(frames, ignore_index=True)
