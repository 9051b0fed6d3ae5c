"""What each option is worth on the utility bill: site meters, monthly bills and attributed savings.

For every site the assets' power under today's motors, the non-motor base load and the existing
capacitor banks make the meter; the site's tariff turns it into a bill by line item and month. Each
asset-option is then priced by the bill change when only that asset changes, so demand savings count
only where the asset runs in the billing peak and reactive savings stop once the site passes the
tariff's threshold. A plan (one option per asset) is priced with all its changes together, and the
difference from the sum of the singles is reported as interaction.
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, replace

import numba
import numpy as np
import pandas as pd

from models import attribution, billing, tabulation
from models.profiles import conform
from models.site import FixedCapacitorBank, Site, SteppedCapacitorBank, add_stepped_bank_kvar, tan_phi_from_power_factor

#: Components the finance engine escalates separately, and the bill line-item categories each gathers.
COMPONENT_CATEGORIES: dict[str, tuple[str, ...]] = {
    "energy": ("energy",),
    "demand": ("demand", "ratchet", "excess", "coincident"),
    # a demand charge raised for a poor power factor is the price of the reactive power, as a kVArh charge is
    "reactive": ("reactive", "leading", "pf adjustment", "reactive demand", "pf energy"),
    "fixed": ("fixed",),
}
SAVING_COMPONENTS: tuple[str, ...] = tuple(COMPONENT_CATEGORIES)
#: Years after a change in which a ratchet can still read the months before it: the longest look-back a tariff
#: may give (36 months) in whole years.
RATCHET_YEARS: int = billing.transition_years(36)
#: Asset-option scenarios billed together, in scenario-steps: 14 scenarios of an hourly year (about
#: 10 arrays of 1 MiB live per block). Small blocks stay in the processor's cache and their temporaries
#: are reused by the allocator rather than mapped afresh for every block (benchmarks/bench_fleet.py).
SCENARIO_BLOCK_ELEMENTS = 2**17
#: Technologies whose value is mainly reactive power: they are compared with a capacitor bank.
REACTIVE_TECHNOLOGIES = ("wound_field", "capacitor")


@dataclass(frozen=True)
class SiteSetup:
    """One site's tariff, equipment and base-load profile, ready for billing."""

    site_id: str
    tariff: object
    site: Site
    base_p_kw_profile: np.ndarray | None
    #: Calendar month (1-12) at whose start a change comes into service (None: the series' first month).
    in_service_month: int | None = None


@dataclass(frozen=True)
class BillSavings:
    """Yearly bill savings of every asset-option, by component.

    Attributes
    ----------
    components : tuple of str
        :data:`SAVING_COMPONENTS`.
    saving : numpy.ndarray, shape (n_assets, n_options, n_components)
        Yearly saving on the site bill when only this asset changes to this option [currency/yr],
        taxes spread over the components in proportion.
    reactive_saving : numpy.ndarray, shape (n_assets, n_options)
        Saving from the kVAr change alone [currency/yr].
    equivalent_bank_q_kvar, equivalent_bank_cost : numpy.ndarray, shape (n_assets, n_options)
        For reactive options: the capacitor bank that buys the same reactive saving [kVAr], [currency]
        (NaN for the other options).
    baseline_bills : pandas.DataFrame
        site_id, month, line_item, quantity, unit, rate, amount: today's bills.
    ratchet_shortfall : numpy.ndarray, shape (n_assets, n_options, RATCHET_YEARS, n_components), optional
        How much less each of the first years after the change saves than ``saving`` [currency], by year
        (the first, the second, the third) and component: a demand ratchet still reads the months before
        the change (today's peaks) for its look-back, so a peak the option removes is still billed at the
        ratchet's share until it leaves the look-back (the first year alone for a look-back of up to 12
        months). Negative where the option raises the demand (the ratchet then reads today's lower peaks).
        None (the default) = 0 everywhere.
    """

    components: tuple[str, ...]
    saving: np.ndarray
    reactive_saving: np.ndarray
    equivalent_bank_q_kvar: np.ndarray
    equivalent_bank_cost: np.ndarray
    baseline_bills: pd.DataFrame
    ratchet_shortfall: np.ndarray | None = None

    @property
    def shortfall(self) -> np.ndarray:
        """:attr:`ratchet_shortfall`, zeros where none was given: (n_assets, n_options, RATCHET_YEARS, n_components)."""
        if self.ratchet_shortfall is not None:
            return self.ratchet_shortfall
        n_a, n_o, n_c = self.saving.shape
        return np.zeros((n_a, n_o, RATCHET_YEARS, n_c))

    @property
    def total(self) -> np.ndarray:
        """Total yearly saving [currency/yr], shape (n_assets, n_options)."""
        return self.saving.sum(axis=-1)


