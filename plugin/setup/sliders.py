"""Ranges of the sliders beside the schedule numbers of the condition editor.

A range is chosen once for a group, kind and time window, and kept while the value stays inside it:
a drag never moves the scale under the mouse; a typed value outside the range widens it.
"""

from __future__ import annotations

import math

from heatsoak.plugin.setup.forms import KIND_UNITS, FormError, parse_table_text

#: Schedule numbers of a condition form that get a slider.
SLID = ("value", "start", "end", "at", "over")
#: Roughly how many slider steps span a range.
STEPS = 200
#: Below / above the lowest / highest temperature in view, a temperature slider reaches [K]
#: (room to try a colder or a hotter schedule; common practice, no source).
BELOW_K, ABOVE_K = 50.0, 100.0
#: Tables of more rows than this get no sliders (their values are edited as text).
MAX_TABLE_SLIDERS = 24
#: Half-width of a heat-flux range when all its values are zero [W/m²].
FLUX_SPAN = 1000.0


def nice_step(width: float) -> float:
    """The largest 1, 2 or 5 times a power of ten not above ``width / STEPS`` (at least 1e-6)."""
    raw = max(width / STEPS, 1e-6)
    power = 10.0 ** math.floor(math.log10(raw))
    return max(m * power for m in (1, 2, 5) if m * power <= raw * (1 + 1e-9))


def _numbers(values) -> list:
    out = []
    for v in values:
        try:
            x = float(v)
        except (TypeError, ValueError):
            continue
        if math.isfinite(x):
            out.append(x)
    return out


def value_range(kind: str, values, initial) -> list:
    """``[min, max, step]`` of a schedule value: temperatures from the lowest of the values and the
    initial temperature less 50 K to the highest plus 100 K [degC]; heat fluxes twice the largest
    magnitude either side [W/m²]."""
    vals = _numbers(values) or [0.0]
    if KIND_UNITS.get(kind) == "°C":
        lo, hi = min(vals + _numbers([initial])) - BELOW_K, max(vals + _numbers([initial])) + ABOVE_K
    else:
        span = 2.0 * max(abs(v) for v in vals) or FLUX_SPAN
        lo, hi = min(vals) - span, max(vals) + span
    step = nice_step(hi - lo)
    return [math.floor(lo / step) * step, math.ceil(hi / step) * step, step]


def table_rows(text) -> list:
    """Rows ``[[t, v], ...]`` of a table's text, or ``[]`` while it cannot be read."""
    try:
        return parse_table_text(text, "table")
    except FormError:
        return []


def slider_ranges(kind: str, form: dict, initial, end) -> dict:
    """``{field: [min, max, step]}`` for the fields of :data:`SLID` and the table's values: values by
    :func:`value_range`, the start time from 0 and the duration from one step, both to the run's end [s]."""
    end = (_numbers([end]) or [600.0])[0]
    end = end if end > 0 else 600.0
    span = value_range(kind, [form.get(k) for k in ("value", "start", "end")], initial)
    step = nice_step(end)
    table = value_range(kind, [v for _, v in table_rows(form.get("table", ""))], initial)
    return {"value": span, "start": span, "end": span, "at": [0.0, end, step], "over": [step, end, step],
            "table": table}


def _inside(bounds, value, table: bool = False) -> bool:
    """Whether the number ``value`` (or every value of a table's text) lies within ``bounds``."""
    x = [v for _, v in table_rows(value)] if table else _numbers([value])
    return bool(bounds) and bool(x) and bounds[0] <= min(x) and max(x) <= bounds[1]


def register(panel) -> None:
    """Keep ``hs_ranges`` fitting the edited condition and ``hs_src_ranges`` the region's heat source;
    ``hs_slide`` (the values being dragged) and ``hs_slide_t`` (when a dragged value was last sent) stay
    in the browser."""
    state = panel.state
    state.update({"hs_ranges": {}, "hs_src_ranges": {}, "hs_slide": {}, "hs_slide_t": 0, "hs_table_values": [],
                  "hs_table_times": [], "hs_table_edit": None})
    state.client_only("hs_slide", "hs_slide_t")
    panel.slider_context = {}

    @state.change("hs_editor_group", "hs_e_kind", "hs_t_end", "hs_initial", *(f"hs_e_{k}" for k in (*SLID, "table")))
    def on_range_inputs(**_):
        update_ranges(panel)

    @state.change("hs_region", "hs_t_end", *(f"hs_m_source_{k}" for k in (*SLID, "table")))
    def on_source_range_inputs(**_):
        """Ranges of the selected region's heat-source sliders [W/m³ and s]."""
        update_ranges(panel, "hs_m_source_", "hs_src_ranges", "hs_region", "source")

    @state.change("hs_e_table")
    def on_table(hs_e_table="", **_):
        rows = table_rows(hs_e_table)
        rows = rows if len(rows) <= MAX_TABLE_SLIDERS else []
        state.hs_table_times, state.hs_table_values = [f"{t:g}" for t, _ in rows], [v for _, v in rows]

    @state.change("hs_table_edit")
    def on_table_slider(hs_table_edit=None, **_):
        """A table row's slider moved: write its value into the table's text."""
        rows = table_rows(state.hs_e_table)
        try:
            i, value = int(hs_table_edit[0]), float(hs_table_edit[1])
        except (TypeError, ValueError, IndexError):
            return
        if 0 <= i < len(rows) and math.isfinite(value):
            rows[i][1] = value
            state.hs_e_table = "\n".join(f"{t:.12g}, {v:.12g}" for t, v in rows)


def update_ranges(panel, prefix: str = "hs_e_", target: str = "hs_ranges", owner: str = "hs_editor_group",
                  kind: str | None = None) -> None:
    """New ranges (in state key ``target``) for the schedule fields ``<prefix><field>`` of a new group
    or region (state key ``owner``), kind, initial temperature or end time; otherwise a field keeps its
    range while its value lies inside. ``kind`` None means the edited condition's kind."""
    state = panel.state
    kind = kind or state.hs_e_kind
    context = (state[owner], kind, state.hs_initial, state.hs_t_end)
    form = {k: state[f"{prefix}{k}"] for k in (*SLID, "table")}
    fresh = slider_ranges(kind, form, state.hs_initial, state.hs_t_end)
    old = state[target] if panel.slider_context.get(target) == context else {}
    ranges = {k: old[k] if _inside(old.get(k), form[k], k == "table") else r for k, r in fresh.items()}
    panel.slider_context[target] = context
    if ranges != state[target]:
        state[target] = ranges
