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


#: Least milliseconds between two values a dragged slider sends to the server (the value it is released
#: at is always sent): a drag asks for a few answers a second, not one per pixel.
SLIDE_MS = 250


def slider(model: str, bounds: str, **kwargs):
    """A slider for the number in state key ``model`` within ``bounds`` (a JS ``[min, max, step]``).

    The thumb follows the mouse at once (the value shown lives in the browser-only ``hs_slide``);
    ``model`` is sent at most every :data:`SLIDE_MS` while dragging, and on release or when the slider loses focus
    (arrow keys).
    """
    return sending_slider(f"'{model}'", f"Number({model})", f"{model} = VALUE", bounds, **kwargs)


def sending_slider(slot: str, value: str, send: str, bounds: str, **kwargs):
    """A slider showing the JS ``value`` that runs the JS statement ``send`` (``VALUE`` stands for the
    value) as :func:`slider` sends its model; ``slot`` is a JS expression naming its entry in ``hs_slide``."""
    shown = f"hs_slide[{slot}]"
    release = f"if ({shown} !== undefined) {{ {send.replace('VALUE', shown)} }}; hs_slide = {{}}"
    move = (f"hs_slide = {{...hs_slide, [{slot}]: $event}}; if (Date.now() - hs_slide_t > {SLIDE_MS}) "
            f"{{ hs_slide_t = Date.now(); {send.replace('VALUE', '$event')} }}")
    return v3.VSlider(model_value=(f"{shown} ?? {value}",), min=(f"{bounds}[0]",), max=(f"{bounds}[1]",),
                      step=(f"{bounds}[2]",), update_modelValue=move, end=release,
                      update_focused=f"if (!$event) {{ {release} }}",
                      density="compact", hide_details=True, color="#2f5d50", thumb_size=14, track_size=3,
                      classes="hs-slider " + kwargs.pop("classes", ""), **kwargs)


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
