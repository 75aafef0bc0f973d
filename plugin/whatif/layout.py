"""The live what-if bar: the switch, what the curves show now, rebuild and confirm."""

from __future__ import annotations

from trame.widgets import html
from trame.widgets import vuetify3 as v3


def build(panel) -> None:
    """One line below the run bar, shown once there is a run on this mesh."""
    ctrl = panel.ctrl
    with html.Div(classes="d-flex align-center ga-3 px-3 py-1 hs-livebar", v_if="hs_runs_here", id="hs-livebar"):
        v3.VSwitch(v_model=("hs_live",), label="live what-if", density="compact", hide_details=True,
                   color="#2f5d50", id="hs-live", title="edit schedules and see the curves change at once "
                   "(a reduced-model estimate, with its error)", disabled=("hs_running",))
        v3.VProgressCircular(v_if="hs_live_mode == 'building'", indeterminate=True, size=18, width=2,
                             color="#2f5d50")
        html.Span("{{ hs_live_text }}", classes=("hs_live_mode == 'stale' || hs_live_mode == 'error' ? "
                                                  "'text-caption text-warning flex-grow-1' : "
                                                  "'text-caption flex-grow-1'",), id="hs-live-text")
        v3.VBtn("Rebuild", size="small", variant="text", color="#2f5d50", v_if="hs_live && hs_live_mode == 'stale'",
                click=ctrl.hs_live_rebuild, id="hs-live-rebuild")
        v3.VBtn("Confirm with a full run", size="small", variant="tonal", color="#2f5d50",
                v_if="hs_live && hs_live_mode == 'live'", disabled=("hs_running || !!hs_run_reason",),
                click="hs_run_request += 1", id="hs-live-confirm")
