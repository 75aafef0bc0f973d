"""Small widget factories shared by the panel's layouts (vuetify 3)."""

from __future__ import annotations

from trame.widgets import html
from trame.widgets import vuetify3 as v3

#: Client code (in a click handler) whose promise settles once the browser has sent every state edit
#: it holds (polled for at most about 3 s), so that a call made after it never overtakes an edit typed
#: just before. Vue's templates see no browser globals: the timer comes from the event's window.
#: (The code must not begin like an arrow function, or Vue takes the whole click expression for the
#: handler itself.)
EDITS_SENT_JS = ("trame.state.flush().then(async () => { const w = $event && $event.view; "
                 "for (let i = 0; w && i < 150 && ((trame.state.dirtyKeys || {}).size || 0); i++) "
                 "{ await new w.Promise(r => w.setTimeout(r, 20)); } })")


def after_edits(server, func, args: str = "") -> str:
    """Click code calling ``func`` on the server (with the JS list ``args``) once the browser has
    sent the edits it holds: for buttons whose handler reads fields typed just before."""
    name = server.trigger_name(func)
    call = f"trigger('{name}', {args})" if args else f"trigger('{name}')"
    return f"{EDITS_SENT_JS}.then(() => {call})"


def errors_of(field: str) -> tuple:
    """``error_messages`` binding for a case field key (a JS expression may be spliced in)."""
    return (f"hs_err[{field}] || []",)


def number(model: str, label: str, suffix: str = "", field: str | None = None, **kwargs):
    """A compact text field for a number, with its unit and the case checks' message."""
    extra = {"error_messages": errors_of(field)} if field else {}
    classes = "mb-2 " + kwargs.pop("classes", "")
    return v3.VTextField(v_model=(model,), label=label, suffix=suffix, density="compact", variant="outlined",
                         hide_details="auto", classes=classes, **extra, **kwargs)


def section(title: str, value: str, icon: str):
    """An expansion panel with a title row; use the returned text block as a context."""
    panel = v3.VExpansionPanel(value=value, elevation=0, classes="hs-section")
    with panel, v3.VExpansionPanelTitle(classes="text-subtitle-2"):
        v3.VIcon(icon, size="small", classes="mr-2", color="#2f5d50")
        html.Span(title)
    return panel


def note(text: str, **kwargs):
    """A line of small grey text."""
    classes = "text-caption hs-note " + kwargs.pop("classes", "")
    return html.Div(text, classes=classes, **kwargs)
