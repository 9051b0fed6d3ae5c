"""Draw efficiency, power factor and reactive power against load for one machine of each kind.

Writes PNG files into docs/img/ (needs the `kaleido` package and a Chromium on the machine):

    .venv/bin/python docs/scripts/plot_machine_curves.py

The machines are typical examples with default parameters (30 kW 4-pole 50 Hz except the wound-field
synchronous motor, a 1.6 MW 6-pole machine at its 0.9 leading setpoint); the curves show the shapes the
models produce, not a particular product.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from models import induction, synchronous

OUT = Path(__file__).resolve().parents[1] / "img"
LOAD_FRAC = np.linspace(0.05, 1.25, 49)


def curves() -> dict[str, dict[str, np.ndarray]]:
    """Efficiency [-], power factor [-] and kVAr per kW of rating against shaft load, per machine kind."""
    rated = 30.0
    sync = induction.sync_speed_rpm(50, 4)
    out = {}
    im = induction.calibrate_induction(rated, 0.936, 0.84, 1477.0, sync)
    p = induction.induction_operating_point(im, LOAD_FRAC * rated)
    out["Induction IE3 (line)"] = {"eff": p.efficiency_frac, "pf": p.power_factor, "q": p.q_kvar / rated}
    old = induction.calibrate_induction(rated, 0.907, 0.83, 1465.0, sync, rewind_count=2)
    p = induction.induction_operating_point(old, LOAD_FRAC * rated)
    out["Induction IE1, rewound twice"] = {"eff": p.efficiency_frac, "pf": p.power_factor, "q": p.q_kvar / rated}
    lspm = synchronous.lspm_operating_point(LOAD_FRAC * rated, rated, 0.955, 4, 50.0)
    eff = LOAD_FRAC * rated / lspm.p_in_kw
    s = np.hypot(lspm.p_in_kw, lspm.q_kvar)
    out["Line-start PM IE4"] = {"eff": eff, "pf": lspm.p_in_kw / s, "q": lspm.q_kvar / rated}
    for kind, label in (("pm", "PM motor on a drive IE5"), ("synrm", "Reluctance motor on a drive IE4")):
        speed = np.cbrt(np.clip(LOAD_FRAC, 0, 1))  # centrifugal load: power ~ speed cubed
        torque = LOAD_FRAC / np.maximum(speed, 1e-3)
        r = synchronous.drive_fed_synchronous_operating_point(np.clip(speed, 0, 1), np.clip(torque, 0, 1.5), rated,
                                                              0.96 if kind == "pm" else 0.95, kind)
        eff = np.asarray(r.p_shaft_kw) / np.asarray(r.p_in_kw)
        out[label] = {"eff": eff, "pf": np.asarray(r.power_factor), "q": np.asarray(r.q_kvar) / rated}
    big = 1600.0
    params = synchronous.wfsm_parameters_from_rating(big, 6600.0, rated_efficiency_frac=0.97, rated_power_factor=0.9)
    w = synchronous.wfsm_operating_point(LOAD_FRAC * big, **params, mode="power_factor", power_factor_setpoint=0.9,
                                         setpoint_leading=True)
    out["Wound-field synchronous 1.6 MW, 0.9 leading"] = {
        "eff": np.asarray(w.efficiency_frac), "pf": np.asarray(w.power_factor), "q": np.asarray(w.q_kvar) / big}
    return out


def figure(data: dict[str, dict[str, np.ndarray]]) -> go.Figure:
    fig = make_subplots(rows=3, cols=1, shared_xaxes=True, vertical_spacing=0.06,
                        subplot_titles=("Efficiency [%]", "Power factor at the supply [-]", "Reactive power per kW of rating [kVAr/kW] (negative = supplied)"))
    palette = ("#1b6f8a", "#b5523b", "#6a8d2f", "#7a4fa3", "#c08a1e", "#3b3b3b")
    for (name, d), colour in zip(data.items(), palette):
        x = 100 * LOAD_FRAC
        line = {"color": colour, "width": 2}
        fig.add_trace(go.Scatter(x=x, y=100 * d["eff"], name=name, legendgroup=name, line=line), row=1, col=1)
        fig.add_trace(go.Scatter(x=x, y=d["pf"], name=name, legendgroup=name, showlegend=False, line=line), row=2, col=1)
        fig.add_trace(go.Scatter(x=x, y=d["q"], name=name, legendgroup=name, showlegend=False, line=line), row=3, col=1)
    fig.update_yaxes(range=[60, 100], row=1, col=1)
    fig.update_xaxes(title_text="Shaft load [% of rating]", row=3, col=1)
    fig.update_layout(width=900, height=1000, template="simple_white", legend={"orientation": "h", "y": -0.08},
                      title="Part-load behaviour of each machine kind (model defaults)")
    return fig


def main() -> None:
    OUT.mkdir(parents=True, exist_ok=True)
    fig = figure(curves())
    path = OUT / "machine_curves.png"
    fig.write_image(path, scale=1)
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
