"""Interactive curves as plotly figure specs (plain dicts), built from run records.

Pure functions: no trame, no browser. A figure is ``{"data": [trace, ...], "layout": {...}}`` in
plotly.js's own JSON shape; the browser widget draws it with hover read-out, zoom, pan, legend
toggling and a PNG button. Each curve trace carries ``meta = {"run": id, "curve": name, "unit": u}``
so :func:`figure_csv` writes exactly what is plotted.

Colours tell probes (or regions) apart and line styles tell runs apart; the legend holds one entry
per probe (clicking it hides that probe in every run) and a second, small legend says which line
style is which run. Threshold lines and crossing marks carry their words in the hover text only,
so no two labels can print over each other.
"""

from __future__ import annotations

import csv
import io

import numpy as np

#: Curve colours (distinct, calm), cycled: one per probe or region.
COLOURS = ("#1f6f8b", "#d1495b", "#d99a2b", "#3c8d2f", "#6a4c93", "#8c6d46", "#00798c", "#b5651d")
#: plotly line styles, one per run shown (newest first).
DASHES = ("solid", "dash", "dot", "dashdot", "longdash", "longdashdot")
INK, GRID = "#2d3331", "#e3e6e1"
#: Region statistics the region plot can show; "band" is the mean with a shaded min-max band.
STATS = ("band", "mean", "min", "max")
#: Regions drawn by default when a mesh has more (the hottest at the end of the newest run).
MOST_REGIONS = 5


def colour(i: int) -> str:
    return COLOURS[i % len(COLOURS)]


def _rgba(hex_colour: str, alpha: float) -> str:
    h = hex_colour.lstrip("#")
    r, g, b = (int(h[k:k + 2], 16) for k in (0, 2, 4))
    return f"rgba({r},{g},{b},{alpha})"


def names_of(mappings) -> list:
    """Keys of several dicts in first-seen order (probes or regions of several runs)."""
    seen: dict = {}
    for m in mappings:
        seen.update(dict.fromkeys(m))
    return list(seen)


def _line(x, y, name: str, group: str, col: str, dash: str, show: bool, run_id, unit: str) -> dict:
    return {
        "type": "scatter", "mode": "lines", "x": np.asarray(x, float).tolist(), "y": np.asarray(y, float).tolist(),
        "name": name, "legendgroup": group, "showlegend": show, "line": {"color": col, "dash": dash, "width": 2},
        "meta": {"run": run_id, "curve": name, "unit": unit},
        "hovertemplate": f"{name} · run {run_id}: %{{y:.3f}} {unit}<extra></extra>",
    }


def run_key(runs) -> list:
    """Legend entries (in the second legend) that say which line style is which run."""
    if len(runs) < 2:
        return []
    return [{"type": "scatter", "mode": "lines", "x": [None], "y": [None], "name": f"run {run.id}",
             "legend": "legend2", "hoverinfo": "skip", "showlegend": True,
             "line": {"color": INK, "dash": DASHES[j % len(DASHES)], "width": 2}} for j, run in enumerate(runs)]


def base_layout(ytitle: str, n_runs: int, revision: str = "keep") -> dict:
    """Axes, hover (every curve's value at the time under the mouse) and the legends' places; the
    user's zoom and hidden curves are kept while ``revision`` stays the same (e.g. the mesh's key)."""
    layout = {
        "margin": {"l": 56, "r": 12, "t": 30, "b": 44}, "autosize": True, "hovermode": "x unified",
        "font": {"size": 12, "color": INK}, "paper_bgcolor": "rgba(0,0,0,0)", "plot_bgcolor": "white",
        "xaxis": {"title": {"text": "time [s]"}, "gridcolor": GRID, "zeroline": False, "hoverformat": ".6~g"},
        "yaxis": {"title": {"text": ytitle}, "gridcolor": GRID, "zeroline": False},
        "legend": {"orientation": "h", "x": 0, "xanchor": "left", "y": 1.0, "yanchor": "bottom",
                   "font": {"size": 11}, "groupclick": "togglegroup"},
        "uirevision": revision,
    }
    if n_runs > 1:
        layout["legend2"] = {"orientation": "h", "x": 1, "xanchor": "right", "y": -0.16, "yanchor": "top",
                             "itemclick": False, "itemdoubleclick": False, "font": {"size": 11}}
        layout["margin"]["b"] = 70
    return layout


def probe_figure(runs, unit: str = "°C", revision: str = "keep") -> dict:
    """Probe curves of ``runs`` (newest first), thresholds and their first crossings.

    Parameters
    ----------
    runs : list of Run
        Each with ``id``, ``times`` (n,) [s], ``probes`` {name: (n,) [degC]} and ``summary["probes"]``
        {name: {"threshold", "crossing_time"}}.
    unit : str
        Temperature unit shown.
    revision : str
        Zoom and hidden curves are kept across figures of the same revision (a new run added).

    Returns
    -------
    dict
        A plotly figure: one line per probe and run, a dotted line per distinct threshold, an ``x``
        mark per crossing (its hover says who crossed what when).
    """
    names = names_of(r.probes for r in runs)
    data = []
    for i, name in enumerate(names):
        shown = False
        for j, run in enumerate(runs):
            if name in run.probes:
                data.append(_line(run.times, run.probes[name], name, name, colour(i), DASHES[j % len(DASHES)],
                                  not shown, run.id, unit))
                shown = True
        data += _threshold_traces(runs, name, colour(i), unit)
    layout = base_layout(f"temperature [{unit}]", len(runs), revision)
    return {"data": data + run_key(runs), "layout": layout}


