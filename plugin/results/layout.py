"""The run bar, the player and the curves (below the 3D view)."""

from __future__ import annotations

from heatsoak.plugin.results import time_error
from trame.widgets import html
from trame.widgets import vuetify3 as v3

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


def player(panel) -> None:
    """Play, pause, step, scrub, loop, speed, colour range, clip plane, difference."""
    ctrl = panel.ctrl
    with html.Div(classes="hs-player px-3 py-1", v_if="hs_runs.length", id="hs-player"):
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
                       variant="outlined", hide_details=True, style="min-width: 110px; max-width: 110px")
            with v3.VBtnToggle(v_model=("hs_range_mode",), density="compact", mandatory=True, divided=True,
                               variant="outlined", color="#2f5d50", id="hs-range-mode"):
                v3.VBtn("range: whole run", value="fixed", size="small")
                v3.VBtn("range: this frame", value="auto", size="small")
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
                       style="max-width: 170px", id="hs-diff")


def curves(panel) -> None:
    """Probe curves with thresholds and crossings, region mean/min/max curves."""
    with html.Div(classes="d-flex ga-2 px-3 pb-2 hs-curves", v_if="hs_runs.length", id="hs-curves"):
        with v3.VCard(variant="outlined", classes="pa-2 flex-grow-1 hs-card"):
            html.Div("Probes", classes="text-subtitle-2")
            time_error.widget()
            html.Div(v_html=("hs_probe_svg",), classes="hs-plot", id="hs-probe-plot")
            with v3.VTable(density="compact", v_if="hs_probe_table.length", id="hs-probe-values"):
                with html.Thead(), html.Tr():
                    for h in ("Run", "Probe", "Last [°C]", "Limit [°C]", "Reached at"):
                        html.Th(h, classes="text-caption")
                with html.Tbody():
                    with html.Tr(v_for="row in hs_probe_table", key="row.run + row.probe", classes="hs-probe-row"):
                        html.Td("{{ row.run }}", classes="text-caption")
                        html.Td("{{ row.probe }}", classes="text-caption")
                        html.Td("{{ row.last == null ? '' : row.last.toFixed(4) }}", classes="text-caption hs-last")
                        html.Td("{{ row.threshold == null ? '–' : row.threshold }}", classes="text-caption")
                        html.Td("{{ row.crossing == null ? (row.threshold == null ? '' : 'not reached') : "
                                "row.crossing.toPrecision(4) + ' s' }}", classes="text-caption")
        with v3.VCard(variant="outlined", classes="pa-2 flex-grow-1 hs-card"):
            html.Div("Regions: mean, min and max", classes="text-subtitle-2")
            html.Div(v_html=("hs_region_svg",), classes="hs-plot", id="hs-region-plot")


def build(panel) -> None:
    run_bar(panel)
    player(panel)
    curves(panel)
