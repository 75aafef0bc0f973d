"""The run bar, the player and the curves (below the 3D view)."""

from __future__ import annotations

from heatsoak.plugin.results import time_error
from heatsoak.plugin.runs.layout import save_js
from heatsoak.plugin.whatif import layout as whatif_layout
from trame.widgets import html, plotly
from trame.widgets import vuetify3 as v3

#: ``v_show`` of the host's 3D view box: hidden while the curves are given the whole height.
VIEW_SHOWN = "!hs_runs_here || hs_pane != 'curves'"
#: Choices of what the 3D view shows: the temperature, or its difference to another run on the same mesh.
DIFF_ITEMS = ("[{title: 'temperature', value: null}].concat(hs_runs.filter(r => r.id != hs_shown_run && r.here)"
              ".map(r => ({title: `minus run ${r.id}`, value: r.id})))")


def run_bar(panel) -> None:
    """Run and cancel, progress, and why running is not possible yet."""
    ctrl = panel.ctrl
    with html.Div(classes="d-flex align-center ga-3 px-3 py-2 hs-runbar", id="hs-runbar"):
        v3.VBtn("Run", prepend_icon="mdi-play-circle-outline", color="#2f5d50", variant="flat",
                disabled=("hs_running || !!hs_run_reason",), click="hs_run_request += 1", id="hs-run")
        v3.VBtn("Cancel", prepend_icon="mdi-stop-circle-outline", v_if="hs_running", variant="outlined",
                color="#8c3b2e", click=ctrl.hs_cancel, id="hs-cancel")
        with html.Div(classes="flex-grow-1", style="min-width: 0"):
            v3.VProgressLinear(v_if="hs_running || hs_progress_text", model_value=("hs_progress",), height=6,
                               rounded=True, color="#2f5d50", bg_color="#cfd8d3", id="hs-progress")
            with html.Div(classes="text-caption d-flex ga-2 align-center"):
                html.Span("{{ hs_progress_text }}", id="hs-progress-text")
                v3.VIcon("mdi-information-outline", size="x-small", v_if="hs_solver_reason && !hs_running",
                         title=("`why this solver: ${hs_solver_reason}`",), id="hs-solver-why")
            html.Div("{{ hs_run_reason }}", v_if="hs_run_reason && !hs_running", classes="text-caption hs-reason",
                     id="hs-run-reason")
            html.Div("{{ hs_run_error }}", v_if="hs_run_error", classes="text-caption text-error", id="hs-run-error")
        pane_toggle()


def player(panel) -> None:
    """Play, pause, step, scrub, loop, speed, colour range, clip plane, difference."""
    ctrl = panel.ctrl
    with html.Div(classes="hs-player px-3 py-1", v_if="hs_runs_here", id="hs-player"):
        with html.Div(classes="d-flex align-center ga-2 flex-wrap"):
            with v3.VBtnToggle(v_model=("hs_view",), density="compact", mandatory=True, divided=True,
                               variant="outlined", color="#2f5d50", id="hs-view-mode"):
                v3.VBtn("set-up", value="setup", size="small")
                v3.VBtn("results", value="results", size="small")
            v3.VBtn(icon="mdi-skip-previous", size="small", variant="text", click=(ctrl.hs_step, "[-1]"),
                    id="hs-prev", disabled=("hs_view != 'results'",))
            v3.VBtn(icon=("hs_playing ? 'mdi-pause' : 'mdi-play'",), size="small", variant="tonal", color="#2f5d50",
                    click="hs_playing ? trigger('hs_pause') : trigger('hs_play')", id="hs-play",
                    disabled=("hs_view != 'results'",))
            v3.VBtn(icon="mdi-skip-next", size="small", variant="text", click=(ctrl.hs_step, "[1]"), id="hs-next",
                    disabled=("hs_view != 'results'",))
            v3.VSlider(v_model=("hs_frame",), min=0, max=("Math.max(hs_n_frames - 1, 0)",), step=1,
                       hide_details=True, density="compact", color="#2f5d50", classes="flex-grow-1 mx-2",
                       style="min-width: 220px", id="hs-scrub", disabled=("hs_view != 'results'",))
            html.Span("{{ hs_frame_time }}", classes="text-caption hs-time", id="hs-frame-time")
        with html.Div(classes="d-flex align-center ga-3 flex-wrap"):
            v3.VCheckbox(v_model=("hs_loop",), label="loop", density="compact", hide_details=True)
            v3.VSelect(v_model=("hs_speed",), items=("hs_speeds",), label="frames/s", density="compact",
                       variant="outlined", hide_details=True, style="min-width: 96px; max-width: 96px")
            with v3.VBtnToggle(v_model=("hs_range_mode",), density="compact", mandatory=True, divided=True,
                               variant="outlined", color="#2f5d50", id="hs-range-mode"):
                v3.VBtn("whole run", value="fixed", size="small", title="colour range over the whole run")
                v3.VBtn("this frame", value="auto", size="small", title="colour range of this frame")
            with html.Span(classes="text-caption"):
                html.Span("{{ hs_range[0] }} … {{ hs_range[1] }}", id="hs-range")
                html.Span("{{ hs_diff_run == null ? '°C' : 'K' }}", classes="ml-1", id="hs-range-unit")
            v3.VSwitch(v_model=("hs_clip",), label="clip", density="compact", hide_details=True, color="#2f5d50",
                       id="hs-clip")
            v3.VSelect(v_if="hs_clip", v_model=("hs_clip_axis",), items=("['x', 'y', 'z']",), density="compact",
                       variant="outlined", hide_details=True, style="max-width: 80px", label="normal")
            v3.VSlider(v_if="hs_clip", v_model=("hs_clip_pos",), min=0, max=100, step=1, hide_details=True,
                       density="compact", style="max-width: 160px", color="#2f5d50", end="hs_clip_pos = $event")
            v3.VSelect(v_model=("hs_diff_run",), items=(DIFF_ITEMS,),
                       label="show", density="compact", variant="outlined", hide_details=True,
                       style="max-width: 150px", id="hs-diff")


