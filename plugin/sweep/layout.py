"""The sweep form: a button in the runs drawer opens it in a dialog; the table fills as variants finish."""

from __future__ import annotations

from heatsoak.plugin.sweep.actions import SLOTS
from trame.widgets import html
from trame.widgets import vuetify3 as v3

GREEN = "#2f5d50"


def _slot(i: int) -> None:
    with html.Div(classes="d-flex ga-2 align-center"):
        v3.VAutocomplete(v_model=(f"hs_sweep_key_{i}",), items=("hs_sweep_keys",), label=f"number {i + 1}",
                         density="compact", variant="outlined", hide_details=True, clearable=True,
                         id=f"hs-sweep-key-{i}", style="min-width: 260px", disabled=("hs_sweep_running",))
        v3.VTextField(v_model=(f"hs_sweep_values_{i}",), label="values, e.g. 300, 600, 1200", density="compact",
                      variant="outlined", hide_details=True, id=f"hs-sweep-values-{i}",
                      disabled=("hs_sweep_running",))


def build(panel) -> None:
    """The button and its dialog."""
    ctrl = panel.ctrl
    v3.VBtn("Sweep...", prepend_icon="mdi-grid", size="small", variant="tonal", color=GREEN, block=True,
            click="hs_sweep_open = true", id="hs-sweep-open", disabled=("!hs_mesh_name",),
            classes="justify-start mx-3 mb-2", style="width: calc(100% - 24px)")
    with v3.VDialog(v_model=("hs_sweep_open",), max_width=1100, scrollable=True):
        with v3.VCard(id="hs-sweep-card"):
            v3.VCardTitle("Sweep: every combination of the values", classes="text-subtitle-1")
            with v3.VCardText():
                html.Div("Pick up to three numbers of the set-up and give each a list of values. Variants run on "
                         "a local dask cluster (one reduced model when only schedules change); finished ones "
                         "are kept as runs, ticked for the curves.", classes="text-caption hs-note mb-2")
                with html.Div(classes="d-flex flex-column ga-2"):
                    for i in range(SLOTS):
                        _slot(i)
                with html.Div(classes="d-flex ga-2 align-center my-2"):
                    v3.VBtn("Run sweep", prepend_icon="mdi-play", color=GREEN, size="small", id="hs-sweep-start",
                            click=ctrl.hs_sweep_start, disabled=("hs_sweep_running",))
                    v3.VBtn("Stop", prepend_icon="mdi-stop", size="small", variant="text", id="hs-sweep-stop",
                            click=ctrl.hs_sweep_stop, v_if="hs_sweep_running")
                    v3.VProgressCircular(v_if="hs_sweep_running", indeterminate=True, size=18, width=2, color=GREEN)
                    html.Span("{{ hs_sweep_text }}", classes="text-caption", id="hs-sweep-text")
                html.Div("{{ hs_sweep_error }}", v_if="hs_sweep_error", classes="text-caption text-error",
                         id="hs-sweep-error")
                v3.VDataTable(headers=("hs_sweep_headers",), items=("hs_sweep_rows",), density="compact",
                              items_per_page=-1, id="hs-sweep-table", classes="text-caption",
                              v_if="hs_sweep_rows.length", hide_default_footer=True)
                v3.VAlert(text=("hs_disclaimer",), density="compact", variant="tonal", color="#7a5c12",
                          classes="mt-2 text-caption", icon="mdi-scale-balance")
            with v3.VCardActions():
                v3.VSpacer()
                v3.VBtn("Close", size="small", variant="text", click="hs_sweep_open = false", id="hs-sweep-close")
