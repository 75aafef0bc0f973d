"""The workspace banner: who edits, and the take-over button of a watching tab."""

from __future__ import annotations

from trame.widgets import client, html
from trame.widgets import vuetify3 as v3

#: True in a tab that watches (client-side; the server refuses its changes whatever the page does).
WATCHING = "!!hs_me && hs_me !== hs_owner"


def hello() -> None:
    """Tell the server this tab loaded; keep the name it gives back in this tab only."""
    client.ClientTriggers(ref="hs_session_hello", mounted="trigger('hs_hello').then(v => { hs_me = v || '' })")


def locked(**kwargs):
    """A container whose content cannot be used (clicked, typed into, focused) in a watching tab."""
    return html.Div(raw_attrs=[f':inert="{WATCHING}"'], classes="hs-lockable", **kwargs)


def banner(panel) -> None:
    """Says who edits the workspace; in a watching tab, offers to take over."""
    with v3.VAlert(v_if=WATCHING, type="warning", variant="tonal", density="compact", classes="ma-2",
                   id="hs-session", icon="mdi-account-eye-outline"):
        with html.Div(classes="d-flex align-center ga-2 flex-wrap"):
            html.Span("{{ hs_lost === hs_me && hs_owner ? hs_owner + ' took over this workspace: this tab ('"
                      " + hs_me + ') only watches now.' : (hs_owner ? 'This workspace is being edited in ' + hs_owner"
                      " + '. This tab (' + hs_me + ') only watches.' : 'The tab that was editing this workspace "
                      "has closed. This tab (' + hs_me + ') watches until it takes over.') }} "
                      "Running, cancelling, opening files and editing are locked here.",
                      id="hs-session-text", classes="text-body-2")
            v3.VSpacer()
            v3.VBtn("Take over", size="small", variant="flat", color="#8c3b2e", id="hs-take-over",
                    click="trigger('hs_take_over').then(v => { hs_me = v || hs_me })",
                    title="Edit this workspace here; the other tab is told and only watches from then on")
    hello()