def pane_toggle() -> None:
    """Give the room to the 3D view, to the curves, or share it."""
    with v3.VBtnToggle(v_model=("hs_pane",), density="compact", mandatory=True, divided=True, variant="outlined",
                       color="#2f5d50", v_if="hs_runs_here", id="hs-pane"):
        for value, icon, tip in (("view", "mdi-cube-outline", "3D view only"),
                                 ("both", "mdi-view-split-horizontal", "3D view and curves"),
                                 ("curves", "mdi-chart-line", "curves only")):
            v3.VBtn(icon=icon, value=value, size="small", title=tip, id=f"hs-pane-{value}")


def curves(panel) -> None:
    """Interactive probe and region curves in tabs, the probe table beside (or below) the probes."""
    with html.Div(v_show="hs_runs_here && hs_pane != 'view'", id="hs-curves",
                  classes=("hs_pane == 'curves' ? 'hs-curves hs-curves-max' : 'hs-curves'",)):
        curves_bar(panel)
        with html.Div(v_if="hs_curves_tab == 'probes' && hs_time_error", classes="hs-curves-note px-3"):
            time_error.widget()
        with html.Div(v_show="hs_curves_tab == 'probes'", classes="hs-curves-body hs-probe-body"):
            with html.Div(classes="hs-fig hs-probe-fig", id="hs-probe-plot"):
                plotly.Figure(state_variable_name="hs_probe_fig", display_logo=False, responsive=True,
                              mode_bar_buttons_to_remove=MODEBAR_OFF,
                              to_image_options=("{filename: 'probe-curves', format: 'png', scale: 2}",))
            probe_table()
        with html.Div(v_show="hs_curves_tab == 'regions'", classes="hs-curves-body"):
            with html.Div(classes="hs-fig", id="hs-region-plot"):
                plotly.Figure(state_variable_name="hs_region_fig", display_logo=False, responsive=True,
                              mode_bar_buttons_to_remove=MODEBAR_OFF,
                              to_image_options=("{filename: 'region-curves', format: 'png', scale: 2}",))


#: Buttons of the plot's tool bar that do nothing useful on time curves.
MODEBAR_OFF = ("['select2d', 'lasso2d', 'autoScale2d']",)


def curves_bar(panel) -> None:
    """Tabs, the region and statistic choices, and the CSV of what is plotted."""
    with html.Div(classes="d-flex align-center ga-2 px-2 hs-curves-bar"):
        with v3.VTabs(v_model=("hs_curves_tab",), density="compact", color="#2f5d50", id="hs-curves-tabs"):
            v3.VTab("Probes", value="probes", id="hs-tab-probes")
            v3.VTab("Regions", value="regions", id="hs-tab-regions")
        v3.VSpacer()
        with html.Div(v_if="hs_curves_tab == 'regions'", classes="d-flex align-center ga-2"):
            with v3.VSelect(v_model=("hs_region_pick",), items=("hs_region_names",), multiple=True, label="regions",
                            density="compact", variant="outlined", hide_details=True, id="hs-region-pick",
                            classes="hs-bar-select"):
                with v3.Template(v_slot_selection="{ item, index }"):
                    html.Span("{{ hs_region_pick.length === 1 ? item.title : "
                              "hs_region_pick.length + ' of ' + hs_region_names.length }}",
                              v_if="index === 0", classes="text-truncate")
            v3.VSelect(v_model=("hs_region_stat",), items=("hs_stat_items",), label="show", density="compact",
                       variant="outlined", hide_details=True, classes="hs-bar-select", id="hs-region-stat")
        v3.VBtn(icon="mdi-table-arrow-down", size="small", variant="text", color="#2f5d50",
                id="hs-curves-csv", title="save the curves plotted here as CSV",
                click=save_js("`${hs_curves_tab}-curves.csv`", "trigger('hs_export_curves', [hs_curves_tab])",
                              "'text/csv'"))


def probe_table() -> None:
    """Last value, limit and when it was first reached, per run and probe; never wider than its box."""
    with html.Div(classes="hs-probe-table", v_if="hs_probe_table.length"):
        with v3.VTable(density="compact", id="hs-probe-values"):
            with html.Thead(), html.Tr():
                for h in ("Run", "Probe", "Last [°C]", "Limit [°C]", "Reached at"):
                    html.Th(h, classes="text-caption")
            with html.Tbody():
                with html.Tr(v_for="row in hs_probe_table", key="row.run + row.probe", classes="hs-probe-row"):
                    html.Td("{{ row.run }}", classes="text-caption")
                    html.Td("{{ row.probe }}", classes="text-caption")
                    html.Td("{{ row.last == null ? '' : row.last.toFixed(3) }}", classes="text-caption hs-last")
                    html.Td("{{ row.threshold == null ? '–' : row.threshold }}", classes="text-caption")
                    html.Td("{{ row.crossing == null ? (row.threshold == null ? '' : 'not reached') : "
                            "row.crossing.toPrecision(4) + ' s' }}", classes="text-caption hs-reached")


def build(panel) -> None:
    run_bar(panel)
    whatif_layout.build(panel)
    player(panel)
    curves(panel)