def site_setups(case, index: pd.DatetimeIndex) -> dict[str, SiteSetup]:
    """Build each site's billing set-up from the case.

    Raises
    ------
    ValueError
        When a site has no tariff (a run needs one per site).
    """
    setups = {}
    caps = case.capacitors
    for row in case.sites.itertuples(index=False):
        if row.tariff_file is None or row.tariff_file not in case.tariffs:
            raise ValueError(f"sites.csv: site '{row.site_id}' has no tariff_file; pricing the site needs its tariff")
        banks = caps[caps["site_id"] == row.site_id]
        fixed = tuple(FixedCapacitorBank(float(b.rated_q_kvar), str(b.bank_id))
                      for b in banks.itertuples(index=False) if b.control == "fixed")
        stepped = tuple(SteppedCapacitorBank(float(b.rated_q_kvar), float(b.step_q_kvar), float(b.target_power_factor),
                                             str(b.bank_id)) for b in banks.itertuples(index=False) if b.control == "stepped")
        profile = None
        if row.base_profile_id is not None and row.base_profile_id in case.profiles:
            profile = conform(case.profiles[row.base_profile_id], index)[0]
        site = Site(base_p_kw=float(row.base_p_kw) if profile is None else 0.0,
                    base_power_factor=float(row.base_power_factor), fixed_banks=fixed, stepped_banks=stepped)
        setups[row.site_id] = SiteSetup(row.site_id, case.tariffs[row.tariff_file], site, profile,
                                        getattr(case.settings, "in_service_month", None))
    return setups


def _chosen_total(x, options: np.ndarray, assets: np.ndarray) -> np.ndarray:
    """``x[options, assets].sum(axis=0)``: the chosen rows' sum over the assets (n_steps,). Per-interval
    power kept compact (:class:`models.operation.SiteIntervalStore`) adds the rows one by one in numpy's
    order (the same bits) without gathering them into one array."""
    if hasattr(x, "summed_rows"):
        return x.summed_rows(options, assets)
    return x[options, assets].sum(axis=0)


def meter_and_bills(case, op, choice: np.ndarray, setups: dict[str, SiteSetup] | None = None, threads: int = 1):
    """Site meters and bills for one choice of option per asset.

    Parameters
    ----------
    case : models.case.Case
    op : models.operation.OperatingResult
    choice : numpy.ndarray of int, shape (n_assets,)
        Position of the chosen option per asset (0 = today's motor).
    threads : int
        Sites worked at once (each site's meter and bill are its own, so the numbers do not depend on
        it); worth more than 1 when the operating result recomputes per-interval power on demand.

    Returns
    -------
    meters : dict of str -> models.site.SiteMeter
    bills : pandas.DataFrame
        site_id, month, line_item, quantity, unit, rate, amount [currency].
    """
    setups = setups or site_setups(case, op.index)

    def one_site(item):
        site_id, setup = item
        members = np.flatnonzero(op.site_ids == site_id)  # one site's assets at a time: memory of one site
        p, q = _chosen_total(op.p_kw, choice[members], members), _chosen_total(op.q_kvar, choice[members], members)
        meter = setup.site.meter_from_totals(p, q, base_p_kw_profile=setup.base_p_kw_profile)
        frame = billing.bill(setup.tariff, op.index, meter.p_kw, meter.q_kvar, interval_h=op.interval_h,
                             repeat_year=None)
        return site_id, meter, frame.assign(site_id=site_id)

    items = list(setups.items())
    if threads > 1 and len(items) > 1:
        with ThreadPoolExecutor(max_workers=min(int(threads), len(items))) as pool:
            done = list(pool.map(one_site, items))  # in the sites' order
    else:
        done = [one_site(item) for item in items]
    meters = {site_id: meter for site_id, meter, _ in done}
    frames = [frame for _, _, frame in done]
    bills = pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()
    cols = ["site_id"] + [c for c in bills.columns if c != "site_id"]
    return meters, bills[cols]


def banned_quantities(bills: pd.DataFrame) -> pd.DataFrame:
    """The quantities the bills' tariffs ban (leading kVArh in the hours a clause forbids), by site and line.

    Parameters
    ----------
    bills : pandas.DataFrame
        Bill lines with ``site_id``, ``month``, ``line_item``, ``quantity``, ``unit`` and the bill's ``flag``
        (:func:`models.billing.bill`), and optionally ``scenario``.

    Returns
    -------
    pandas.DataFrame
        One row per (scenario, site, line) with a flagged month: ``scenario`` ("" when the bills have none),
        ``site_id``, ``line_item``, ``quantity`` (summed over the flagged months), ``unit`` and ``months``
        (their number); empty when nothing banned is billed.
    """
    columns = ["scenario", "site_id", "line_item", "quantity", "unit", "months"]
    if bills is None or bills.empty or "flag" not in bills:
        return pd.DataFrame(columns=columns)
    flagged = bills[bills["flag"].fillna(False).astype(bool)]
    if flagged.empty:
        return pd.DataFrame(columns=columns)
    flagged = flagged.assign(scenario=flagged["scenario"] if "scenario" in flagged else "")
    out = flagged.groupby(["scenario", "site_id", "line_item", "unit"], sort=True).agg(
        quantity=("quantity", "sum"), months=("month", "nunique")).reset_index()
    return out[columns]


def banned_caution(line) -> str:
    """One row of :func:`banned_quantities` as a caution, in words (the run summary's, ``bill``'s and the Site
    meter page's)."""
    from models.wording import counted

    who = "With the plan in place" if line.scenario == "plan" else "Today"
    return (f"{who}, site {line.site_id} is billed {line.quantity:,.0f} {line.unit} in "
            f"{counted(int(line.months), 'month')} where its tariff bans them ({line.line_item}): the utility's "
            "rules may not allow it; switch capacitor banks off in those hours, size the reactive projects down, "
            "or ask the utility")


def _book_arrays(book: tabulation.CurveBook | None, p_block: np.ndarray) -> tuple:
    """A block's curve book as the compiled passes take it; an empty book (every row read from the
    arrays) when there is none."""
    if book is None:
        book = tabulation.CurveBook(p_block.shape[0], p_block.shape[1])
    return book.arrays()