def _threshold_traces(runs, name: str, col: str, unit: str) -> list:
    """A dotted line per distinct threshold of probe ``name`` and one trace of its crossing marks."""
    ends = [float(r.times[-1]) for r in runs if len(r.times)]
    t0, t1 = (0.0, max(ends)) if ends else (0.0, 1.0)
    limits, xs, ys, texts = {}, [], [], []
    for run in runs:
        info = run.summary.get("probes", {}).get(name, {})
        limit = info.get("threshold")
        if limit is None:
            continue
        limits[float(limit)] = None
        if info.get("crossing_time") is not None:
            xs.append(float(info["crossing_time"]))
            ys.append(float(limit))
            texts.append(f"{name} reached {limit:g} {unit} at {info['crossing_time']:.4g} s (run {run.id})")
    out = [{"type": "scatter", "mode": "lines", "x": [t0, t1], "y": [v, v], "legendgroup": name,
            "showlegend": False, "name": f"{name} limit", "line": {"color": col, "dash": "dot", "width": 1},
            "opacity": 0.8, "hovertemplate": f"{name} limit {v:g} {unit}<extra></extra>"} for v in limits]
    if xs:
        out.append({"type": "scatter", "mode": "markers", "x": xs, "y": ys, "text": texts, "legendgroup": name,
                    "showlegend": False, "name": f"{name} crossing",
                    "marker": {"symbol": "x-thin-open", "size": 11, "color": col, "line": {"width": 2, "color": col}},
                    "hovertemplate": "%{text}<extra></extra>"})
    return out


def default_regions(runs, most: int = MOST_REGIONS) -> list:
    """Regions drawn before the user chooses: all of them, or the ``most`` hottest at the end of the
    newest run (the first of ``runs``) when there are more."""
    names = names_of(r.regions for r in runs)
    if len(names) <= most or not runs:
        return names
    last = {n: float(np.max(r["max"])) for n, r in runs[0].regions.items() if len(r["max"])}
    return sorted(names, key=lambda n: -last.get(n, -np.inf))[:most]


def region_figure(runs, regions=None, stat: str = "band", unit: str = "°C", revision: str = "keep") -> dict:
    """Region curves of ``runs`` (newest first): one colour per region, one line style per run.

    Parameters
    ----------
    runs : list of Run
        Each with ``regions`` {name: {"time", "mean", "min", "max": (n,) arrays}} [s, degC].
    regions : list of str, optional
        Regions to draw (default: :func:`default_regions`).
    stat : {"band", "mean", "min", "max"}
        A statistic, or the mean with a shaded band from min to max.
    unit, revision : str
        As for :func:`probe_figure`.
    """
    if stat not in STATS:
        raise ValueError(f"region statistic {stat!r}: allowed are {', '.join(STATS)}")
    names = names_of(r.regions for r in runs)
    chosen = [n for n in (default_regions(runs) if regions is None else regions) if n in names]
    data = []
    for name in chosen:
        col = colour(names.index(name))
        shown = False
        for j, run in enumerate(runs):
            r = run.regions.get(name)
            if r is None:
                continue
            dash = DASHES[j % len(DASHES)]
            if stat == "band":
                data += _band(r, name, col, run.id, unit)
            key = "mean" if stat == "band" else stat
            data.append(_line(r["time"], r[key], f"{name} {key}", name, col, dash, not shown, run.id, unit))
            shown = True
    layout = base_layout(f"temperature [{unit}]", len(runs), revision)
    return {"data": data + run_key(runs), "layout": layout}


def _band(r: dict, name: str, col: str, run_id, unit: str) -> list:
    """The min-max band of one region in one run: max drawn invisibly, min filled up to it."""
    common = {"type": "scatter", "mode": "lines", "x": np.asarray(r["time"], float).tolist(), "legendgroup": name,
              "showlegend": False, "line": {"width": 0, "color": col}}
    top = common | {"y": np.asarray(r["max"], float).tolist(), "name": f"{name} max",
                    "meta": {"run": run_id, "curve": f"{name} max", "unit": unit},
                    "hovertemplate": f"{name} max · run {run_id}: %{{y:.3f}} {unit}<extra></extra>"}
    low = common | {"y": np.asarray(r["min"], float).tolist(), "name": f"{name} min", "fill": "tonexty",
                    "fillcolor": _rgba(col, 0.14), "meta": {"run": run_id, "curve": f"{name} min", "unit": unit},
                    "hovertemplate": f"{name} min · run {run_id}: %{{y:.3f}} {unit}<extra></extra>"}
    return [top, low]


def empty_figure(message: str) -> dict:
    """A figure with no axes that says why there are no curves."""
    return {"data": [], "layout": {
        "xaxis": {"visible": False}, "yaxis": {"visible": False}, "paper_bgcolor": "rgba(0,0,0,0)",
        "plot_bgcolor": "rgba(0,0,0,0)", "margin": {"l": 10, "r": 10, "t": 10, "b": 10},
        "annotations": [{"text": message, "showarrow": False, "font": {"size": 13, "color": "#6d7470"},
                         "xref": "paper", "yref": "paper", "x": 0.5, "y": 0.5}]}}


def figure_csv(figure: dict) -> str:
    """The curves of a figure as CSV text, one row per point: ``run, curve, time_s, value, unit``."""
    buf = io.StringIO()
    out = csv.writer(buf, lineterminator="\n")
    out.writerow(["run", "curve", "time_s", "value", "unit"])
    for trace in figure.get("data", []):
        meta = trace.get("meta")
        if not meta:
            continue
        for t, v in zip(trace["x"], trace["y"]):
            out.writerow([meta["run"], meta["curve"], repr(float(t)), repr(float(v)), meta["unit"]])
    return buf.getvalue()
