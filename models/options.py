"""The options catalogue: candidate technologies per motor, where each applies, and what each costs.

A catalogue row is one option (keep, rewind, new induction IE3/IE4, line-start PM with or without a speed
remedy, PM or reluctance motor on a drive, add a drive, wound-field synchronous, motor-terminal capacitor)
with a cost model by rating: each capital component is ``coef x rated_p_kw ** exp``, then installation,
engineering and contingency as shares. Prices in the default catalogue are illustrative only.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from models.drives import DEFAULT_FRONT_END

#: Currency and year of the shipped catalogue's illustrative prices (data/defaults/options.csv, its first line).
ILLUSTRATIVE_PRICES_CURRENCY = "EUR"
ILLUSTRATIVE_PRICES_YEAR = 2025
#: Relative margin below an option's smallest rating within which a motor still counts as in range: a rating
#: given in hp converts at 0.7457 kW/hp (1 hp = 0.7457 kW), 0.6 % below the standard kW equivalent that
#: catalogues list (1 hp as 0.75 kW).
RATING_MARGIN_FRAC = 0.006
#: Capital components, in the order they are reported.
CAPEX_COMPONENTS: tuple[str, ...] = (
    "equipment", "drive", "remedy", "capacitor", "installation", "engineering", "contingency",
)
#: Default efficiency class of new machines by technology when the catalogue leaves it blank.
DEFAULT_CLASS: dict[str, str] = {
    "induction": "IE3", "line_start_pm": "IE4", "pm_drive": "IE5", "reluctance_drive": "IE4", "wound_field": "",
}
#: Technologies that put a drive between the supply and the motor.
DRIVE_TECHNOLOGIES = ("pm_drive", "reluctance_drive", "add_drive")
#: Classes of the asset register's ``hazardous_area`` (IEC 60079-10 gas and dust zones, North American divisions),
#: and "none"; a catalogue row's ``hazardous_areas`` lists those its equipment is certified for.
HAZARDOUS_AREAS: tuple[str, ...] = ("none", "zone_0", "zone_1", "zone_2", "zone_20", "zone_21", "zone_22", "division_1",
                                    "division_2")
#: The classes equipment certified for a class may also serve: a zone 1 certificate covers zone 2, zone 21 covers
#: 22, division 1 covers 2 (IEC 60079-14, NEC 500/505; cited from memory).
HAZARDOUS_AREA_COVERS: dict[str, tuple[str, ...]] = {
    "zone_0": ("zone_0", "zone_1", "zone_2"), "zone_1": ("zone_1", "zone_2"), "zone_2": ("zone_2",),
    "zone_20": ("zone_20", "zone_21", "zone_22"), "zone_21": ("zone_21", "zone_22"), "zone_22": ("zone_22",),
    "division_1": ("division_1", "division_2"), "division_2": ("division_2",), "none": ("none",),
}


def _area_synonyms() -> dict[str, str]:
    """How registers write the classes (normalised: small letters, spaces, hyphens and slashes as ``_``)."""
    out = {"no": "none", "safe": "none", "safe_area": "none", "non_hazardous": "none", "unclassified": "none",
           "n/a": "none", "not_classified": "none"}
    for z in ("0", "1", "2", "20", "21", "22"):
        for form in (f"zone{z}", f"atex_zone_{z}", f"ex_zone_{z}", f"class_i_zone_{z}", f"class_i,_zone_{z}",
                     f"class_1_zone_{z}", f"iec_zone_{z}"):
            out[form] = f"zone_{z}"
    for d in ("1", "2"):
        for cls in ("class_i", "class_1", "class_ii", "class_2", "class_iii", "class_3"):
            for sep in ("_", ",_"):
                for div in ("division_", "div_", "div"):
                    out[f"{cls}{sep}{div}{d}"] = f"division_{d}"
        for form in (f"div_{d}", f"div{d}", f"c1d{d}", f"c2d{d}", f"cid{d}"):
            out[form] = f"division_{d}"
    return out


#: Register spellings of the hazardous-area classes (the asset register's ``hazardous_area`` and the catalogue's
#: ``hazardous_areas`` read the same words).
HAZARDOUS_AREA_SYNONYMS: dict[str, str] = _area_synonyms()


def hazardous_area_class(text: object) -> str | None:
    """A written hazardous-area class as one of :data:`HAZARDOUS_AREAS`, or None when it is none of them.

    Examples
    --------
    >>> [hazardous_area_class(x) for x in ("Zone 1", "zone2", "Class I, Division 2", "C1D2", "safe", "zone 9")]
    ['zone_1', 'zone_2', 'division_2', 'division_2', 'none', None]
    """
    from models.case import _normalise_category  # (the register's reading of a category; case imports this module)

    words = _normalise_category(text)
    words = HAZARDOUS_AREA_SYNONYMS.get(words, words)
    return words if words in HAZARDOUS_AREAS else None
#: New machines that run on the line (no drive of their own).
LINE_FED_NEW_TECHNOLOGIES = ("induction", "line_start_pm", "wound_field")
#: Technologies that replace the machine (and so change its speed, losses and power factor).
NEW_MACHINE_TECHNOLOGIES = ("induction", "line_start_pm", "pm_drive", "reluctance_drive", "wound_field")
#: Plain names of the option technologies and speed remedies, for the reader of a page or a report.
TECHNOLOGY_NAMES = {"existing": "today's motor", "rewind": "rewind", "induction": "new induction motor",
                    "line_start_pm": "line-start PM motor", "pm_drive": "PM motor on a drive",
                    "reluctance_drive": "synchronous-reluctance motor on a drive",
                    "add_drive": "drive added to today's motor", "wound_field": "wound-field synchronous motor",
                    "capacitor": "terminal capacitor"}
SPEED_REMEDY_NAMES = {"none": "none (the load follows the speed)", "trim_or_pulley": "impeller trim or pulley",
                      "speed_control": "set by a drive (held, or lowered to the duty)"}


def technology_name(technology: str) -> str:
    """A technology as the reader sees it (an unknown one with its underscores as spaces)."""
    return TECHNOLOGY_NAMES.get(str(technology), str(technology).replace("_", " "))


def speed_remedy_name(remedy: str) -> str:
    """A speed remedy as the reader sees it."""
    return SPEED_REMEDY_NAMES.get(str(remedy), str(remedy).replace("_", " "))


def check_options(checker) -> pd.DataFrame:
    """Type an options table with its schema checker, apply defaults and cross-check it.

    Parameters
    ----------
    checker : models.case._TableChecker
        Checker holding the raw options table; its problem list receives every problem found.

    Returns
    -------
    pandas.DataFrame
        One row per option, every schema column filled.
    """
    frame = checker.run()
    _duplicate_ids(checker, frame)
    schema = checker.schema
    for name, spec in schema.iterrows():
        default = spec["default"]
        if spec["dtype"] in ("float", "int") and default not in ("", None):
            try:
                frame[name] = frame[name].fillna(float(default))
            except ValueError:
                pass
    frame["label"] = frame["label"].where(frame["label"].notna(), frame["option_id"])
    tech = frame["technology"].to_numpy(dtype=object)
    default_class = np.array([DEFAULT_CLASS.get(t, "") if t is not None else "" for t in tech], dtype=object)
    frame["efficiency_class"] = frame["efficiency_class"].where(frame["efficiency_class"].notna(), default_class)
    frame["speed_remedy"] = frame["speed_remedy"].fillna("none")
    frame["wfsm_mode"] = frame["wfsm_mode"].fillna("power_factor")
    if "drive_front_end" in frame:
        given = frame["drive_front_end"].notna().to_numpy()
        for i in np.flatnonzero(given & ~np.isin(frame["technology"].to_numpy(dtype=object), DRIVE_TECHNOLOGIES)):
            checker.warn(i, "drive_front_end", frame["drive_front_end"].iloc[i],
                         f"a {technology_name(frame['technology'].iloc[i])} has no drive of its own: the front end is not read",
                         "give a front end on pm_drive, reluctance_drive and add_drive rows only")
        frame["drive_front_end"] = frame["drive_front_end"].fillna(DEFAULT_FRONT_END)
    else:
        frame["drive_front_end"] = DEFAULT_FRONT_END
    frame["applications"] = frame["applications"].fillna("")
    if "hazardous_areas" in frame:  # written as the register writes them ("Zone 1 | Zone 2"), kept as classes
        frame["hazardous_areas"] = frame["hazardous_areas"].fillna("")
        read = []
        for i, areas in enumerate(frame["hazardous_areas"]):
            parts = [x.strip() for x in str(areas).split("|") if x.strip()]
            classes = [hazardous_area_class(x) for x in parts]
            unknown = [x for x, c in zip(parts, classes) if c is None]
            if unknown:
                checker.err(i, "hazardous_areas", areas, f"unknown hazardous-area {'class' if len(unknown) == 1 else 'classes'}: "
                            f"{', '.join(unknown)}", f"use {', '.join(HAZARDOUS_AREAS)} separated by |")
            read.append("|".join(c for c in classes if c is not None))
        frame["hazardous_areas"] = read
    frame["illustrative"] = frame["illustrative"].fillna(False)
    lo, hi = frame["min_rated_p_kw"].to_numpy(), frame["max_rated_p_kw"].to_numpy()
    for i in np.flatnonzero(lo > hi):
        checker.err(i, "min_rated_p_kw", lo[i], "min_rated_p_kw is above max_rated_p_kw")
    known_apps = {"pump", "fan", "compressor", "conveyor", "crusher", "mixer", "other"}
    for i, apps in enumerate(frame["applications"]):
        unknown = [a for a in str(apps).split("|") if a and a not in known_apps]
        if unknown:
            checker.err(i, "applications", apps,
                        f"unknown {'application' if len(unknown) == 1 else 'applications'}: {', '.join(unknown)}",
                        f"use {', '.join(sorted(known_apps))} separated by |")
    for i in np.flatnonzero((tech == "induction") & ~frame["efficiency_class"].isin(["IE2", "IE3", "IE4", "IE5"]).to_numpy()):
        checker.err(i, "efficiency_class", frame["efficiency_class"].iloc[i], "a new induction motor needs an efficiency class")
    line_fed = np.isin(tech, LINE_FED_NEW_TECHNOLOGIES) & (frame["speed_remedy"] == "speed_control").to_numpy()
    for i in np.flatnonzero(line_fed):
        checker.err(i, "speed_remedy", "speed_control",
                    f"a {technology_name(tech[i])} runs on the line: it has no drive to set its speed",
                    "use trim_or_pulley (the driven machine is matched to the new speed) or none (the load follows "
                    "the speed); for speed control choose a drive technology (pm_drive, reluctance_drive, add_drive). "
                    "A motor whose drive is already fitted keeps it, whatever the remedy")
    for i in np.flatnonzero(np.isin(tech, DRIVE_TECHNOLOGIES) & (frame["drive_cost_coef"].to_numpy() <= 0)):
        checker.warn(i, "drive_cost_coef", frame["drive_cost_coef"].iloc[i], "a drive option with no drive cost")
    for i in np.flatnonzero((tech == "capacitor") & (frame["capacitor_cost_per_kvar"].to_numpy() <= 0)):
        checker.warn(i, "capacitor_cost_per_kvar", frame["capacitor_cost_per_kvar"].iloc[i],
                     "a capacitor option with no cost per kVAr")
    if len(frame) and "existing" not in set(tech):
        checker.warn(None, "technology", None, "the catalogue has no 'existing' (keep as is) option: today's motor "
                     "takes the shipped catalogue's keep row (its maintenance per kW and year, its life)",
                     "add a keep row to set today's motor's maintenance and life yourself")
    return frame


def _duplicate_ids(checker, frame: pd.DataFrame) -> None:
    seen: dict[object, int] = {}
    folded: dict[str, tuple[object, int]] = {}  # (ids differing only in capitals are told apart, as asset ids are)
    for i, value in enumerate(frame["option_id"]):
        if value is None:
            continue
        if "/" in str(value):  # a project is named "asset/option": the option's part must hold no "/"
            checker.err(i, "option_id", value, "an option_id must not contain '/'",
                        "the results name a project 'asset_id/option_id'; use '-' or '_' instead")
        if value in seen:
            checker.err(i, "option_id", value, f"duplicate option_id (first seen on row {seen[value]})")
        else:
            seen[value] = int(checker.rows[i])
            other = folded.setdefault(str(value).lower(), (value, int(checker.rows[i])))
            if other[0] != value:
                checker.warn(i, "option_id", value, f"differs only in capitals from '{other[0]}' (row {other[1]})",
                             "give option ids that differ in more than capitals: a reader takes them for one")


@dataclass(frozen=True)
class CapitalCost:
    """Capital cost of every option for every asset, by component.

    Attributes
    ----------
    components : tuple of str
        Component names (:data:`CAPEX_COMPONENTS`).
    amount : numpy.ndarray
        Cost [currency], shape (n_assets, n_options, n_components).
    """

    components: tuple[str, ...]
    amount: np.ndarray

    @property
    def total(self) -> np.ndarray:
        """Total capital [currency], shape (n_assets, n_options)."""
        return self.amount.sum(axis=-1)


def capital_cost(options: pd.DataFrame, rated_p_kw, capacitor_q_kvar=None) -> CapitalCost:
    """Return the capital cost of each option for each motor, by component.

    Parameters
    ----------
    options : pandas.DataFrame
        Checked options catalogue (n_options rows).
    rated_p_kw : array_like
        Motor ratings [kW], shape (n_assets,).
    capacitor_q_kvar : array_like, optional
        Capacitor size per motor and option [kVAr], shape (n_assets, n_options); zero when omitted.

    Returns
    -------
    CapitalCost
        Costs [currency] by component.

    Notes
    -----
    Component c of option o for a motor of rating P: ``coef_c,o * P ** exp_c,o``; capacitor: kVAr x cost
    per kVAr; installation and engineering: shares of the sum of those; contingency: a share of all.

    Examples
    --------
    >>> opts = pd.DataFrame({"equipment_cost_coef": [100.0], "equipment_cost_exp": [1.0], "drive_cost_coef": [0.0],
    ...     "drive_cost_exp": [1.0], "remedy_cost_coef": [0.0], "remedy_cost_exp": [1.0], "capacitor_cost_per_kvar": [0.0],
    ...     "installation_frac": [0.2], "engineering_frac": [0.0], "contingency_frac": [0.1]})
    >>> float(capital_cost(opts, [10.0]).total[0, 0])
    1320.0
    """
    p = np.asarray(rated_p_kw, dtype=float)[:, None]
    col = lambda name: options[name].to_numpy(dtype=float)[None, :]  # noqa: E731
    equipment = col("equipment_cost_coef") * p ** col("equipment_cost_exp")
    drive = col("drive_cost_coef") * p ** col("drive_cost_exp")
    remedy = col("remedy_cost_coef") * p ** col("remedy_cost_exp")
    q = np.zeros_like(equipment) if capacitor_q_kvar is None else np.asarray(capacitor_q_kvar, dtype=float)
    capacitor = q * col("capacitor_cost_per_kvar")
    hardware = equipment + drive + remedy + capacitor
    installation = hardware * col("installation_frac")
    engineering = hardware * col("engineering_frac")
    contingency = (hardware + installation + engineering) * col("contingency_frac")
    amount = np.stack([equipment, drive, remedy, capacitor, installation, engineering, contingency], axis=-1)
    return CapitalCost(CAPEX_COMPONENTS, amount)


def applicability(options: pd.DataFrame, assets: pd.DataFrame,
                  region: str | None = None, on_date: str | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Say which options apply to which motors, and why not where they do not.

    Parameters
    ----------
    options : pandas.DataFrame
        Checked options catalogue.
    assets : pandas.DataFrame
        Checked asset register (columns rated_p_kw, application, load_type, speed_control, machine_type, and
        poles with ``region``).
    region : str, optional
        The case's region (:func:`models.regulations.minimum_class`): a new induction motor below the
        class the region's rules require for the motor's size and poles cannot be bought, so it does not
        apply (default: no regional rule).
    on_date : str, optional
        ISO date the new motors are bought: the rules in force then apply (default today).

    Returns
    -------
    applies : numpy.ndarray of bool, shape (n_assets, n_options)
    reason : numpy.ndarray of str, shape (n_assets, n_options)
        Empty where the option applies; otherwise the first rule that excludes it.

    Notes
    -----
    Rules: rating within the option's range; a catalogue row that lists ``hazardous_areas`` only for a motor in
    one of them (or in none); application in its list; a drive cannot be added where one
    is already fitted, nor to a constant-torque load at fixed speed (it would add losses); a line-start PM
    motor is not offered where a drive already controls the speed; rewinds and terminal capacitors apply
    to induction motors only, and a rewind not where one more would leave no credible efficiency, and capacitors never to a motor fed by a drive (capacitors on a drive output
    are forbidden); with a region, a new induction motor of a class below the region's minimum for the
    motor's size and poles is not offered.
    """
    n_a, n_o = len(assets), len(options)
    p = assets["rated_p_kw"].to_numpy(dtype=float)[:, None]
    app = assets["application"].to_numpy(dtype=object)[:, None]
    load_type = assets["load_type"].to_numpy(dtype=object)[:, None]
    control = assets["speed_control"].to_numpy(dtype=object)[:, None]
    machine = assets["machine_type"].to_numpy(dtype=object)[:, None]
    tech = options["technology"].to_numpy(dtype=object)[None, :]
    reason = np.full((n_a, n_o), "", dtype=object)

    def exclude(mask: np.ndarray, why: str) -> None:
        mask = np.broadcast_to(mask, (n_a, n_o))
        reason[(reason == "") & mask] = why

    exclude(p < options["min_rated_p_kw"].to_numpy(dtype=float)[None, :] * (1.0 - RATING_MARGIN_FRAC) - 1e-9,
            "rating below the option's range")
    exclude(p > options["max_rated_p_kw"].to_numpy(dtype=float)[None, :] + 1e-9, "rating above the option's range")
    if "hazardous_area" in assets and "hazardous_areas" in options:  # a catalogue row certified for some areas only
        area = assets["hazardous_area"].fillna("none").to_numpy(dtype=object)
        listed = [{served for c in filter(None, str(x).split("|")) for served in HAZARDOUS_AREA_COVERS.get(c, (c,))}
                  for x in options["hazardous_areas"].fillna("")]  # a zone 1 certificate serves zone 2 too
        outside = np.array([[bool(allowed) and a_ != "none" and a_ not in allowed for allowed in listed] for a_ in area],
                           dtype=bool).reshape(n_a, n_o)
        for i, j in zip(*np.nonzero(outside)):
            if reason[i, j] == "":
                reason[i, j] = f"not certified for its hazardous area ({area[i].replace('_', ' ')})"
    apps = [set(filter(None, str(a).split("|"))) for a in options["applications"]]
    app_ok = np.array([[not allowed or a in allowed for allowed in apps] for a in app[:, 0]], dtype=bool).reshape(n_a, n_o)
    exclude(~app_ok, "not offered for this application")
    exclude((tech == "add_drive") & (control == "drive"), "a drive is already fitted")
    exclude((tech == "add_drive") & (load_type == "constant_torque") & np.isin(control, ["fixed", "on_off"]),
            "a drive on a fixed-speed constant-torque load only adds losses")
    exclude((tech == "line_start_pm") & (control == "drive"), "speed is drive-controlled: a PM motor on the drive fits better")
    exclude((tech == "wound_field") & (control == "drive"),
            "speed is drive-controlled: a wound-field machine on the line would lose the speed control")
    exclude(np.isin(tech, ["rewind", "capacitor"]) & (machine != "induction"), "applies to induction motors only")
    if "rated_efficiency_pct" in assets and "rewind_count" in assets:  # one more rewind must leave a credible motor
        from models.induction import DEFAULT_REWIND_LOSS_PCT_POINTS, MIN_REWOUND_EFFICIENCY_FRAC

        per_rewind = (assets["rewind_loss_pct_points"].to_numpy(dtype=float) if "rewind_loss_pct_points" in assets
                      else np.full(n_a, DEFAULT_REWIND_LOSS_PCT_POINTS))
        after = (assets["rated_efficiency_pct"].to_numpy(dtype=float)
                 - (assets["rewind_count"].to_numpy(dtype=float) + 1.0) * per_rewind) / 100.0
        with np.errstate(invalid="ignore"):
            worn = ~(after > MIN_REWOUND_EFFICIENCY_FRAC)
        exclude((tech == "rewind") & (worn & np.isfinite(after))[:, None],
                "another rewind would leave no credible efficiency: replace the motor")
    exclude((tech == "capacitor") & (control == "drive"), "never fit capacitors on a drive output")
    if region is not None and n_a and (tech == "induction").any():
        from models.regulations import class_rank, minimum_class

        volts = assets["rated_v_v"].to_numpy(dtype=float) if "rated_v_v" in assets else None
        required = minimum_class(region, p[:, 0], assets["poles"].to_numpy(dtype=float), on_date, volts)
        offered = class_rank(options["efficiency_class"].to_numpy(dtype=object))[None, :]
        below = (tech == "induction") & (offered < class_rank(required)[:, None])
        for cls in sorted(set(required[below.any(axis=1)])):
            exclude(below & (required[:, None] == cls), f"below the regional minimum for new motors of this size ({cls})")
    return reason == "", reason