def _changed_pairs(p_site: np.ndarray, q_site: np.ndarray, applies: np.ndarray,
                   book: tabulation.CurveBook | None = None) -> tuple[np.ndarray, np.ndarray]:
    """(asset, option) positions, asset by asset, of the options that apply and change the asset's kW or kVAr.

    An option changes an asset when the largest |difference| from today's kW, or from today's kVAr, is
    above 0 (a quantity with a NaN difference in some interval counts as unchanged, as NaN compares
    false); for finite values, when some value differs. One compiled pass over the block, the pairs
    the ``book`` holds read through it: a pair whose every value is known finite (finite tables and
    positions or a finite row of its own, today's row finite) is read only up to its first difference.
    With a book the arrays may hold today's rows only (option 0).
    """
    p_site, q_site = np.asarray(p_site, dtype=float), np.asarray(q_site, dtype=float)
    n_t = p_site.shape[2]
    changed = _changed_kernel(p_site, q_site, np.ascontiguousarray(applies, dtype=bool), _book_arrays(book, p_site),
                              np.empty(n_t), np.empty(n_t))
    js, os_ = np.nonzero(changed)
    return js, os_


@numba.njit(nogil=True, cache=True)
def _changed_kernel(p, q, applies, book, row_p, row_q):  # pragma: no cover - compiled
    """The pass of :func:`_changed_pairs`: per asset and applying option, whether its kW or kVAr differs from
    today's in some interval (the numpy rule's answer: max |difference| > 0, NaN counting as no difference),
    reading a pair the book holds through its tables and stopping at its first difference. It compares, it
    computes no new value; tested against the numpy rule."""
    n_s, n_o = applies.shape
    n_t = p.shape[2]
    out = np.zeros((n_s, n_o), dtype=np.bool_)
    table, slot, grid_row, offset, finite = book[0], book[2], book[3], book[4], book[13]
    cell_a, position_a, cell_b, position_b = book[5], book[6], book[7], book[8]
    p_base, p_rise, q_base, q_rise, own_p, own_q = book[9], book[10], book[11], book[12], book[14], book[15]
    for j in range(n_s):
        today_finite = -1  # unknown, then 0 or 1 (read once per asset, when a pair needs it)
        for o in range(1, n_o):
            if not applies[j, o]:
                continue
            k = table[o, j]
            if k >= 0 and finite[k]:
                if today_finite < 0:
                    today_finite = 1
                    for t in range(n_t):
                        if not (np.isfinite(p[0, j, t]) and np.isfinite(q[0, j, t])):
                            today_finite = 0
                            break
            if k >= 0 and finite[k] and today_finite == 1:  # every difference finite: the first one decides
                g, at = grid_row[k], offset[k]
                for t in range(n_t):  # the values tabulation._fill_pair writes
                    if slot[k] == 2:
                        v, w = own_p[g, t], own_q[g, t]
                    else:
                        if slot[k] == 0:
                            c, x = at + cell_a[g, t], position_a[g, t]
                        else:
                            c, x = at + cell_b[g, t], position_b[g, t]
                        v, w = p_base[c] + p_rise[c] * x, q_base[c] + q_rise[c] * x
                    if v != p[0, j, t] or w != q[0, j, t]:
                        out[j, o] = True
                        break
                continue
            tabulation.fill_pair(book, o, j, p, q, row_p, row_q)
            differs_p, nan_p, differs_q, nan_q = False, False, False, False
            for t in range(n_t):
                dp = row_p[t] - p[0, j, t]
                dq = row_q[t] - q[0, j, t]
                if dp != dp:
                    nan_p = True
                elif dp != 0.0:
                    differs_p = True
                if dq != dq:
                    nan_q = True
                elif dq != 0.0:
                    differs_q = True
            out[j, o] = (differs_p and not nan_p) or (differs_q and not nan_q)
    return out


def tariff_depends_on_kvar(tariff) -> bool:
    """True when a tariff's bill can change with reactive power alone.

    A bill depends on kVAr through kVArh clauses (lagging or leading), kVAr demand, kVAh energy, kVA demand,
    a power-factor adjustment of demand or a power-factor percentage of the energy charges; without any of
    them (and only then) a kVAr change saves exactly 0.
    """
    if tariff.reactive or tariff.leading or tariff.reactive_demand:
        return True
    if tariff.energy is not None and tariff.energy_power_factor:
        return True
    if tariff.energy is not None and tariff.energy.basis != "kWh":
        return True
    return any(d.basis != "kW" or d.power_factor_adjustment is not None for d in tariff.demand)


def kvar_clauses(tariff):
    """Return the tariff reduced to its clauses that can depend on kVAr, with every tax.

    Kept: kVArh clauses, kVAr demand, kVAh energy, kWh energy under a power-factor percentage (the
    percentage is of it), kVA demand and demand with a power-factor adjustment (with their ratchets), and
    the taxes (their bases then hold only these charges). Dropped: fixed charges, other kWh energy and kW
    demand without adjustment. Between two meter series with the same kW the dropped clauses are equal, and
    a tax is linear in its base, so the bill difference is the reduced tariff's bill difference (a kVAr
    change's saving costs about half a full bill to price). A power-factor percentage of all charges keeps them
    all (the whole tariff): its change is the percentage's change times every charge.
    """
    if any(c.base == "all_charges" for c in tariff.energy_power_factor):
        return tariff
    energy = tariff.energy if tariff.energy is not None and (tariff.energy.basis != "kWh" or tariff.energy_power_factor) else None
    demand = tuple(d for d in tariff.demand if d.basis != "kW" or d.power_factor_adjustment is not None)
    return replace(tariff, fixed=(), energy=energy, demand=demand, coincident=())


