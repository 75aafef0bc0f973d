"""The runs drawer: runs kept for what-if comparison, and export."""

from __future__ import annotations

from heatsoak.plugin.export import layout as export_layout
from heatsoak.plugin.widgets import EDITS_SENT_JS
from trame.widgets import html
from trame.widgets import vuetify3 as v3

DOWNLOADS = (
    ("Case file (.toml)", "mdi-file-cog-outline", "case.toml", "hs_export_case", "text/plain", "hs-export-case"),
    ("Case and mesh (.zip)", "mdi-folder-zip-outline", "case-bundle.zip", "hs_export_bundle", "application/zip",
     "hs-export-bundle"),
    ("Result files (.zip)", "mdi-folder-download-outline", "results.zip", "hs_export_results", "application/zip",
     "hs-export-results"),
    ("Probe values (.csv)", "mdi-table-arrow-down", "probes.csv", "hs_export_probes", "text/csv", "hs-export-probes"),
    ("Picture (.png)", "mdi-camera-outline", "view.png", "hs_export_png", "image/png", "hs-export-png"),
)


def save_js(name: str, call: str, mime: str) -> str:
    """Client code that saves what ``call`` returns, and nothing when it returns null (the handler said why);
    ``call`` is made after the pending edits are sent (the file holds what was typed)."""
    return f"{EDITS_SENT_JS}.then(() => {call}).then(d => d != null && utils.download({name}, d, {mime}))"


def build(panel) -> None:
    """Run list (it scrolls) with overlay choices, then the export buttons and the engineering note
    (always in reach below the list, however many runs are kept)."""
    with html.Div(classes="hs-run-scroll"):
        run_list(panel)
    with html.Div(classes="hs-export pb-2"):
        export_buttons(panel)


def run_list(panel) -> None:
    """Runs kept: tick to overlay (runs on the mesh open now only), the eye shows one in 3D."""
    ctrl = panel.ctrl
    html.Div("Runs", classes="text-subtitle-2 px-3 pt-3")
    html.Div("Every run is kept until discarded. Tick runs on this mesh to overlay their curves; "
             "the eye shows a run in 3D.", classes="text-caption px-3 hs-note")
    with v3.VList(density="compact", id="hs-run-list", classes="px-1"):
        with v3.VListItem(v_for="r in hs_runs", key="r.id", classes=("r.here ? 'hs-run-row' : 'hs-run-row hs-run-away'",),
                          active=("hs_shown_run == r.id && r.here",), color="#2f5d50"):
            with v3.Template(v_slot_prepend=True):
                v3.VCheckboxBtn(v_model=("hs_compare",), value=("r.id",), density="compact", disabled=("!r.here",))
            v3.VListItemTitle("Run {{ r.id }} · {{ r.status }}", classes="text-body-2")
            html.Div("{{ r.label }}", classes="text-caption hs-run-label", style="white-space: normal")
            html.Div("on {{ r.mesh }}, not the mesh open now: open it to see this run", v_if="!r.here",
                     classes="text-caption hs-note hs-run-elsewhere", style="white-space: normal")
            with v3.Template(v_slot_append=True):
                v3.VBtn(icon="mdi-eye-outline", size="x-small", variant="text", disabled=("!r.here",),
                        click="hs_shown_run = r.id; hs_view = 'results'")
                v3.VBtn(icon="mdi-delete-outline", size="x-small", variant="text",
                        click=(ctrl.hs_discard, "[r.id]"))
    html.Div("No runs yet.", v_if="!hs_runs.length", classes="text-caption px-3 hs-note")


def export_buttons(panel) -> None:
    """The export buttons, their error line and the engineering note."""
    html.Div("Export", classes="text-subtitle-2 px-3 pt-2")
    with html.Div(classes="d-flex flex-column ga-1 px-3"):
        for label, icon, name, trigger, mime, ident in DOWNLOADS:
            v3.VBtn(label, prepend_icon=icon, size="small", variant="tonal", color="#2f5d50", block=True,
                    click=save_js(f"'{name}'", f"trigger('{trigger}')", f"'{mime}'"), id=ident,
                    disabled=("!hs_runs_here" if "results" in name or "probes" in name else "false",),
                    classes="justify-start")
        with html.Div(classes="d-flex ga-1"):
            v3.VSelect(v_model=("hs_movie_format",), items=("['gif', 'mp4']",), density="compact",
                       variant="outlined", hide_details=True, style="max-width: 90px")
            v3.VBtn("Animation", prepend_icon="mdi-movie-open-outline", size="small", variant="tonal",
                    color="#2f5d50", disabled=("!hs_runs_here",), id="hs-export-movie",
                    click=save_js("`animation.${hs_movie_format}`", "trigger('hs_export_movie', [hs_movie_format])",
                                  "`image/${hs_movie_format}`"))
        export_layout.job_line(panel)
        html.Div("{{ hs_export_error }}", v_if="hs_export_error", classes="text-caption text-error")
    v3.VAlert(text=("hs_disclaimer",), density="compact", variant="tonal", color="#7a5c12",
              classes="mx-3 mt-2 text-caption", icon="mdi-scale-balance", id="hs-disclaimer")
