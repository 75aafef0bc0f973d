"""The export job under way (results zip, picture or animation): its phase, progress and cancel, and the
hook that saves its file when done."""

from __future__ import annotations

from heatsoak.plugin.session.layout import WATCHING
from trame.widgets import client, html
from trame.widgets import vuetify3 as v3

#: Client code run when a job's file is ready: fetch it once and let the browser save it. A big file comes
#: from its one-time address (the browser streams it to disk), taken by the editing tab only: a watching
#: tab gets the same event.
SAVE_READY_JS = (f"$event.url ? (!({WATCHING}) && Object.assign(utils.get('document').createElement('a'),"
                 " {href: $event.url, download: $event.name}).click())"
                 " : trigger('hs_take_download').then(d => d != null && utils.download($event.name, d, $event.mime))")


def job_line(panel) -> None:
    """Progress line of the export job (with its cancel button) under the export buttons."""
    ctrl = panel.ctrl
    saver = client.JSEval(exec=SAVE_READY_JS)
    ctrl.hs_download_ready = saver.exec
    with html.Div(v_if="hs_export_job", classes="d-flex flex-column", id="hs-export-job"):
        with html.Div(classes="d-flex align-center ga-1"):
            v3.VProgressLinear(model_value=("hs_export_job ? hs_export_job.percent : 0",), height=5, rounded=True,
                               color="#2f5d50", bg_color="#cfd8d3", classes="flex-grow-1")
            v3.VBtn(icon="mdi-close-circle-outline", size="x-small", variant="text", color="#8c3b2e",
                    title=("hs_export_job ? hs_export_job.hint : 'cancel'",), id="hs-export-cancel",
                    click=(ctrl.hs_cancel_job, "[hs_export_job.id]"))
        html.Span("{{ hs_export_job ? hs_export_job.text : '' }}", classes="text-caption", id="hs-export-job-text")