class _SiteBiller:
    """Prices asset-total scenarios at one site's meter under one tariff, against a calendar built once.

    The meter is :func:`models.site.meter_from_asset_totals` (base load, fixed banks, automatic banks in
    order) term by term and in the same order, so the values are the same; it is built in place and
    without the apparent power, power factor and leading flags a bill does not use. The base load's
    kVAr and the fixed banks' kVAr are computed once.
    """

    def __init__(self, setup: SiteSetup, index: pd.DatetimeIndex, interval_h: float, tariff=None):
        site = setup.site
        self.tariff = setup.tariff if tariff is None else tariff
        self.calendar = billing._calendar(self.tariff, index, interval_h)
        base_p = setup.base_p_kw_profile if setup.base_p_kw_profile is not None else site.base_p_kw
        self.base_p = np.asarray(base_p, dtype=float)
        self.base_q = self.base_p * tan_phi_from_power_factor(site.base_power_factor)
        sizes = np.asarray([b.rated_q_kvar for b in site.fixed_banks], dtype=float)
        self.fixed_q = 0.0 - np.tensordot(sizes, np.ones((sizes.size, len(index))), axes=(0, 0)) if sizes.size else None
        self.stepped = site.stepped_banks
        # the billing month a change comes into service in (read only where a ratchet reads the months before
        # it, which needs a typical year of 12 billing months)
        self.start = (billing.service_start(self.calendar, setup.in_service_month)
                      if self.calendar.n_months == 12 else 0)

    def totals(self, p_kw: np.ndarray, q_kvar: np.ndarray, dp_kw: np.ndarray | None = None,
               dq_kvar: np.ndarray | None = None) -> tuple[list[str], np.ndarray]:
        """Line-item names and amounts (S, I) [currency] of scenarios (p_kw + dp_kw, q_kvar + dq_kvar).

        A quantity without a change stays one row for every scenario (priced once by the engine).
        """
        p, q = self._meters(p_kw, q_kvar, dp_kw, dq_kvar)
        return self._priced(p, q, check_p=True, check_q=True)

    def history(self, p_kw: np.ndarray, q_kvar: np.ndarray) -> dict[str, np.ndarray]:
        """What a ratchet reads of the meter of these motors (p_kw, q_kvar) in the year after it:
        :func:`models.billing.ratchet_history` of the site meter, banks included ({} without a ratchet)."""
        if not any(d.ratchet_frac is not None for d in self.tariff.demand):
            return {}
        p, q = self._meters(p_kw, q_kvar)
        for bank in self.stepped:
            add_stepped_bank_kvar(p, q, bank.rated_q_kvar, bank.step_kvar, bank.target_power_factor)
        return billing.ratchet_history(self.tariff, self.calendar, p, q)

    def _meters(self, p_kw, q_kvar, dp_kw=None, dq_kvar=None) -> tuple[np.ndarray, np.ndarray]:
        """The site meters of the motors (p_kw + dp_kw, q_kvar + dq_kvar): base load and fixed banks added."""
        p = np.add(p_kw, dp_kw) if dp_kw is not None else np.array(p_kw, dtype=float)
        q = np.add(q_kvar, dq_kvar) if dq_kvar is not None else np.array(q_kvar, dtype=float)
        p, q = np.atleast_2d(p), np.atleast_2d(q)
        if q.shape[0] < p.shape[0]:
            q = np.array(np.broadcast_to(q, p.shape))
        p += self.base_p
        q += self.base_q
        if self.fixed_q is not None:
            q += self.fixed_q
        return p, q

    def scenario_totals(self, p0_kw: np.ndarray, q0_kvar: np.ndarray, p_block: np.ndarray, q_block: np.ndarray,
                        j: np.ndarray, o: np.ndarray, kw_changes: bool = True,
                        book: tuple | None = None) -> tuple[list[str], np.ndarray]:
        """:meth:`totals` of the scenarios "asset j[s] takes option o[s]" of a block, the same numbers.

        The changes are ``p_block[o, j] - p_block[0, j]`` and the same of ``q_block`` (with
        ``kw_changes`` False the kW stay ``p0_kw``, one row for every scenario), the rows ``[o, j]``
        read through ``book`` (:meth:`models.tabulation.CurveBook.arrays`; default the arrays
        themselves); the meters are built in one compiled pass (:func:`_scenario_meters`), term by term
        in :meth:`totals`' order.
        """
        p, q, _, finite = self.scenario_meters(p0_kw, q0_kvar, p_block, q_block, j, o, kw_changes, book)
        return self._priced(p, q, check_p=not (kw_changes and finite[0]), check_q=not finite[1])

    def scenario_meters(self, p0_kw: np.ndarray, q0_kvar: np.ndarray, p_block: np.ndarray, q_block: np.ndarray,
                        j: np.ndarray, o: np.ndarray, kw_changes: bool = True, book: tuple | None = None,
                        kvar_copy: bool = False) -> tuple:
        """The meters (p, q) :meth:`scenario_totals` prices, before the stepped banks; with ``kvar_copy`` a
        copy of q as well (the kVAr of the same scenarios for a second biller on the same site, written
        in the same pass), else None; and whether every value written to p and to q is finite."""
        if book is None:
            book = _book_arrays(None, p_block)
        n_s, n_t = len(j), len(p0_kw)
        if kw_changes:
            p = np.empty((n_s, n_t))
        else:
            p = np.array(np.atleast_2d(p0_kw), dtype=float)
            p += self.base_p
        q = np.empty((n_s, n_t))
        q_copy = np.empty((n_s, n_t)) if kvar_copy else np.empty((0, 0))
        fixed = self.fixed_q if self.fixed_q is not None else np.zeros(n_t)
        finite = _scenario_meters(p_block, q_block, np.asarray(j, dtype=np.intp), np.asarray(o, dtype=np.intp),
                                  np.asarray(p0_kw, dtype=float), np.asarray(q0_kvar, dtype=float),
                                  np.broadcast_to(self.base_p, (n_t,)), np.broadcast_to(self.base_q, (n_t,)),
                                  fixed, self.fixed_q is not None, kw_changes, p, q, q_copy, book, np.empty(n_t),
                                  np.empty(n_t))
        return p, q, q_copy if kvar_copy else None, finite

    def _priced(self, p: np.ndarray, q: np.ndarray, check_p: bool, check_q: bool,
                before: dict[str, np.ndarray] | None = None) -> tuple:
        """The stepped banks on the meters (p, q), then the bill's line items (see :meth:`totals`).

        With ``before`` (:meth:`history` of the meter before a change) a third value follows: the amounts
        of each year after the change while a ratchet still reads the meter before it (K, S, I) [currency]."""
        for bank in self.stepped:  # in place, one compiled pass (the values of q += bank.q_kvar(p, q))
            add_stepped_bank_kvar(p, q, bank.rated_q_kvar, bank.step_kvar, bank.target_power_factor)
        check_q = check_q or bool(self.stepped)
        for name, x, check in (("p_kw_2d", p, check_p), ("q_kvar_2d", q, check_q)):
            if check and not billing._all_finite(x):
                raise ValueError(f"{name} contains NaN or infinite values; fill or drop the gaps first")
        n = max(p.shape[0], q.shape[0])
        if before is None:
            names, amounts, _ = billing._block_totals(self.tariff, self.calendar, p, q, None)
            return names, np.ascontiguousarray(np.broadcast_to(amounts, (n, len(names))))
        names, amounts, _, years = billing._block_totals(self.tariff, self.calendar, p, q, None, before,
                                                         with_transition=True, start=self.start)
        return (names, np.ascontiguousarray(np.broadcast_to(amounts, (n, len(names)))),
                np.ascontiguousarray(np.broadcast_to(years, (len(years), n, len(names)))))


