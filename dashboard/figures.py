"""Figure builders: small tables in, :class:`plotly.graph_objects.Figure` out.

Every function here is pure: it takes the frames that :mod:`dashboard.services` prepares and the
display units, and returns a figure. None of them reads files, calls the engine or keeps state. Axis
titles carry their units in square brackets; money is in the case currency.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import plotly.graph_objects as go
import plotly.io as pio
from plotly.subplots import make_subplots

#: Neutral palette of the dashboard (our own choice).
INK = "#26313d"
MUTED = "#6a7582"
#: Hatching drawn over coloured bars (white, a little see-through, so the bar colour shows beneath).
HATCH = "rgba(255, 255, 255, 0.8)"
GRID = "#e4e8ed"
BEFORE = "#9aa4ae"
AFTER = "#237a87"
GAIN = "#237a87"
COST = "#c27a3a"
BUDGET = "#7c4f8f"
#: Today's motor in slate grey, then the CARTOColors "Safe" qualitative palette (plotly.colors.qualitative.Safe,
#: made to stay apart for colour-vision deficiencies) without its grey: eleven options told apart at a glance.
OPTION_COLOURS = ("#5b6b7a", "#88ccee", "#cc6677", "#ddcc77", "#117733", "#332288", "#aa4499", "#44aa99",
                  "#999933", "#882255", "#661100")
#: Colours of life-cycle cost components.
LCC_COLOURS = {"capital": "#4e6a86", "residual": "#a9bfcf", "running": "#c27a3a", "maintenance": "#6a8d4f",
               "tax": "#8a7aa8"}
#: Colours of bill line-item categories.
BILL_COLOURS = {"energy": "#4e6a86", "demand": "#c27a3a", "ratchet": "#e0a96d", "excess": "#a65d1f",
                "coincident": "#7d4f2a",
                "pf adjustment": "#b35b52", "pf energy": "#d9928a", "reactive demand": "#5e4a7a", "reactive": "#8b6aa6",
                "leading": "#c5a3d9", "fixed": "#9aa4ae", "tax": "#6a8d4f"}


def _light_template() -> go.layout.Template:
    """The light plotly template cut to the layout and the trace types drawn here.

    The full template carries defaults for every trace type, and copying it into each figure costs more
    than drawing the figure; the cut keeps what these charts show and is copied in a fraction of the time.
    """
    full = pio.templates["plotly_white"]
    data = {kind: getattr(full.data, kind) for kind in ("bar", "scatter", "histogram")}
    keep = ("autotypenumbers", "colorway", "font", "hovermode", "hoverlabel", "paper_bgcolor", "plot_bgcolor", "xaxis",
            "yaxis", "shapedefaults", "annotationdefaults", "title")
    layout = {key: value for key, value in full.layout.to_plotly_json().items() if key in keep}
    return go.layout.Template(layout=layout, data=data)


LIGHT = _light_template()


def _style(fig: go.Figure, title: str = "", height: int = 380, legend_below: bool = False) -> go.Figure:
    if legend_below:
        legend = dict(orientation="h", yanchor="top", y=-0.22, xanchor="left", x=0.0, bgcolor="rgba(0,0,0,0)")
    else:
        legend = dict(orientation="h", yanchor="bottom", y=1.0, xanchor="right", x=1.0, bgcolor="rgba(0,0,0,0)")
    fig.update_layout(
        template=LIGHT, height=height,
        margin=dict(l=64, r=24, t=48 if title else 24, b=150 if legend_below else 56),
        title=dict(text=title, x=0.0, xanchor="left", font=dict(size=15, color=INK)),
        font=dict(family="system-ui, -apple-system, 'Segoe UI', sans-serif", size=12, color=INK),
        legend=legend,
        hoverlabel=dict(bgcolor="white"), paper_bgcolor="white", plot_bgcolor="white",
    )
    fig.update_xaxes(gridcolor=GRID, zerolinecolor="#c9d0d8", linecolor="#c9d0d8")
    fig.update_yaxes(gridcolor=GRID, zerolinecolor="#c9d0d8", linecolor="#c9d0d8")
    return fig


#: Longest line of a message figure's text [characters]: about 420 px at its 14 px font, so a message stays whole
#: in a half-width panel of a 1024 px window (one long line was cut at both ends).
MESSAGE_LINE_CHARS = 60
#: Height of one line of a message figure's text [px] (14 px font).
MESSAGE_LINE_PX = 20


def message_figure(text: str, height: int = 260) -> go.Figure:
    """An empty figure that says why there is nothing to draw.

    Parameters
    ----------
    text : str
        The message; broken at spaces into lines of at most :data:`MESSAGE_LINE_CHARS` characters (``<br>``
        between them, a ``<br>`` of its own kept), so no part of it runs past the panel's edges.
    height : int
        Height of the figure [px]; raised when the lines need more.

    Returns
    -------
    plotly.graph_objects.Figure
        No traces, one centred annotation, and no axis, grid line or zero line drawn.
    """
    lines = wrap_label(str(text), MESSAGE_LINE_CHARS)
    fig = go.Figure()
    fig.add_annotation(text=lines, x=0.5, y=0.5, xref="paper", yref="paper", showarrow=False, align="center",
                       font=dict(size=14, color=MUTED))
    hidden = dict(visible=False, showgrid=False, zeroline=False, showline=False, showticklabels=False)
    fig.update_xaxes(**hidden)
    fig.update_yaxes(**hidden)
    _style(fig, height=max(int(height), 48 + MESSAGE_LINE_PX * (lines.count("<br>") + 2)))
    # no axes to make room for: the text is centred on the whole panel, with room to either side
    fig.update_layout(margin=dict(l=24, r=24, t=24, b=24))
    return fig


def option_colour_map(keys) -> dict[str, str]:
    """One colour per option, stable in the order given.

    Parameters
    ----------
    keys : iterable of str
        Option ids (or labels). Give a page the case's whole option list (today's motor first,
        :func:`dashboard.services.option_colour_keys`) and pass the one map to each of its charts: an
        option then keeps its colour on a chart that leaves others out.
    """
    return {key: OPTION_COLOURS[i % len(OPTION_COLOURS)] for i, key in enumerate(dict.fromkeys(keys))}


# ---------------------------------------------------------------------------------------------------
# Fleet
# ---------------------------------------------------------------------------------------------------
#: Bars of the abatement curve narrower than this share of the tonnes avoided do not set its axis on a side (above
#: or below zero) where wider bars are (see :func:`abatement_curve`).
ABATEMENT_VISIBLE_SHARE = 0.002
#: The abatement curve's title: which option of each asset its bar is (see :func:`abatement_curve`).
ABATEMENT_TITLE = "Abatement cost curve (below zero: saves money)"
#: What the bars are, under the title (a line of its own: the whole sentence is cut in a narrow window).
ABATEMENT_SUBTITLE = "each asset's highest-NPV option that avoids CO2"
#: The legend's names of the two shades of the abatement bars.
ABATEMENT_SHADES = {GAIN: "below zero: saves money", COST: "above zero: costs money"}


def abatement_curve(abatement: pd.DataFrame, currency: str) -> go.Figure:
    """Marginal abatement cost curve: bar width = tonnes CO2 avoided per year, height = cost per tonne.

    Parameters
    ----------
    abatement : pandas.DataFrame
        project_id, asset_id, abatement_cost_per_t [currency/t], co2_avoided_t_per_yr [t/yr],
        bar_start_t_per_yr [t/yr] (cumulative start of each bar), sorted by cost; optionally label (the
        option's name, shown in the hover beside the asset).
    currency : str

    Notes
    -----
    One bar per asset: of its options that avoid CO2, the one with the highest NPV
    (``models.plan.abatement_curve``). That is not always the asset's best option, which may avoid none;
    the subtitle says which option it is (:data:`ABATEMENT_SUBTITLE`).

    The vertical axis spans both signs the bars take. On each side of zero it reaches the bars that hold the
    tonnes (at least :data:`ABATEMENT_VISIBLE_SHARE` of them); a narrower bar beyond them runs off the axis and
    a note under the chart says so. A side with narrow bars only is spanned whole: the costly projects that
    avoid little CO2 are still drawn (they were a sliver over zero when the axis followed the wide bars only),
    each as a stem with a dot at its height: the bar itself is a fraction of a pixel wide. The two shades
    (saves money, costs money) are keyed in the legend.
    """
    if abatement is None or abatement.empty:
        return message_figure("No option avoids CO2 in this case.")
    width = abatement["co2_avoided_t_per_yr"].to_numpy(dtype=float)
    start = abatement["bar_start_t_per_yr"].to_numpy(dtype=float)
    cost = abatement["abatement_cost_per_t"].to_numpy(dtype=float)
    colours = np.where(cost < 0, GAIN, COST)
    # each bar named as the tables name a project ("HRW-P21: PM motor on a drive"), when the option's name is given
    names = (abatement["asset_id"].astype(str) + ": " + abatement["label"].astype(str) if "label" in abatement
             else abatement["project_id"].astype(str))
    text = [f"{p}<br>{c:,.0f} {currency}/t<br>{w:,.1f} t/yr" for p, c, w in zip(names, cost, width)]
    finite = np.isfinite(cost)
    seen = finite & (width >= ABATEMENT_VISIBLE_SHARE * max(float(width[finite].sum()), 1e-12))
    # a white edge between the wide bars; none on a narrow bar, which it turned a paler shade of its colour (a
    # third and fourth shade that the legend did not explain)
    fig = go.Figure(go.Bar(x=start + width / 2.0, y=cost, width=width,
                           marker=dict(color=colours, line=dict(width=np.where(seen, 0.5, 0.0), color="white")),
                           hovertext=text, hoverinfo="text", name="projects", showlegend=False))
    for shade, name in ABATEMENT_SHADES.items():  # the key to the two shades (no data of its own)
        if (colours == shade).any():
            fig.add_trace(go.Scatter(x=[None], y=[None], mode="markers", name=name, hoverinfo="skip",
                                     marker=dict(symbol="square", size=12, color=shade)))
    fig.add_hline(y=0, line=dict(color=INK, width=1))
    fig.update_layout(showlegend=True, bargap=0)
    # a project that avoids almost no CO2 can cost thousands per tonne: its bar is too narrow to see but would set
    # the axis; on a side of zero with wider bars the axis covers those, the others run off it (noted). A side of
    # narrow bars only is covered whole, so that its bars are drawn (not cut to the padding over zero)
    above, below = finite & (cost > 0), finite & (cost < 0)
    hi = float(cost[(seen & above) if (seen & above).any() else above].max(initial=0.0))
    lo = float(cost[(seen & below) if (seen & below).any() else below].min(initial=0.0))
    pad = 0.08 * (hi - lo or 1.0)
    fig.update_yaxes(range=[lo - pad, hi + pad])
    beyond = finite & ((cost > hi + pad) | (cost < lo - pad))
    # a narrow bar past the wide ones of its side is a fraction of a pixel wide, too thin to be drawn: a stem
    # from zero with a dot at its height shows it (its hover the bar's own)
    wide_hi, wide_lo = float(cost[seen & above].max(initial=0.0)), float(cost[seen & below].min(initial=0.0))
    stems = finite & ~seen & ~beyond & ((cost > wide_hi) | (cost < wide_lo))
    for shade, side in ((GAIN, below), (COST, above)):
        pick = stems & side
        if pick.any():
            n = int(pick.sum())
            gap = np.full(n, np.nan)
            centre = (start + width / 2.0)[pick]
            fig.add_trace(go.Scatter(x=np.column_stack([centre, centre, gap]).ravel(),
                                     y=np.column_stack([np.zeros(n), cost[pick], gap]).ravel(),
                                     mode="lines+markers", line=dict(color=shade, width=1.5),
                                     marker=dict(color=shade, size=np.tile([0, 6, 0], n)),
                                     hovertext=np.repeat(np.asarray(text, dtype=object)[pick], 3), hoverinfo="text",
                                     name="narrow bars", showlegend=False, cliponaxis=False))
    if stems.any():  # the tonnes set the horizontal axis, not the stems' dots (which would pad it)
        first, last = float(np.nanmin(start)), float(np.nanmax(start + width))
        fig.update_xaxes(range=[first, last + 0.005 * (last - first or 1.0)])
    if beyond.any():
        far = float(cost[beyond].max() if (cost[beyond] > 0).any() else cost[beyond].min())
        count = int(beyond.sum())
        fig.add_annotation(text=f"{count} narrow {'bar runs' if count == 1 else 'bars run'} off the axis (to "
                                f"{far:,.0f} {currency}/t): projects that avoid almost no CO2",
                           xref="paper", yref="paper", x=1.0, y=0.0, yshift=-52, xanchor="right", yanchor="top",
                           showarrow=False, font=dict(size=11, color=INK))
    fig.update_xaxes(title_text="CO2 avoided, cumulative [t/yr]")
    fig.update_yaxes(title_text=f"Cost of abatement [{currency}/t CO2]")
    _style(fig, ABATEMENT_TITLE)
    fig.update_layout(title_subtitle=dict(text=ABATEMENT_SUBTITLE, font=dict(size=12, color=MUTED)),
                      margin_t=64, margin_b=84 if beyond.any() else 56)
    return fig


# ---------------------------------------------------------------------------------------------------
# One asset
# ---------------------------------------------------------------------------------------------------
def lcc_stack(lcc: pd.DataFrame, currency: str) -> go.Figure:
    """Life-cycle cost per option, stacked by component (capital, residual, running, maintenance, tax, as
    ``models.scenario.LCC_COMPONENTS``; a component absent from ``lcc`` is left out).

    Parameters
    ----------
    lcc : pandas.DataFrame
        label, component, pv [currency] for one asset.
    """
    if lcc is None or lcc.empty:
        return message_figure("No life-cycle cost for this asset.")
    order = list(dict.fromkeys(lcc["label"]))
    fig = go.Figure()
    for component in LCC_COLOURS:  # (the order of models.scenario.LCC_COMPONENTS)
        if not (lcc["component"] == component).any():
            continue
        part = lcc[lcc["component"] == component].set_index("label")["pv"].reindex(order)
        values = part.to_numpy(dtype=float)
        fig.add_trace(go.Bar(x=order, y=values, name=component, marker_color=LCC_COLOURS[component],
                             customdata=money_texts(values, currency),
                             hovertemplate="%{x}<br>" + component + ": %{customdata}<extra></extra>"))
    fig.update_layout(barmode="relative")
    fig.update_xaxes(title_text="Option", tickangle=-20)
    fig.update_yaxes(title_text=f"Present value [{currency}]")
    return _style(fig, "Life-cycle cost by component", height=400)


def _colour_of(frame: pd.DataFrame, colours: dict[str, str] | None):
    """Colour of each option of ``frame``: looked up by option_id in ``colours`` (one map for a whole page),
    else given in the frame's own order (by option_id, or by label where the frame has no ids)."""
    key = "option_id" if "option_id" in frame else "label"
    given = colours if colours is not None else option_colour_map(frame[key])
    fallback = option_colour_map(frame[key])
    return lambda k: given.get(k, fallback.get(k, MUTED))


def cumulative_cash(curves: pd.DataFrame, currency: str, colours: dict[str, str] | None = None) -> go.Figure:
    """Cumulative discounted cash flow of each option against keeping today's motor, payback marked.

    Parameters
    ----------
    curves : pandas.DataFrame
        option_id, label, year [yr], cumulative_pv [currency], payback_yr [yr] (NaN = not within the horizon).
    currency : str
    colours : dict, optional
        Colour per option_id, the same for every chart of the page (:func:`option_colour_map` over the case's
        option list). Without it the options take colours in the order of ``curves``.
    """
    if curves is None or curves.empty:
        return message_figure("No option with capital applies to this asset.")
    colour = _colour_of(curves, colours)
    key = "option_id" if "option_id" in curves else "label"
    fig = go.Figure()
    for (k, label), part in curves.groupby([key, "label"], sort=False):
        fig.add_trace(go.Scatter(x=part["year"], y=part["cumulative_pv"], mode="lines", name=label,
                                 line=dict(color=colour(k), width=2),
                                 customdata=money_texts(part["cumulative_pv"], currency),
                                 hovertemplate="year %{x}<br>%{customdata}<extra>" + label + "</extra>"))
    paid = curves.drop_duplicates("label").dropna(subset=["payback_yr"])
    if len(paid):
        fig.add_trace(go.Scatter(x=paid["payback_yr"], y=np.zeros(len(paid)), mode="markers", name="discounted payback",
                                 marker=dict(symbol="diamond", size=10, color=[colour(k) for k in paid[key]],
                                             line=dict(color=INK, width=1)),
                                 hovertext=[f"{lab}: pays back in {p:.1f} yr" for lab, p in zip(paid["label"], paid["payback_yr"])],
                                 hoverinfo="text"))
    fig.add_hline(y=0, line=dict(color=INK, width=1))
    fig.update_xaxes(title_text="Year [yr]")
    fig.update_yaxes(title_text=f"Cumulative present value [{currency}]")
    return _style(fig, "Cumulative discounted cash flow", height=480, legend_below=True)


#: Line style of the power factor by its sense, and its name in the legend: lagging (draws kVAr) or leading
#: (supplies kVAr).
PF_DASH = {"lagging": ("dot", "dotted"), "leading": ("dash", "dashed")}


def performance(curves: pd.DataFrame, hours: pd.DataFrame, basis: str, colours: dict[str, str] | None = None) -> go.Figure:
    """Efficiency and power factor against shaft load per option, with the hours at each load below.

    Parameters
    ----------
    curves : pandas.DataFrame
        option_id, label, load_pct [% of rating], efficiency_frac [-], power_factor [-], q_kvar [kVAr] (optional:
        below zero the machine supplies reactive power, its power factor is leading).
    hours : pandas.DataFrame
        load_from_pct, load_to_pct [%], hours_per_yr [h/yr].
    basis : str
        What the hours' load is based on (shown in the legend).
    colours : dict, optional
        Colour per option_id, as for :func:`cumulative_cash`.

    Notes
    -----
    The power factor's size says nothing of its sense, so lagging is drawn dotted and leading dashed; the
    legend keys the two styles (grey entries), the hover says the sense.

    Where an option delivers nothing at the shaft (shaft_p_kw, when given, or the efficiency not above zero:
    a fan that a drive slows below the speed at which it moves any air against its system's pressure), its
    efficiency means nothing and is not drawn (a gap, not a zero that reads as a broken model); a note in
    the efficiency panel says below which load no flow is delivered (:func:`no_output_loads`).
    """
    fig = make_subplots(rows=3, cols=1, shared_xaxes=True, vertical_spacing=0.05, row_heights=[0.38, 0.32, 0.30])
    senses = set()
    if curves is not None and len(curves):
        colour = _colour_of(curves, colours)
        key = "option_id" if "option_id" in curves else "label"
        curves = curves.reset_index(drop=True)  # (a unique index: the points with no output are looked up on it)
        idle = no_output_loads(curves)
        for (k, label), part in curves.groupby([key, "label"], sort=False):
            # no output, no efficiency: a gap in the line
            efficiency_pct = (part["efficiency_frac"] * 100.0).where(~idle.loc[part.index])
            fig.add_trace(go.Scatter(x=part["load_pct"], y=efficiency_pct, mode="lines", name=label,
                                     legendgroup=str(k), line=dict(color=colour(k), width=2),
                                     hovertemplate="%{x:.0f} %<br>efficiency %{y:.1f} %<extra>" + label + "</extra>"),
                          row=1, col=1)
            leading = (part["q_kvar"] < 0).to_numpy() if "q_kvar" in part else np.zeros(len(part), dtype=bool)
            for sense, mask in (("lagging", ~leading), ("leading", leading)):
                if not mask.any():
                    continue
                senses.add(sense)
                fig.add_trace(go.Scatter(x=part["load_pct"], y=part["power_factor"].where(mask), mode="lines", name=label,
                                         legendgroup=str(k), showlegend=False,
                                         line=dict(color=colour(k), width=2, dash=PF_DASH[sense][0]),
                                         hovertemplate="%{x:.0f} %<br>PF %{y:.3f} " + sense + "<extra>" + label + "</extra>"),
                              row=2, col=1)
        note = no_output_note(curves, idle)
        if note:  # in the panel's empty lower left, where the lines would have lain along zero
            fig.add_annotation(text=note, xref="x domain", yref="y domain", x=0.01, y=0.3, xanchor="left",
                               yanchor="middle", align="left", showarrow=False, font=dict(size=11, color=MUTED),
                               hovertext="nothing delivered at the shaft there, so no efficiency drawn:<br>"
                               + wrap_label(", ".join(dict.fromkeys(curves.loc[idle, "label"].astype(str))), 60))
    for sense in ("lagging", "leading"):  # the key to the line styles, in the legend (no data of its own)
        if sense in senses:
            dash, style = PF_DASH[sense]
            fig.add_trace(go.Scatter(x=[None], y=[None], mode="lines", name=f"{style}: power factor {sense}",
                                     legendgroup=f"pf-{sense}", line=dict(color=MUTED, width=2, dash=dash),
                                     hoverinfo="skip"), row=2, col=1)
    if hours is not None and len(hours):
        mid = (hours["load_from_pct"] + hours["load_to_pct"]) / 2.0
        width = hours["load_to_pct"] - hours["load_from_pct"]
        fig.add_trace(go.Bar(x=mid, y=hours["hours_per_yr"], width=width * 0.95, name=f"hours at load: {basis}",
                             marker_color=BEFORE, hovertemplate="%{x:.0f} %: %{y:,.0f} h/yr<extra></extra>"), row=3, col=1)
    fig.update_yaxes(title_text="Efficiency [%]", row=1, col=1)
    fig.update_yaxes(title_text="Power factor [-]", row=2, col=1)
    fig.update_yaxes(title_text="Hours [h/yr]", row=3, col=1)
    fig.update_xaxes(title_text="Today's shaft load [% of rating]", row=3, col=1, range=[0, 130])
    fig = _style(fig, "Efficiency and power factor against load, and where the asset runs", height=680, legend_below=True)
    fig.update_layout(legend=dict(y=-0.1))
    return fig


def no_output_loads(curves: pd.DataFrame) -> pd.Series:
    """Which points of the performance curves deliver nothing at the shaft (True there).

    Parameters
    ----------
    curves : pandas.DataFrame
        efficiency_frac [-] and, optionally, shaft_p_kw [kW] (``models.operation.performance_curves``).

    Returns
    -------
    pandas.Series of bool
        On the index of ``curves``: the shaft power (when given) is not above zero, or the efficiency is not
        above zero (no output for the input drawn). A missing efficiency is not marked (it draws no point
        anyway).

    Examples
    --------
    >>> no_output_loads(pd.DataFrame({"efficiency_frac": [0.0, 0.02, 0.9], "shaft_p_kw": [0.0, 0.1, 50.0]})).tolist()
    [True, False, False]
    """
    efficiency = pd.to_numeric(curves["efficiency_frac"], errors="coerce")
    idle = efficiency.notna() & ~(efficiency > 0)
    if "shaft_p_kw" in curves:
        shaft = pd.to_numeric(curves["shaft_p_kw"], errors="coerce")
        idle |= shaft.notna() & ~(shaft > 0)
    return idle


def no_output_note(curves: pd.DataFrame, idle: pd.Series) -> str:
    """The efficiency panel's note on the loads where options deliver no flow ("" when every point delivers).

    Parameters
    ----------
    curves : pandas.DataFrame
        option_id or label, load_pct [% of rating], as for :func:`performance`.
    idle : pandas.Series of bool
        :func:`no_output_loads` of ``curves``.

    Returns
    -------
    str
        "no flow delivered<br>below 38 % load": the lowest load at which each such option delivers (the
        lowest to the highest of them when they differ), in whole per cent.

    Examples
    --------
    >>> c = pd.DataFrame({"label": ["Drive"] * 3, "load_pct": [25.0, 37.5, 50.0], "efficiency_frac": [0.0, 0.1, 0.8]})
    >>> no_output_note(c, no_output_loads(c))
    'no flow delivered<br>below 38 % load'
    """
    idle = np.asarray(idle, dtype=bool)
    if not idle.any():
        return ""
    keys = curves["option_id" if "option_id" in curves else "label"].to_numpy(dtype=object)
    load = curves["load_pct"].to_numpy(dtype=float)
    first = []  # the lowest load each option with idle points delivers at (NaN: at none drawn)
    for k in dict.fromkeys(keys):
        own = keys == k
        if idle[own].any():
            delivering = load[own & ~idle]
            first.append(float(delivering.min()) if len(delivering) else np.nan)
    shown = [x for x in first if np.isfinite(x)]
    if not shown:
        return "no flow delivered<br>at any load drawn"
    low, high = round(min(shown), 6), round(max(shown), 6)  # (37.499999... from load fractions is written 38)
    span = f"{low:.0f} %" if f"{low:.0f}" == f"{high:.0f}" else f"{low:.0f}-{high:.0f} %"
    return f"no flow delivered<br>below {span} load"


#: Hatching of the speed chart's bars by speed remedy (the colour stays the option's own).
REMEDY_PATTERNS = {"none": "", "trim_or_pulley": "/", "speed_control": "x"}
#: Spacing of the hatch in the speed remedies' legend swatches [px] (plotly's default, 8, shows one line there).
LEGEND_HATCH_PX = 4
#: Below this speed change [rpm] every option is said to run at today's speed.
SAME_SPEED_RPM = 0.05


def speed_energy(options: pd.DataFrame, colours: dict[str, str] | None = None) -> go.Figure:
    """Each option's mean running speed against today's motor, and its yearly input energy.

    Parameters
    ----------
    options : pandas.DataFrame
        option_id, label, today (True on today's motor's row; without the column the first row is today's),
        speed_remedy_id (the catalogue's code: none, trim_or_pulley, speed_control; hatches the bars),
        speed_remedy (its name as shown), mean_speed_rpm [rpm], energy_kwh_per_yr [kWh/yr].
    colours : dict, optional
        Colour per option_id, as for :func:`cumulative_cash`.

    Notes
    -----
    The speed panel shows the change against today's motor [rpm], signed, from a zero line, with each
    option's absolute mean speed and today's in the hover. A four-pole motor's options differ by a few rpm
    on about 1,490 rpm: bars of the absolute speed from zero hide that change, and an axis cut to
    1,488-1,502 rpm makes it look large. The change in rpm is what a plant engineer checks: on a centrifugal
    load the flow follows the speed and the power its cube (+0.4 % speed is about +1.2 % power), and an
    impeller trim or pulley is sized to take that change back. Bars are coloured by option (the page's one
    colour per option) and hatched by speed remedy.
    """
    if options is None or options.empty:
        return message_figure("No options for this asset.")
    speed = options["mean_speed_rpm"].to_numpy(dtype=float)
    today_row = options["today"].to_numpy(dtype=bool) if "today" in options else np.arange(len(options)) == 0
    today_rpm = float(speed[today_row][0]) if today_row.any() else np.nan
    change = speed - today_rpm
    change_pct = np.where(today_rpm > 0, change / today_rpm * 100.0, np.nan)
    colour = _colour_of(options, colours)
    key = "option_id" if "option_id" in options else "label"
    bar_colours = [colour(k) for k in options[key]]
    remedy = options["speed_remedy_id"].fillna("none").to_numpy(dtype=object)
    shapes = [REMEDY_PATTERNS.get(r, "") for r in remedy]
    hover = [f"mean {s:,.1f} rpm; today {today_rpm:,.1f} rpm<br>change {c:+,.1f} rpm ({p:+.2f} %)<br>{name}"
             for s, c, p, name in zip(speed, change, change_pct, options["speed_remedy"])]
    # options down the shared vertical axis, their names wrapped: long names stay readable in a half-width panel
    names = [wrap_label(str(label)) for label in options["label"]]
    fig = make_subplots(rows=1, cols=2, shared_yaxes=True, horizontal_spacing=0.08,
                        subplot_titles=("Mean speed against today's motor", "Input energy"))
    # one hatching colour (the browser's chart library cannot take one per bar there; the bar colours stay); a
    # single clear background too: left unset, the library takes the bars' colour list for it and warns in the
    # browser's console for every bar (the bars look the same either way)
    hatch = dict(shape=shapes, fgcolor=HATCH, fillmode="overlay", bgcolor="rgba(0,0,0,0)")
    fig.add_trace(go.Bar(y=names, x=change, orientation="h", marker=dict(color=bar_colours, pattern=hatch),
                         customdata=hover, showlegend=False, name="speed change",
                         hovertemplate="%{y}<br>%{customdata}<extra></extra>"), row=1, col=1)
    fig.add_trace(go.Bar(y=names, x=options["energy_kwh_per_yr"] / 1000.0, orientation="h", showlegend=False,
                         name="input energy", marker=dict(color=bar_colours, pattern=hatch),
                         hovertemplate="%{y}<br>%{x:,.1f} MWh/yr<extra></extra>"), row=1, col=2)
    for code in dict.fromkeys(remedy):  # the key to the hatching (no data of its own)
        name = str(options.loc[remedy == code, "speed_remedy"].iloc[0])
        # the legend's swatch is about 12 px: a hatch at the bars' 8 px spacing shows one faint line there, so the
        # key's hatch is finer and in the ink colour
        fig.add_trace(go.Bar(x=[None], y=[None], orientation="h", name=name, legendgroup=str(code), hoverinfo="skip",
                             marker=dict(color="white", line=dict(color=MUTED, width=1),
                                         pattern=dict(shape=REMEDY_PATTERNS.get(code, ""), fgcolor=INK,
                                                      size=LEGEND_HATCH_PX, solidity=0.25))),
                      row=1, col=1)
    fig.add_vline(x=0, line=dict(color=INK, width=1), row=1, col=1)
    if np.all(np.abs(change[np.isfinite(change)]) < SAME_SPEED_RPM):
        fig.add_annotation(text=f"every option runs at today's {today_rpm:,.0f} rpm", xref="x domain", yref="y domain",
                           x=0.5, y=0.5, showarrow=False, font=dict(size=12, color=MUTED))
    fig.update_xaxes(title_text="Speed change [rpm]", zeroline=True, row=1, col=1)
    fig.update_xaxes(title_text="Energy [MWh/yr]", row=1, col=2)
    # today's motor first, at the top
    fig.update_yaxes(categoryorder="array", categoryarray=names, autorange="reversed", automargin=True)
    fig.update_layout(barmode="group")
    fig = _style(fig, "", height=max(360, 150 + 44 * len(names)))
    fig.update_layout(legend=dict(y=1.08), margin=dict(t=90, b=56))
    return fig


def money_short(value: float, currency: str) -> str:
    """Money in three significant figures for a label or a card (``components.fmt_money`` writes the cards
    with it): ``EUR 8.42 M``, ``EUR 48.2 k``, ``EUR 950`` (``-`` when not finite).

    Examples
    --------
    >>> money_short(8424191.0, "EUR"), money_short(-48213.0, "EUR"), money_short(950.4, "EUR")
    ('EUR 8.42 M', 'EUR -48.2 k', 'EUR 950')
    >>> money_short(81.59e9, "EUR"), money_short(7.1e16, "EUR")
    ('EUR 81.59 bn', 'EUR 7.1e+16')
    """
    v = float(value)
    if not np.isfinite(v):
        return "-"
    if abs(v) >= 1e12:  # beyond any fleet's money: a sign of an extreme assumption, kept short
        return f"{currency} {v:.2g}"
    if abs(v) >= 1e9:
        return f"{currency} {v / 1e9:,.2f} bn"
    if abs(v) >= 1e6:
        return f"{currency} {v / 1e6:,.2f} M"
    if abs(v) >= 1e4:
        return f"{currency} {v / 1e3:,.1f} k"
    return f"{currency} {v:,.0f}"


def money_texts(values, currency: str) -> list[str]:
    """:func:`money_short` of each value, for a trace's hover or its labels (``customdata``, ``text``).

    Examples
    --------
    >>> money_texts([8312224.0, 250000.0, float("nan")], "EUR")
    ['EUR 8.31 M', 'EUR 250.0 k', '-']
    """
    return [money_short(v, currency) for v in np.asarray(values, dtype=float).ravel()]


def wrap_label(text: str, width: int = 24) -> str:
    """A label broken into lines of at most about ``width`` characters at spaces (``<br>`` between them).

    A ``<br>`` already in ``text`` stays a line break; a single word longer than ``width`` keeps a line of its
    own. Putting a space back for each added ``<br>`` gives ``text`` again (for text with single spaces).

    Examples
    --------
    >>> wrap_label("Line-start PM motor + impeller trim or pulley")
    'Line-start PM motor +<br>impeller trim or pulley'
    >>> wrap_label("IE4")
    'IE4'
    >>> wrap_label("Plan NPV<br>centre: the plan under the budget", 20)
    'Plan NPV<br>centre: the plan<br>under the budget'
    """
    lines: list[str] = []
    for part in str(text).split("<br>"):
        start = len(lines)
        for word in part.split():
            if len(lines) > start and len(lines[-1]) + 1 + len(word) <= width:
                lines[-1] += " " + word
            else:
                lines.append(word)
        if len(lines) == start:  # an empty part: the break is kept
            lines.append("")
    return "<br>".join(lines) if any(lines) else text


# ---------------------------------------------------------------------------------------------------
# Site meter
# ---------------------------------------------------------------------------------------------------
def _wall_clock(frame: pd.DataFrame) -> tuple[pd.Index, pd.DataFrame]:
    """Readings on the local wall clock (the x of a time axis, which has no time zone), the line broken
    where the clock goes back (the repeated hour when summer time ends), so it is not drawn back over
    itself: a blank reading is put in before each interval whose local time does not follow the last."""
    index = frame.index
    if getattr(index, "tz", None) is None:
        return index, frame
    local = index.tz_localize(None)
    back = np.flatnonzero(np.diff(local.asi8) <= 0) + 1
    if not len(back):
        return local, frame
    gaps = pd.DataFrame(np.nan, index=range(len(back)), columns=frame.columns)
    parts, x, last = [], [], 0
    for k, at in enumerate(back):
        parts += [frame.iloc[last:at].reset_index(drop=True), gaps.iloc[k:k + 1]]
        x += list(local[last:at]) + [local[at - 1]]
        last = at
    parts.append(frame.iloc[last:].reset_index(drop=True))
    x += list(local[last:])
    return pd.DatetimeIndex(x), pd.concat(parts, ignore_index=True)


def meter_week(week: dict[str, pd.DataFrame]) -> go.Figure:
    """Site kW, kVAr and power factor over one week, before and with the plan.

    Parameters
    ----------
    week : dict with keys "before" and "after"
        Frames indexed by interval start with p_kw [kW], q_kvar [kVAr] (negative = leading) and
        power_factor [-].
    """
    fig = make_subplots(rows=3, cols=1, shared_xaxes=True, vertical_spacing=0.05)
    for scenario_name, colour, dash in (("before", BEFORE, "solid"), ("after", AFTER, "solid")):
        frame = week.get(scenario_name)
        if frame is None or frame.empty:
            continue
        x, frame = _wall_clock(frame)
        name = "today" if scenario_name == "before" else "with the plan"
        # the power factor's sense from the kVAr's sign (negative = leading), said in the hover
        sense = np.where(frame["q_kvar"].to_numpy(dtype=float) < 0, "leading", "lagging")
        for row, column, fmt, unit in ((1, "p_kw", ",.0f", " kW"), (2, "q_kvar", ",.0f", " kVAr"),
                                       (3, "power_factor", ".3f", "")):
            fig.add_trace(go.Scatter(x=x, y=frame[column], mode="lines", name=name, legendgroup=scenario_name,
                                     showlegend=row == 1, line=dict(color=colour, width=1.6, dash=dash),
                                     customdata=sense if row == 3 else None,
                                     hovertemplate="%{x}<br>%{y:" + fmt + "}" + unit
                                     + (" %{customdata}" if row == 3 else "") + "<extra>" + name + "</extra>"),
                          row=row, col=1)
    fig.add_hline(y=0, line=dict(color=INK, width=0.8), row=2, col=1)
    fig.update_yaxes(title_text="Active [kW]", row=1, col=1)
    fig.update_yaxes(title_text="Reactive [kVAr]", row=2, col=1)
    # (the power factor's sense in the title: a second line on the short third axis is cut in a narrow window)
    fig.update_yaxes(title_text="Power factor [-]", row=3, col=1)
    fig.update_xaxes(title_text="Local time", row=3, col=1)
    return _style(fig, "Site meter over one week (power factor leading where kVAr < 0)", height=600)


def pf_duration(curve: pd.DataFrame) -> go.Figure:
    """Power-factor duration curve: hours of the year at or below each power factor, before and after.

    Parameters
    ----------
    curve : pandas.DataFrame
        scenario ("before"/"after"), hours [h], power_factor [-] (unsigned), optionally leading_h [h]
        (hours the site leads, named in the legend).

    Notes
    -----
    The curve holds every hour of the year, leading (kVAr < 0) as well as lagging, at the power factor's
    size; its axis title says so, and the legend gives each scenario's leading hours.
    """
    fig = go.Figure()
    for scenario_name, colour, name in (("before", BEFORE, "today"), ("after", AFTER, "with the plan")):
        part = curve[curve["scenario"] == scenario_name]
        leading_h = float(part["leading_h"].iloc[0]) if len(part) and "leading_h" in part else 0.0
        if leading_h > 0:  # the curve's power factor is unsigned: say how long the site leads
            name = f"{name} (leading {leading_h:,.0f} h)"
        if len(part):
            fig.add_trace(go.Scatter(x=part["hours"], y=part["power_factor"], mode="lines", name=name,
                                     line=dict(color=colour, width=2),
                                     hovertemplate="%{x:,.0f} h at or below %{y:.3f}<extra>" + name + "</extra>"))
    fig.update_xaxes(title_text="Hours of the year at or below [h]")
    # every hour is on the curve, leading ones too, by the power factor's size (the meter chart beside it
    # tells the sense by the kVAr's sign)
    fig.update_yaxes(title_text="Power factor [-]<br>unsigned: leading hours included")
    return _style(fig, "Power-factor duration curve")


def monthly_bills(bills: pd.DataFrame, currency: str) -> go.Figure:
    """Monthly bill by line-item category, today's beside the plan's, stacked.

    Parameters
    ----------
    bills : pandas.DataFrame
        month, category, amount [currency], scenario ("before"/"after").
    """
    if bills is None or bills.empty:
        return message_figure("No bills for this site.")
    months = sorted(bills["month"].astype(str).unique())
    x = [[m for m in months for _ in (0, 1)], [s for _ in months for s in ("today", "plan")]]
    fig = go.Figure()
    for category in list(dict.fromkeys(bills["category"])):
        part = bills[bills["category"] == category]
        values = []
        for m in months:
            for s in ("before", "after"):
                values.append(float(part.loc[(part["month"].astype(str) == m) & (part["scenario"] == s), "amount"].sum()))
        fig.add_trace(go.Bar(x=x, y=values, name=category, marker_color=BILL_COLOURS.get(category, MUTED),
                             customdata=money_texts(values, currency),
                             hovertemplate="%{x}<br>" + category + ": %{customdata}<extra></extra>"))
    fig.update_layout(barmode="relative")
    fig.update_xaxes(title_text="Month, today and with the plan")
    fig.update_yaxes(title_text=f"Bill [{currency}/month]")
    return _style(fig, "Monthly bill by line item", height=420)


def energy_against_bills(months: pd.DataFrame) -> go.Figure:
    """Each billed month's energy beside today's fleet as modelled, for the site's own check of its baseline.

    Parameters
    ----------
    months : pandas.DataFrame
        The site's rows of ``models.calibration.compare_with_bills``: month (the bill's, ``YYYY-MM``),
        quantity, modelled, billed; only ``energy_kwh`` rows are drawn [kWh, shown in MWh].
    """
    energy = months[months["quantity"] == "energy_kwh"].sort_values("month") if months is not None and len(months) \
        else pd.DataFrame()
    if energy.empty:
        return message_figure("No bills in the case for this site (bill_history.csv).")
    fig = go.Figure()
    for column, colour, name in (("billed", INK, "billed"), ("modelled", BEFORE, "today's fleet as modelled")):
        fig.add_trace(go.Bar(x=energy["month"].astype(str), y=energy[column].to_numpy(dtype=float) / 1000.0, name=name,
                             marker_color=colour,
                             hovertemplate="%{x}<br>%{y:,.1f} MWh<extra>" + name + "</extra>"))
    fig.update_layout(barmode="group")
    fig.update_xaxes(title_text="Billing month (set beside the same calendar month of the analysis year)")
    fig.update_yaxes(title_text="Energy [MWh/month]")
    return _style(fig, "Energy: the bills beside the model", height=360)


def reactive_balance(balance: pd.DataFrame) -> go.Figure:
    """Mean reactive power of the site by source, today and with the plan (negative = leading).

    Parameters
    ----------
    balance : pandas.DataFrame
        scenario ("before"/"after"), source, q_kvar [kVAr].
    """
    fig = go.Figure()
    for scenario_name, colour, name in (("before", BEFORE, "today"), ("after", AFTER, "with the plan")):
        part = balance[balance["scenario"] == scenario_name]
        fig.add_trace(go.Bar(x=part["source"], y=part["q_kvar"], name=name, marker_color=colour,
                             hovertemplate="%{x}<br>%{y:,.0f} kVAr<extra>" + name + "</extra>"))
    fig.add_hline(y=0, line=dict(color=INK, width=1))
    fig.update_layout(barmode="group")
    fig.update_xaxes(title_text="Source")
    fig.update_yaxes(title_text="Mean reactive power [kVAr]")
    return _style(fig, "Reactive balance over the year (negative = leading)")


# ---------------------------------------------------------------------------------------------------
# Plan
# ---------------------------------------------------------------------------------------------------
def plan_by_year(by_year: pd.DataFrame, currency: str, exact_name: str = "exact plan") -> go.Figure:
    """Capital per plan year of the exact plan and of the rank-order plan, with the budget.

    Parameters
    ----------
    by_year : pandas.DataFrame
        plan ("exact"/"rank_order"), start_yr, capital [currency], budget [currency] (NaN = no limit), and
        optionally budget_year (the name of the budget year each plan year falls in, "" for none).
    exact_name : str
        What the integer-programme plan is called (e.g. "best plan found" before it is proven).
    """
    fig = go.Figure()

    def year_names(part: pd.DataFrame) -> list[str]:  # "Year 0", or "Year 0 (FY2028)" with the budget year's name
        named = part["budget_year"] if "budget_year" in part else pd.Series([""] * len(part), index=part.index)
        return [f"Year {y}" + (f" ({b})" if b else "") for y, b in zip(part["start_yr"], named)]

    for plan_name, colour, name in (("exact", AFTER, exact_name), ("rank_order", BEFORE, "rank by profitability index")):
        part = by_year[by_year["plan"] == plan_name]
        fig.add_trace(go.Bar(x=year_names(part), y=part["capital"], name=name, marker_color=colour,
                             customdata=money_texts(part["capital"], currency),
                             hovertemplate="%{x}: %{customdata}<extra>" + name + "</extra>"))
    budget = by_year[by_year["plan"] == "exact"]
    if budget["budget"].notna().any():
        fig.add_trace(go.Scatter(x=year_names(budget), y=budget["budget"], mode="markers",
                                 name="budget",
                                 marker=dict(symbol="line-ew-open", size=28, color=BUDGET, line=dict(width=3)),
                                 customdata=money_texts(budget["budget"], currency),
                                 hovertemplate="%{x} budget: %{customdata}<extra></extra>"))
    fig.update_layout(barmode="group")
    fig.update_xaxes(title_text="Plan year")
    # capital is never negative: the axis starts at zero (a plan buying nothing would otherwise run from -1 to 1)
    fig.update_yaxes(title_text=f"Capital [{currency}]", rangemode="nonnegative")
    return _style(fig, "Capital by plan year")


def plan_comparison(comparison: pd.Series, currency: str, exact_name: str = "exact plan") -> go.Figure:
    """Total NPV of the exact plan against the rank-by-profitability-index plan.

    Parameters
    ----------
    comparison : pandas.Series
        npv_exact, npv_greedy [currency], projects_exact, projects_greedy.
    exact_name : str
        What the integer-programme plan is called (e.g. "best plan found" before it is proven).
    """
    names = [exact_name, "rank by profitability index"]
    values = [float(comparison.get("npv_exact", np.nan)), float(comparison.get("npv_greedy", np.nan))]
    counts = [comparison.get("projects_exact", np.nan), comparison.get("projects_greedy", np.nan)]
    if all(np.isfinite(float(c)) and float(c) == 0 for c in counts):  # both plans known to be empty
        return message_figure("Neither plan holds a project: no option with capital adds value under these "
                              "assumptions and budgets.")
    # each bar labelled in the cards' short form ("EUR 8.31 M", not "EUR 8,312,224")
    fig = go.Figure(go.Bar(x=names, y=values, marker_color=[AFTER, BEFORE],
                           text=[f"{money_short(v, currency)}<br>{int(c) if np.isfinite(float(c)) else '-'} projects"
                                 for v, c in zip(values, counts)],
                           customdata=money_texts(values, currency),
                           textposition="auto", hovertemplate="%{x}: %{customdata}<extra></extra>"))
    fig.update_xaxes(title_text="Plan")
    fig.update_yaxes(title_text=f"NPV at plan start [{currency}]", rangemode="tozero")
    return _style(fig, f"Plan NPV: the {exact_name} against rank order")


# ---------------------------------------------------------------------------------------------------
# Risk
# ---------------------------------------------------------------------------------------------------
#: Longest line of a tornado bar's label [characters]: a long one ("New machines' losses (-100 to +100 % of the
#: IEC tolerance band)") on one line took half a half-width panel's width from the bars and the axis title.
TORNADO_LABEL_CHARS = 36
#: Bottom margin of the tornado [px]: its tick labels and the three lines of its axis title.
TORNADO_BOTTOM_PX = 112


def tornado(rows: pd.DataFrame, currency: str, scope: str = "best") -> go.Figure:
    """One-at-a-time sensitivity of the plan's NPV (``scope`` "plan") or of the fleet NPV of the best options.

    Parameters
    ----------
    rows : pandas.DataFrame
        label, npv_at_low, npv_at_high, base_npv [currency], sorted by swing (largest last).
    currency : str
    scope : {"best", "plan"}
        What the NPV adds up: each asset's best option with no budget, or the budgeted plan at its start.

    Notes
    -----
    The axis title names the centre line on three short lines, its value (:func:`money_short`) on a line of
    its own: on two lines the second ran past a half-width panel at 1440 px ("... the budget, EUR 8"). The
    labels are wrapped (:data:`TORNADO_LABEL_CHARS`) so that they leave the bars and the title room.
    """
    if rows is None or rows.empty:
        return message_figure("No project with capital to test.")
    base = float(rows["base_npv"].iloc[0])
    names = [wrap_label(str(label), TORNADO_LABEL_CHARS) for label in rows["label"]]
    fig = go.Figure()
    for column, name, colour in (("npv_at_low", "low value", COST), ("npv_at_high", "high value", GAIN)):
        values = rows[column].to_numpy(dtype=float)
        fig.add_trace(go.Bar(y=names, x=values - base, base=base, orientation="h", name=name, marker_color=colour,
                             customdata=[money_short(v, currency) for v in values],
                             hovertemplate="%{y}<br>" + name.split()[0] + ": %{customdata}<extra></extra>"))
    fig.add_vline(x=base, line=dict(color=INK, width=1))  # the centre line, named in the axis title (no label over the legend)
    fig.update_layout(barmode="overlay")
    # three short lines, the value on its own: a longer line runs past a half-width panel
    if scope == "plan":
        what, centre = f"Plan NPV at the plan's start [{currency}]", "centre: the plan under the budget,"
    else:
        what, centre = f"Fleet NPV of the best options [{currency}]", "centre: best options, no budget,"
    fig.update_xaxes(title_text=f"{what}<br>{centre}<br>NPV {money_short(base, currency)}", automargin=True)
    fig.update_yaxes(title_text="Varied input", automargin=True)
    lines = sum(name.count("<br>") + 1 for name in names)
    fig = _style(fig, "Sensitivity (tornado)", height=max(420, 170 + 18 * lines))
    fig.update_layout(margin=dict(b=TORNADO_BOTTOM_PX))
    return fig


def risk_ranges(rows: pd.DataFrame, currency: str, top: int = 25, scope: str = "best") -> go.Figure:
    """Monte Carlo NPV per project: P10 to P90 as a bar, P50 as a marker (largest P50 first).

    Parameters
    ----------
    rows : pandas.DataFrame
        project_id, npv_p10, npv_p50, npv_p90 [currency], sorted by P50; with asset_id and label the
        projects are named "asset: option label".
    currency : str
    top : int
        Projects drawn (the largest P50 first).
    scope : {"best", "plan"}
        The plan's projects have their NPV at their own start (their plan year), which the axis says.
    """
    if rows is None or rows.empty:
        return message_figure("No Monte Carlo results.")
    part = rows.head(top).iloc[::-1]
    names = (part["asset_id"].astype(str) + ": " + part["label"].astype(str)
             if {"asset_id", "label"} <= set(part.columns) and part["label"].notna().all() else part["project_id"])
    fig = go.Figure()
    fig.add_trace(go.Bar(y=names, x=part["npv_p90"] - part["npv_p10"], base=part["npv_p10"], orientation="h",
                         name="P10 to P90", marker_color="#b9d3d8",
                         customdata=np.column_stack([money_texts(part["npv_p10"], currency),
                                                     money_texts(part["npv_p90"], currency)]),
                         hovertemplate="%{y}<br>P10 %{customdata[0]} to P90 %{customdata[1]}<extra></extra>"))
    fig.add_trace(go.Scatter(y=names, x=part["npv_p50"], mode="markers", name="P50",
                             marker=dict(color=AFTER, size=8, symbol="diamond"),
                             customdata=money_texts(part["npv_p50"], currency),
                             hovertemplate="%{y}<br>P50 %{customdata}<extra></extra>"))
    fig.add_vline(x=0, line=dict(color=INK, width=1))
    fig.update_xaxes(title_text=f"NPV at each project's own start (its plan year) [{currency}]" if scope == "plan"
                     else f"NPV [{currency}]")
    fig.update_yaxes(title_text="Project (asset: option)", automargin=True)
    return _style(fig, f"NPV range per project (top {min(top, len(rows))} by P50)", height=max(360, 22 * len(part) + 120))


def fleet_npv_histogram(draws: np.ndarray, currency: str, scope: str = "best") -> go.Figure:
    """Monte Carlo distribution of a total NPV with P10, P50 and P90 marked: the fleet's (best option of
    every asset, ``scope`` "best") or the budgeted plan's at its start (``scope`` "plan").

    Parameters
    ----------
    draws : numpy.ndarray
        Total NPV of each draw [currency], shape (n_draws,).
    currency : str
    scope : {"best", "plan"}
    """
    draws = np.asarray(draws, dtype=float)
    if draws.size == 0:
        return message_figure("No Monte Carlo results.")
    p10, p50, p90 = np.percentile(draws, [10, 50, 90])
    fig = go.Figure(go.Histogram(x=draws, nbinsx=40, marker_color="#b9d3d8", name="draws",
                                 hovertemplate="%{x} " + currency + "<br>%{y} draws<extra></extra>"))
    # labels left of P10 and right of P50 and P90, so that close percentiles do not print over each other
    for value, name, dash_, side in ((p10, "P10", "dot", "top left"), (p50, "P50", "solid", "top right"),
                                     (p90, "P90", "dot", "top right")):
        fig.add_vline(x=value, line=dict(color=AFTER, width=2, dash=dash_),
                      annotation_text=f"{name} {money_short(value, currency)}", annotation_position=side)
    if draws.min() < 0 < draws.max():
        fig.add_vline(x=0, line=dict(color=INK, width=1))
    share = float((draws > 0).mean())
    what, detail = (("Plan NPV", "the capital plan under the budget, at its start") if scope == "plan"
                    else ("Fleet NPV", "each asset's best option, no budget"))
    fig.update_xaxes(title_text=f"{what} [{currency}]")
    fig.update_yaxes(title_text="Draws")
    # the title on two lines (one would run past a half-width panel), the second smaller
    fig = _style(fig, f"{what} over {draws.size:,} draws<br><span style='font-size:12px'>{detail} · "
                      f"P(NPV > 0) = {share * 100:.0f} %</span>")
    fig.update_layout(margin=dict(t=64))
    return fig


# ---------------------------------------------------------------------------------------------------
# End of life (one asset)
# ---------------------------------------------------------------------------------------------------
def end_of_life_costs(strategies: pd.DataFrame, currency: str, message: str = "") -> go.Figure:
    """Expected present cost of each end-of-life strategy of one asset, one horizontal bar each, the cheapest marked.

    Parameters
    ----------
    strategies : pandas.DataFrame
        label, cost_pv [currency] and cheapest (bool), top to bottom in the order given
        (``services.EndOfLifeSummary.strategies``).
    currency : str
        The case currency, for the axis title and the labels.
    message : str
        What to say instead when there is nothing to draw.

    Returns
    -------
    plotly.graph_objects.Figure
        One bar trace; the cheapest bar in :data:`AFTER` and labelled "cheapest" beside its amount (the
        word as well as the colour), the others in :data:`BEFORE`.
    """
    if strategies is None or strategies.empty:
        return message_figure(message or "No end-of-life comparison.", height=220)
    cheapest = strategies["cheapest"].to_numpy(dtype=bool)
    costs = strategies["cost_pv"].to_numpy(dtype=float)
    labels = [money_short(v, currency) + (" · cheapest" if c else "") for v, c in zip(costs, cheapest)]
    fig = go.Figure(go.Bar(
        y=strategies["label"].astype(str).tolist(), x=costs, orientation="h",
        marker_color=[AFTER if c else BEFORE for c in cheapest], text=labels, textposition="auto",
        insidetextanchor="end", cliponaxis=False, customdata=money_texts(costs, currency),
        hovertemplate="%{y}<br>expected present cost %{customdata}<extra></extra>"))
    fig.update_xaxes(title_text=f"Expected present cost [{currency}]", rangemode="tozero")
    fig.update_yaxes(autorange="reversed", automargin=True)
    return _style(fig, "Expected present cost of each strategy", height=240)
