"""Handlers of the curves: the runs ticked for overlay, the region and statistic chosen, CSV export.

The figures themselves are built by the pure functions of :mod:`heatsoak.plugin.results.figures`;
here they are put in the state the browser's plot widgets draw from.
"""

from __future__ import annotations

from heatsoak.plugin.results import figures
from heatsoak.plugin.runs.here import current_key, is_here

#: What the statistic selector of the region plot offers.
STAT_ITEMS = [{"title": "mean+band", "value": "band"}, {"title": "mean", "value": "mean"},
              {"title": "min", "value": "min"}, {"title": "max", "value": "max"}]


def register(panel) -> None:
    """Defaults of the curves and their handlers."""
    state, server = panel.state, panel.server
    state.update({"hs_probe_fig": figures.empty_figure(""), "hs_region_fig": figures.empty_figure(""),
                  "hs_probe_table": [], "hs_region_names": [], "hs_region_pick": None, "hs_region_stat": "band",
                  "hs_stat_items": STAT_ITEMS, "hs_curves_tab": "probes", "hs_pane": "both"})

    @state.change("hs_compare")
    def on_compare(**_):
        refresh_curves(panel)

    @state.change("hs_region_pick", "hs_region_stat")
    def on_region_choice(**_):
        refresh_regions(panel)

    @server.trigger("hs_export_curves")
    def export_curves(which):
        """CSV text of the curves plotted now (``which``: "probes" or "regions")."""
        figure = state.hs_region_fig if which == "regions" else state.hs_probe_fig
        return figures.figure_csv(figure)


def compared_runs(panel) -> list:
    """Runs ticked for overlay that were computed on the mesh open now, newest first."""
    runs = [panel.runs.get(i) for i in panel.state.hs_compare or []]
    return sorted((r for r in runs if is_here(panel, r)), key=lambda r: -r.id)


def refresh_curves(panel) -> None:
    """Probe curves and table, and the region choices, of the runs ticked on this mesh."""
    state = panel.state
    runs = compared_runs(panel)
    if not runs:
        state.hs_probe_fig = figures.empty_figure("Run the case, or tick a run on this mesh, to see curves here")
        state.hs_probe_table = []
        state.hs_region_names, state.hs_region_pick = [], None
        refresh_regions(panel)
        return
    probe_names = [n for r in runs for n in r.probes]
    state.hs_probe_fig = (figures.probe_figure(runs, revision=current_key(panel)) if probe_names
                          else figures.empty_figure("No probes in these runs: add some in the set-up"))
    state.hs_probe_table = probe_rows(runs)
    names = figures.names_of(r.regions for r in runs)
    if names != state.hs_region_names or state.hs_region_pick is None:
        state.hs_region_names = names
        state.hs_region_pick = figures.default_regions(runs)
    refresh_regions(panel)


def refresh_regions(panel) -> None:
    """The region plot for the regions and statistic chosen."""
    state = panel.state
    runs = compared_runs(panel)
    if not runs or not state.hs_region_pick:
        text = "Choose regions to draw" if runs else "Region curves show here after a run"
        state.hs_region_fig = figures.empty_figure(text)
        return
    state.hs_region_fig = figures.region_figure(runs, state.hs_region_pick, state.hs_region_stat or "band",
                                                revision=current_key(panel))


def probe_rows(runs) -> list:
    """Rows of the probe table: last value, limit and when it was first reached, per run and probe."""
    table = []
    for run in runs:
        for name, values in run.probes.items():
            info = run.summary.get("probes", {}).get(name, {})
            table.append({"run": run.id, "probe": name, "last": float(values[-1]) if len(values) else None,
                          "threshold": info.get("threshold"), "crossing": info.get("crossing_time")})
    return table