@numba.njit(nogil=True, cache=True)
def _scenario_meters(p_block, q_block, j, o, p0, q0, base_p, base_q, fixed_q, has_fixed, kw_changes, out_p,
                     out_q, out_q_copy, book, row_p, row_q):  # pragma: no cover - compiled
    """Site meters of scenarios "asset j[s] takes option o[s]", in one pass.

    out_p[s, t] = (p0[t] + (p_block[o, j, t] - p_block[0, j, t])) + base_p[t] (when ``kw_changes``),
    out_q[s, t] = ((q0[t] + (q_block[o, j, t] - q_block[0, j, t])) + base_q[t]) + fixed_q[t] (the last
    term when ``has_fixed``): :meth:`_SiteBiller.totals`' sums, in its order, with the rows [b, a] read
    through ``book`` (into the scratch rows ``row_p``, ``row_q``); out_q_copy[s, t] = out_q[s, t] unless
    out_q_copy has no rows. Returns whether every value written to out_p and to out_q is finite.
    """
    finite_p, finite_q = True, True
    n_t = p0.shape[0]
    copy = out_q_copy.shape[0] > 0
    for s in range(len(j)):
        a, b = j[s], o[s]
        tabulation.fill_pair(book, b, a, p_block, q_block, row_p, row_q)
        for t in range(n_t):
            if kw_changes:
                v = (p0[t] + (row_p[t] - p_block[0, a, t])) + base_p[t]
                out_p[s, t] = v
                if not np.isfinite(v):
                    finite_p = False
            w = (q0[t] + (row_q[t] - q_block[0, a, t])) + base_q[t]
            if has_fixed:
                w = w + fixed_q[t]
            out_q[s, t] = w
            if copy:
                out_q_copy[s, t] = w
            if not np.isfinite(w):
                finite_q = False
    return finite_p, finite_q


def _category_savings(names: list[str], base_amounts: np.ndarray, amounts: np.ndarray, taxes=()) -> np.ndarray:
    """Savings (S, n_components) [currency] of scenarios from their line-item amounts and the baseline's.

    Line items are gathered by category (as :func:`models.attribution.saving_by_category`) and the
    categories into :data:`SAVING_COMPONENTS`. A tax or levy is linear in its base (a rate times the
    charges it is levied on, summed over the months it applies in), so its change is attributed to each
    category of charges as rate x that category's change, with the earlier taxes' attributions for a base
    that includes them (``taxes``: the tariff's :class:`models.tariff.Tax` in bill order). This is exact
    whatever the signs of the changes. What is left of the total saving (rounding, or a tax not among
    ``taxes``) is spread in proportion to the components' magnitudes.
    """
    diff = base_amounts[None, :] - amounts
    total = base_amounts.sum() - amounts.sum(axis=1)
    category = [n.split(":", 1)[0] for n in names]
    charges = {cat: diff[:, [i for i, c in enumerate(category) if c == cat]].sum(axis=1)
               for cat in dict.fromkeys(category) if cat != "tax"}
    taxed = {cat: np.zeros(len(amounts)) for cat in charges}  # each category's taxes so far
    for tax in taxes:
        if f"tax:{tax.name}" not in names:
            continue
        base_cats = billing._TAX_BASE_CATEGORIES[tax.base]
        rate = float(tax.rate_pct) / 100.0
        levied = {cat: rate * (charges[cat] + (taxed[cat] if "tax" in base_cats else 0.0))
                  for cat in charges if cat in base_cats}
        for cat, amount in levied.items():
            taxed[cat] = taxed[cat] + amount
    out = np.zeros((len(amounts), len(SAVING_COMPONENTS)))
    for k, group in enumerate(COMPONENT_CATEGORIES.values()):
        for cat in group:
            if cat in charges:
                out[:, k] += charges[cat] + taxed[cat]
    rest = total - out.sum(axis=1)
    size = np.abs(out)
    share = np.divide(size, size.sum(axis=1, keepdims=True), out=np.full_like(out, 1.0 / out.shape[1]),
                      where=size.sum(axis=1, keepdims=True) > 1e-12)
    return out + share * rest[:, None]


def site_savings(setup: SiteSetup, index: pd.DatetimeIndex, interval_h: float, p_site, q_site, applies: np.ndarray,
                 technologies: np.ndarray, capacitor_cost_per_kvar: float, block_scenarios: int | None = None) -> dict:
    """Price every asset-option of one site by the bill change when only that asset changes.

    Parameters
    ----------
    setup : SiteSetup
        The site's tariff, banks and base load.
    index : pandas.DatetimeIndex
        Analysis index; ``interval_h`` its interval [h].
    p_site, q_site : numpy.ndarray, shape (n_options, n_site_assets, n_steps)
        Power of the site's assets under every option [kW], [kVAr] (option 0 = today's motors).
    applies : numpy.ndarray of bool, shape (n_site_assets, n_options)
    technologies : numpy.ndarray of str, shape (n_options,)
    capacitor_cost_per_kvar : float
        Installed cost of an automatic capacitor bank [currency/kVAr].
    block_scenarios : int, optional
        Asset-options billed together; default ``SCENARIO_BLOCK_ELEMENTS // n_steps`` (memory bound of
        about 10 x 8 bytes x 2**17 per block whatever the site size).

    Returns
    -------
    dict
        ``saving`` (n, n_options, n_components), ``reactive_saving``, ``equivalent_bank_q_kvar``,
        ``equivalent_bank_cost`` (n, n_options), as in :class:`BillSavings`.

    Notes
    -----
    The same prices as :func:`models.attribution.option_savings` asset by asset (each scenario row of a
    bill is priced on its own; saving_j = B(base) - B(base + delta_j), reactive_saving_j = B(base) -
    B(base + (0, delta_Q_j))), but every changed asset-option of the site is billed in blocks of
    ``block_scenarios`` rows; the reactive-only bills price only the clauses that can change with kVAr
    (:func:`kvar_clauses`) and are skipped (saving exactly 0) for a tariff that does not depend on kVAr
    (:func:`tariff_depends_on_kvar`); and the equivalent capacitor bank's saving curve, which depends
    only on the site's baseline meter, is built once per site and read for every reactive option.
    :class:`SiteSavings` does the same block of assets by block of assets.
    """
    acc = SiteSavings(setup, index, interval_h, p_site[0].sum(axis=0), q_site[0].sum(axis=0), p_site.shape[1],
                      technologies, block_scenarios)
    acc.add(np.arange(p_site.shape[1]), p_site, q_site, applies)
    return acc.result(capacitor_cost_per_kvar)


class SiteSavings:
    """Bill savings of one site's asset-options, gathered block of assets by block of assets.

    Parameters
    ----------
    setup, index, interval_h, technologies, block_scenarios
        As in :func:`site_savings`.
    p0_kw, q0_kvar : numpy.ndarray, shape (n_steps,)
        The site's totals of today's motors over all its assets [kW], [kVAr].
    n_assets : int
        Assets of the site.
    """

    def __init__(self, setup: SiteSetup, index: pd.DatetimeIndex, interval_h: float, p0_kw: np.ndarray,
                 q0_kvar: np.ndarray, n_assets: int, technologies: np.ndarray, block_scenarios: int | None = None):
        self.setup, self.index, self.interval_h = setup, index, interval_h
        self.p0, self.q0 = p0_kw, q0_kvar
        self.technologies = technologies
        n_o, n_t = len(technologies), len(index)
        self.block = int(block_scenarios) if block_scenarios else max(1, SCENARIO_BLOCK_ELEMENTS // max(n_t, 1))
        self.saving = np.zeros((n_assets, n_o, len(SAVING_COMPONENTS)))
        self.reactive = np.zeros((n_assets, n_o))
        self.pairs: list[tuple[np.ndarray, np.ndarray]] = []
        self.biller = _SiteBiller(setup, index, interval_h)
        self.base_amounts = self.biller.totals(p0_kw[None, :], q0_kvar[None, :])[1][0]
        # what a demand ratchet reads of today's meter in the first year after a change ({} without one)
        self.before = self.biller.history(p0_kw[None, :], q0_kvar[None, :]) or None
        self.shortfall = np.zeros((n_assets, n_o, RATCHET_YEARS, len(SAVING_COMPONENTS)))
        self.q_matters = tariff_depends_on_kvar(setup.tariff)
        if self.q_matters:
            self.q_biller = _SiteBiller(setup, index, interval_h, kvar_clauses(setup.tariff))
            self.q_base_total = float(self.q_biller.totals(p0_kw[None, :], q0_kvar[None, :])[1][0].sum())
            # the reactive-only bills' kW meter, the same for every scenario (read only by the bills)
            self.q_meter_p = np.array(np.atleast_2d(p0_kw), dtype=float)
            self.q_meter_p += self.q_biller.base_p

    def add(self, rows: np.ndarray, p_block: np.ndarray, q_block: np.ndarray, applies: np.ndarray,
            curves: tabulation.CurveBook | None = None) -> None:
        """Price the asset-options of a block of the site's assets (positions ``rows`` in the site).

        ``p_block``, ``q_block`` are (n_options, len(rows), n_steps) [kW], [kVAr]; ``applies`` (len(rows), n_options);
        ``curves`` the block's curve book (:attr:`models.operation.OperatingResult.curves`), if any.
        """
        p_block, q_block = np.asarray(p_block, dtype=float), np.asarray(q_block, dtype=float)
        js, os_ = _changed_pairs(p_block, q_block, applies, curves)
        book = _book_arrays(curves, p_block)
        p0, q0 = self.p0, self.q0
        for start in range(0, len(js), self.block):
            j, o = js[start:start + self.block], os_[start:start + self.block]
            # the meters once for both bills (the reactive-only bill's kVAr are the same scenarios')
            p, q, q_copy, finite = self.biller.scenario_meters(p0, q0, p_block, q_block, j, o, book=book,
                                                               kvar_copy=self.q_matters)
            priced = self.biller._priced(p, q, check_p=not finite[0], check_q=not finite[1], before=self.before)
            names, amounts = priced[0], priced[1]
            saving = _category_savings(names, self.base_amounts, amounts, self.setup.tariff.taxes)
            self.saving[rows[j], o] = saving
            if self.before is not None:
                for year, amounts_k in enumerate(priced[2][:RATCHET_YEARS]):
                    self.shortfall[rows[j], o, year] = saving - _category_savings(names, self.base_amounts, amounts_k,
                                                                                  self.setup.tariff.taxes)
            if self.q_matters:
                # the kW stay today's: one row of p for every scenario (scenario_totals with kw_changes False)
                _, q_amounts = self.q_biller._priced(self.q_meter_p, q_copy, check_p=True, check_q=not finite[1])
                self.reactive[rows[j], o] = self.q_base_total - q_amounts.sum(axis=1)
        self.pairs.append((rows[js], os_))

    def result(self, capacitor_cost_per_kvar: float) -> dict:
        """The site's arrays, with the equivalent capacitor bank of every changed reactive option."""
        n_a, n_o = self.reactive.shape
        bank_q = np.full((n_a, n_o), np.nan)
        bank_cost = np.full((n_a, n_o), np.nan)
        if self.pairs:
            js = np.concatenate([j for j, _ in self.pairs])
            os_ = np.concatenate([o for _, o in self.pairs])
            is_reactive = np.isin(self.technologies[os_], REACTIVE_TECHNOLOGIES)
            if is_reactive.any():
                j, o = js[is_reactive], os_[is_reactive]
                q_bank = attribution.equivalent_capacitor_bank_q_kvar(
                    self.setup.tariff, self.index, self.p0, self.q0, self.reactive[j, o], site=self.setup.site,
                    base_p_kw_profile=self.setup.base_p_kw_profile, interval_h=self.interval_h)
                bank_q[j, o] = q_bank
                bank_cost[j, o] = q_bank * capacitor_cost_per_kvar
        return dict(saving=self.saving, reactive_saving=self.reactive, equivalent_bank_q_kvar=bank_q,
                    equivalent_bank_cost=bank_cost, ratchet_shortfall=self.shortfall)


def bill_savings(case, op, capacitor_cost_per_kvar: float, setups: dict[str, SiteSetup] | None = None,
                 block_scenarios: int | None = None) -> BillSavings:
    """Price every asset-option by the bill change when only that asset changes.

    Parameters
    ----------
    case : models.case.Case
    op : models.operation.OperatingResult
    capacitor_cost_per_kvar : float
        Installed cost of an automatic capacitor bank [currency/kVAr], for the equivalent-bank comparison.
    block_scenarios : int, optional
        Asset-options billed together (see :func:`site_savings`).

    Returns
    -------
    BillSavings
    """
    setups = setups or site_setups(case, op.index)
    n_a, n_o = len(op.asset_ids), len(op.option_ids)
    saving = np.zeros((n_a, n_o, len(SAVING_COMPONENTS)))
    shortfall = np.zeros((n_a, n_o, RATCHET_YEARS, len(SAVING_COMPONENTS)))
    reactive = np.zeros((n_a, n_o))
    bank_q = np.full((n_a, n_o), np.nan)
    bank_cost = np.full((n_a, n_o), np.nan)
    for site_id, setup in setups.items():
        members = np.flatnonzero(op.site_ids == site_id)
        if not len(members):
            continue
        part = site_savings(setup, op.index, op.interval_h, op.p_kw[:, members], op.q_kvar[:, members],
                            op.applies[members], op.technologies, capacitor_cost_per_kvar, block_scenarios)
        saving[members] = part["saving"]
        shortfall[members] = part["ratchet_shortfall"]
        reactive[members] = part["reactive_saving"]
        bank_q[members] = part["equivalent_bank_q_kvar"]
        bank_cost[members] = part["equivalent_bank_cost"]
    _, baseline_bills = meter_and_bills(case, op, np.zeros(n_a, dtype=int), setups)
    return BillSavings(SAVING_COMPONENTS, saving, reactive, bank_q, bank_cost, baseline_bills, shortfall)


def plan_bill_savings(case, op, choice: np.ndarray, capacitor_cost_per_kvar: float | None = None,
                      setups: dict[str, SiteSetup] | None = None) -> dict[str, attribution.PlanSavings]:
    """Price a plan (one option per asset) per site, with the interaction against the single savings."""
    setups = setups or site_setups(case, op.index)
    out = {}
    for site_id, setup in setups.items():
        members = np.flatnonzero(op.site_ids == site_id)
        chosen = members[choice[members] > 0]
        if not len(chosen):
            continue
        p0, q0 = op.p_kw[0, members], op.q_kvar[0, members]
        dp = op.p_kw[choice[chosen], chosen] - op.p_kw[0, chosen]
        dq = op.q_kvar[choice[chosen], chosen] - op.q_kvar[0, chosen]
        names = [f"{op.asset_ids[j]}:{op.option_ids[choice[j]]}" for j in chosen]
        out[site_id] = attribution.plan_savings(setup.tariff, op.index, p0, q0, dp, dq, site=setup.site, option_names=names,
                                                asset_ids=list(op.asset_ids[chosen]),
                                                capacitor_cost_per_kvar=capacitor_cost_per_kvar,
                                                base_p_kw_profile=setup.base_p_kw_profile, interval_h=op.interval_h)
    return out


def monthly_bill_table(bills: pd.DataFrame, site_id: str) -> pd.DataFrame:
    """Pivot one site's bills to months x line items (plus a total column) [currency].

    The line items keep the bill's own order (a tax after the items it is levied on), not the alphabet's.
    """
    frame = bills[bills["site_id"] == site_id]
    table = frame.pivot_table(index="month", columns="line_item", values="amount", aggfunc="sum", sort=True).fillna(0.0)
    order = [item for item in pd.unique(frame["line_item"]) if item in table.columns]
    table = table[order]
    table.columns.name = "line_item"
    table["total"] = table.sum(axis=1)
    return table


def reactive_value_curve(case, op, asset_id: str, capacitor_cost_per_kvar: float, n_points: int = 11,
                         max_q_kvar: float | None = None, setups: dict[str, SiteSetup] | None = None) -> pd.DataFrame:
    """Yearly bill saving as leading kVAr supplied on an asset's site grows, beside a capacitor bank's cost.

    Parameters
    ----------
    case, op
        The case and its operating result.
    asset_id : str
        The asset whose site is swept (typically a wound-field synchronous candidate).
    capacitor_cost_per_kvar : float
        Installed cost of a capacitor bank [currency/kVAr].
    n_points : int
        Number of sweep points from 0 to ``max_q_kvar``.
    max_q_kvar : float, optional
        Largest leading kVAr [kVAr]; default the asset's rated kVA at 0.9 leading (its reactive capability).

    Returns
    -------
    pandas.DataFrame
        supplied_q_kvar [kVAr], saving [currency/yr], marginal_saving_per_kvar [currency/kVAr/yr],
        capacitor_bank_cost [currency], leading_kvarh [kVArh], flags.

    Notes
    -----
    The saving flattens once the site passes the tariff's threshold (and falls where leading kVArh is
    charged): past that point extra kVAr is worth nothing, which is why a capacitor bank sized to the
    threshold is the yardstick for any reactive-power claim.
    """
    setups = setups or site_setups(case, op.index)
    j = op.asset_position(asset_id)
    site_id = op.site_ids[j]
    setup = setups[site_id]
    members = np.flatnonzero(op.site_ids == site_id)
    if max_q_kvar is None:
        # up to the larger of the asset's capability at 0.9 leading and 1.2 x the site's peak lagging kVAr
        # before correction, so the sweep reaches the point where the value saturates
        rated = float(case.assets["rated_p_kw"].iloc[j])
        capability = rated / 0.97 / 0.9 * np.sin(np.arccos(0.9))
        base_q = setup.site.base_p_kw * np.tan(np.arccos(setup.site.base_power_factor))
        if setup.base_p_kw_profile is not None:
            base_q = np.asarray(setup.base_p_kw_profile) * np.tan(np.arccos(setup.site.base_power_factor))
        site_q = op.q_kvar[0, members].sum(axis=0) + base_q
        max_q_kvar = float(max(capability, 1.2 * np.max(site_q)))
    supplied = np.linspace(0.0, max_q_kvar, n_points)
    frame = attribution.reactive_saving_sweep(setup.tariff, op.index, op.p_kw[0, members], op.q_kvar[0, members],
                                              supplied, site=setup.site, base_p_kw_profile=setup.base_p_kw_profile,
                                              interval_h=op.interval_h)
    out = pd.DataFrame({"supplied_q_kvar": supplied, "saving": frame["saving"].to_numpy(dtype=float)})
    out["marginal_saving_per_kvar"] = np.concatenate([[np.nan], np.diff(out["saving"]) / np.diff(supplied)])
    out["capacitor_bank_cost"] = supplied * capacitor_cost_per_kvar
    out["leading_kvarh"] = frame["leading_kvarh"].to_numpy(dtype=float)
    out["flags"] = frame["flags"].to_numpy(dtype=object)
    return out
