"""The set-up drawer: mesh, surfaces and conditions, materials, time, probes."""

from __future__ import annotations

from heatsoak.plugin.widgets import after_edits, errors_of, note, number, section, sending_slider, slider
from trame.widgets import html
from trame.widgets import vuetify3 as v3

FILE_ICON = ("f.kind == 'folder' ? 'mdi-folder-outline' : (f.kind == 'case' ? 'mdi-file-cog-outline' : "
             "(f.kind == 'blocked' ? 'mdi-link-off' : 'mdi-cube-outline'))")


def build(panel) -> None:
    """All set-up sections, in the order a user goes through them."""
    with v3.VExpansionPanels(v_model=("hs_panels", ["mesh", "surfaces"]), multiple=True, variant="accordion",
                             classes="hs-setup"):
        mesh_section(panel)
        surfaces_section(panel)
        materials_section(panel)
        time_section(panel)
        probes_section(panel)
    unsaved_dialog(panel)


def unsaved_dialog(panel) -> None:
    """Asks before another file replaces a set-up with changes not yet run or exported."""
    ctrl = panel.ctrl
    with v3.VDialog(v_model=("hs_guard", False), max_width=460, persistent=True), \
            v3.VCard(id="hs-guard", classes="pa-2"):
        v3.VCardTitle("Open {{ hs_guard_name }}?", classes="text-subtitle-1")
        v3.VCardText("{{ hs_guard_text }} To keep them, run the case or export it first.", id="hs-guard-text")
        with v3.VCardActions():
            v3.VSpacer()
            v3.VBtn("Keep editing", variant="flat", color="#2f5d50", click=ctrl.hs_guard_keep, id="hs-guard-keep")
            v3.VBtn("Discard changes and open", variant="text", color="#b3261e", click=ctrl.hs_guard_open,
                    id="hs-guard-open")


def mesh_section(panel) -> None:
    ctrl = panel.ctrl
    with section("Mesh", "mesh", "mdi-cube-outline"):
        with v3.VExpansionPanelText():
            with html.Div(classes="d-flex align-center"):
                v3.VBtn(icon="mdi-arrow-up", size="x-small", variant="text", click=ctrl.hs_up_dir,
                        disabled=("!hs_dir",), id="hs-up")
                html.Span("Data folder{{ hs_dir ? ' / ' + hs_dir : '' }}", classes="text-caption")
                v3.VSpacer()
                v3.VBtn(icon="mdi-refresh", size="x-small", variant="text", click=ctrl.hs_refresh_files,
                        title="List the folder again (files added since)", id="hs-refresh-files")
            with v3.VList(density="compact", classes="hs-files", max_height=170, id="hs-files"):
                v3.VListItem(v_for="f in hs_files", key="f.name", title=("f.name",), prepend_icon=(FILE_ICON,),
                             click=after_edits(panel.server, ctrl.hs_open, "[f.path, f.kind]"),
                             subtitle=("f.note",), disabled=("f.kind == 'blocked'",),
                             active=("hs_mesh_name == f.name",), color="#2f5d50", density="compact", classes="hs-file")
            v3.VFileInput(v_model=("hs_upload", None), label=("`Upload a mesh or case (up to ${hs_max_upload_mb} MB)`",),
                          density="compact", variant="outlined", prepend_icon="mdi-upload", show_size=True,
                          error_messages=("hs_upload_error ? [hs_upload_error] : []",), hide_details="auto",
                          classes="my-2", id="hs-upload")
            v3.VAlert(v_if="hs_mesh_error", text=("hs_mesh_error",), type="error", variant="tonal",
                      density="compact", classes="my-2", id="hs-mesh-error")
            with html.Div(classes="d-flex ga-2"):
                v3.VSelect(model_value=("hs_unit",), items=("hs_units",), label="Length unit of the file",
                           density="compact", variant="outlined", hide_details=True, style="min-width: 190px",
                           update_modelValue=(ctrl.hs_set_unit, "[$event]"), id="hs-unit")
                v3.VTextField(model_value=("hs_feature_angle",), label="Feature angle", suffix="deg",
                              density="compact", variant="outlined", hide_details=True, type="number",
                              change=(ctrl.hs_set_angle, "[$event.target.value]"), id="hs-angle")
            note("The feature angle splits surfaces that carry no groups in the file.", classes="text-caption mb-2")
            facts()


def facts() -> None:
    """What heatsoak understood of the mesh."""
    with html.Div(v_if="hs_facts", classes="hs-facts", id="hs-facts"):
        with v3.VTable(density="compact"):
            with html.Tbody():
                _fact("File", "hs_mesh_name")
                _fact("Read in", "hs_unit + (hs_unit_from ? ' · ' + hs_unit_from : '')", id="hs-fact-unit")
                _fact("Nodes", "hs_facts.nodes.toLocaleString()")
                _fact("Elements", "hs_facts.elements.toLocaleString() + (hs_facts.element_order == 2 ? "
                                  "' quadratic tetrahedra' : ' linear tetrahedra')")
                _fact("Size", "hs_facts.bounding_box.max.map((v, i) => ((v - hs_facts.bounding_box.min[i]) "
                              "/ hs_unit_m).toPrecision(4)).join(' × ') + ' ' + hs_unit")
                _fact("Regions", "hs_facts.regions.map(r => `${r.name} (${r.elements})`).join(', ')")
                _fact("Surface groups", "hs_facts.surface_groups.length")
        v3.VAlert(v_for="w in hs_facts.warnings", key="w", text=("w",), type="warning", variant="tonal",
                  density="compact", classes="mt-1 text-caption")


def _fact(label: str, expr: str, **kwargs) -> None:
    with html.Tr(**kwargs):
        html.Td(label, classes="text-caption hs-fact-label")
        html.Td(f"{{{{ {expr} }}}}", classes="text-caption")


def surfaces_section(panel) -> None:
    with section("Surfaces and conditions", "surfaces", "mdi-layers-outline"), v3.VExpansionPanelText():
        with html.Div(classes="d-flex align-center mb-1"):
            html.Span("Click in 3D to", classes="text-caption mr-2")
            with v3.VBtnToggle(v_model=("hs_pick_mode",), density="compact", mandatory=True, color="#2f5d50",
                               variant="outlined", divided=True, id="hs-pick-mode"):
                v3.VBtn("select surface", value="group", size="small")
                v3.VBtn("place probe", value="probe", size="small")
        with v3.VList(density="compact", classes="hs-legend", id="hs-legend", max_height=220):
            with v3.VListItem(v_for="g in hs_groups", key="g.name", click="hs_group = g.name",
                              active=("hs_group == g.name",), color="#2f5d50", classes="hs-group"):
                with v3.Template(v_slot_prepend=True):
                    html.Span(classes="hs-swatch", style=("`background:${g.color}`",))
                v3.VListItemTitle("{{ g.name }}", classes="text-body-2")
                v3.VListItemSubtitle("{{ g.summary }} · {{ Number((g.area / (hs_unit_m * hs_unit_m)).toPrecision(3))"
                                     ".toLocaleString() }} {{ hs_unit }}²")
                with v3.Template(v_slot_append=True):
                    v3.VIcon("mdi-alert-circle", v_if="g.bad", color="#b3261e", size="small")
        condition_editor(panel)


def condition_editor(panel) -> None:
    """Kind and schedule of the selected group, with a live preview."""
    g = "'boundary.' + hs_group + '."
    with v3.VCard(v_if="hs_group && hs_editor_group == hs_group", variant="tonal", color="#2f5d50",
                  classes="pa-3 mt-2 hs-editor", id="hs-editor"):
        html.Div("Condition on {{ hs_editor_group }}", classes="text-subtitle-2 mb-2 hs-ink")
        v3.VSelect(v_model=("hs_e_kind",), items=("hs_kinds",), label="Kind", density="compact",
                   variant="outlined", hide_details=True, classes="mb-2", id="hs-kind", bg_color="white")
        with html.Div(v_if="hs_e_kind != 'insulated'"):
            number("hs_e_h", "Convection coefficient h", "W/(m² K)", f"{g}h'", v_if="hs_e_kind == 'convection'",
                   bg_color="white", id="hs-h")
            html.Div("{{ hs_e_kind == 'convection' ? 'Ambient temperature' : 'Value' }} over time",
                     classes="text-caption hs-ink")
            with v3.VBtnToggle(v_model=("hs_e_shape",), density="compact", mandatory=True, divided=True,
                               variant="outlined", classes="mb-2", id="hs-shape", color="#2f5d50"):
                v3.VBtn("constant", value="constant", size="small")
                v3.VBtn("ramp", value="ramp", size="small")
                v3.VBtn("table", value="table", size="small")
            with html.Div(v_if="hs_e_shape == 'constant'"):
                slid_number("value", "Value", ("hs_bc_unit",), f"{g}value'", "hs-value", bg_color="white")
            with v3.VRow(v_if="hs_e_shape == 'ramp'", dense=True, id="hs-ramp"):
                for key, label, unit in (("start", "Start value", ("hs_bc_unit",)), ("end", "End value", ("hs_bc_unit",)),
                                         ("at", "Start time", "s"), ("over", "Duration", "s")):
                    with v3.VCol(cols=6):
                        slid_number(key, label, unit, f"{g}{key}'", f"hs-ramp-{key}", bg_color="white")
            with html.Div(v_if="hs_e_shape == 'table'"):
                v3.VTextarea(v_model=("hs_e_table",), label="time [s], value — one pair per line",
                             rows=4, auto_grow=True, density="compact", variant="outlined", hide_details="auto",
                             error_messages=errors_of(f"{g}table'"), bg_color="white", id="hs-table",
                             classes="hs-mono")
                v3.VFileInput(v_model=("hs_table_upload", None), label="or read a CSV file", density="compact",
                              variant="outlined", accept=".csv,.txt", hide_details="auto", classes="mt-1",
                              prepend_icon="mdi-table-arrow-up", bg_color="white")
                table_sliders()
            html.Div(v_html=("hs_preview",), classes="hs-plot mt-1", id="hs-preview")


def slid_number(key: str, label: str, unit, field: str, id: str, prefix: str = "hs_e_", ranges: str = "hs_ranges",
                **kwargs) -> None:
    """The number ``<prefix><key>`` with a slider under it (id ``<id>-slider``) in the range
    ``<ranges>.<key>``: a drag edits the same number, so with the live what-if on the curves follow it."""
    number(f"{prefix}{key}", label, unit, field, id=id, **kwargs)
    with html.Div(id=f"{id}-slider"):
        slider(f"{prefix}{key}", f"({ranges}.{key} || [0, 1, 0.01])", classes="mb-1")


def table_sliders() -> None:
    """A slider per row of a readable table, for the row's value (a drag rewrites the table's text)."""
    with html.Div(v_for="(v, i) in hs_table_values", key="i", classes="d-flex align-center hs-table-row",
                  id=("`hs-table-row-${i}`",)):
        html.Span("{{ hs_table_times[i] }} s", classes="text-caption hs-ink mr-2", style="min-width: 4.5em")
        sending_slider("'row' + i", "v", "hs_table_edit = [i, VALUE]", "(hs_ranges.table || [0, 1, 0.01])")
        html.Span("{{ (hs_slide['row' + i] ?? v).toPrecision(4) }} {{ hs_bc_unit }}",
                  classes="text-caption ml-2", style="min-width: 5em")


def materials_section(panel) -> None:
    with section("Materials", "materials", "mdi-cube-scan"), v3.VExpansionPanelText():
        v3.VSelect(v_model=("hs_region",), items=("hs_regions",), label="Region", density="compact",
                   variant="outlined", hide_details=True, classes="mb-2", id="hs-region")
        with v3.VSelect(v_model=("hs_m_preset",), items=("hs_library",), label="Material", density="compact",
                        variant="outlined", hide_details=True, classes="mb-2 hs-preset", id="hs-preset"):
            with v3.Template(v_slot_selection="{ item }"):  # a case's long label wraps instead of being cut
                html.Span("{{ item.title }}", classes="hs-wrap", id="hs-preset-title")
        r = "'material.' + hs_region + '."
        number("hs_m_density", "Density", "kg/m³", f"{r}density'", id="hs-density")
        number("hs_m_specific_heat", "Specific heat", "J/(kg K)", f"{r}specific_heat'", id="hs-cp")
        # a text area that grows, so a conductivity tensor shows whole (one row a line)
        v3.VTextarea(v_model=("hs_m_conductivity",), label="Conductivity (a number, or a 3×3 tensor)",
                     suffix="W/(m K)", rows=1, auto_grow=True, density="compact", variant="outlined",
                     hide_details="auto", error_messages=errors_of(f"{r}conductivity'"), classes="mb-2 hs-mono",
                     id="hs-k")
        note("Library values: {{ hs_library_note }}. Check them against the supplier's data.", classes="mb-2")
        source_editor()


def source_editor() -> None:
    """Heat generated in the selected region over time [W/m³]: none, constant, ramp or table."""
    r = "'material.' + hs_region + '.source."
    html.Div("Heat generated in the region (W/m³)", classes="text-caption hs-ink")
    with v3.VBtnToggle(v_model=("hs_m_source_shape",), density="compact", mandatory=True, divided=True,
                       variant="outlined", classes="mb-2", id="hs-src-shape", color="#2f5d50"):
        for shape in ("none", "constant", "ramp", "table"):
            v3.VBtn(shape, value=shape, size="small")
    source = {"prefix": "hs_m_source_", "ranges": "hs_src_ranges"}
    with html.Div(v_if="hs_m_source_shape == 'constant'"):
        slid_number("value", "Heat source", "W/m³", f"{r}value'", "hs-src-value", **source)
    with v3.VRow(v_if="hs_m_source_shape == 'ramp'", dense=True, id="hs-src-ramp"):
        for key, label, unit in (("start", "Start value", "W/m³"), ("end", "End value", "W/m³"),
                                 ("at", "Start time", "s"), ("over", "Duration", "s")):
            with v3.VCol(cols=6):
                slid_number(key, label, unit, f"{r}{key}'", f"hs-src-ramp-{key}", **source)
    v3.VTextarea(v_if="hs_m_source_shape == 'table'", v_model=("hs_m_source_table",),
                 label="time [s], heat source [W/m³] — one pair per line", rows=3, auto_grow=True,
                 density="compact", variant="outlined", hide_details="auto", error_messages=errors_of(f"{r}table'"),
                 id="hs-src-table", classes="hs-mono")


def time_section(panel) -> None:
    with section("Start and time", "time", "mdi-timer-outline"):
        with v3.VExpansionPanelText():
            number("hs_initial", "Initial temperature", "°C", "'initial.temperature'", id="hs-initial")
            with v3.VRow(dense=True):
                with v3.VCol(cols=6):
                    number("hs_t_end", "End time", "s", "'time.end'", id="hs-end")
                with v3.VCol(cols=6):
                    number("hs_t_step", "Time step", "s", "'time.step'", id="hs-step")
            number("hs_t_theta", "Theta (0 explicit … 1 implicit)", "", "'time.theta'", id="hs-theta")
            with html.Div(classes="d-flex ga-1 mb-1"):
                for value, label in (("1", "1 backward Euler"), ("0.6667", "2/3 Galerkin"), ("0.5", "1/2 Crank-Nicolson")):
                    v3.VChip(label, size="small", click=f"hs_t_theta = {value}", variant="outlined", color="#2f5d50")
            v3.VAlert(v_if="hs_theta_hint", text=("hs_theta_hint",), density="compact", variant="tonal",
                      type=("hs_t_theta < 0.5 ? 'warning' : 'info'",), classes="mb-2 text-caption", id="hs-theta-hint")
            with v3.VRadioGroup(v_model=("hs_t_mass",), inline=True, density="compact", hide_details=True,
                                label="Mass matrix"):
                v3.VRadio(label="consistent", value="consistent")
                v3.VRadio(label="lumped", value="lumped")
            number("hs_every", "Keep the field every", "steps", "'output.every'", id="hs-every", classes="mt-2")


def probes_section(panel) -> None:
    ctrl = panel.ctrl
    with section("Probes", "probes", "mdi-map-marker-outline"), v3.VExpansionPanelText():
        with v3.VTable(density="compact", v_if="hs_probes.length", classes="mb-2", id="hs-probe-list"):
            with html.Thead(), html.Tr():
                for h in ("Name", "Position ({{ hs_unit }})", "Threshold", ""):
                    html.Th(h, classes="text-caption")
            with html.Tbody(), v3.Template(v_for="(p, i) in hs_probes", key="p.name"):
                with html.Tr(classes=("hs_err['probe.' + i] || hs_probe_notes[i] ? 'hs-probe-bad' : ''",)):
                    html.Td("{{ p.name }}", classes="text-caption")
                    html.Td("{{ [p.x, p.y, p.z].map(v => Number(v).toPrecision(4)).join(', ') }}",
                            classes="text-caption")
                    html.Td("{{ p.threshold == null ? '–' : p.threshold + ' °C' }}", classes="text-caption")
                    with html.Td():
                        v3.VBtn(icon="mdi-close", size="x-small", variant="text",
                                click=(ctrl.hs_remove_probe, "[p.name]"))
                with html.Tr(v_if="hs_err['probe.' + i]", classes="hs-probe-issue"):
                    html.Td("{{ p.name }} · {{ hs_err['probe.' + i].join(' ') }}", colspan=4,
                            classes="text-caption text-error")
                with html.Tr(v_if="hs_probe_notes[i] && !hs_err['probe.' + i]", classes="hs-probe-issue hs-probe-note"):
                    with html.Td(colspan=4, classes="text-caption hs-reason"):
                        v3.VIcon("mdi-information-outline", size="x-small", classes="mr-1")
                        html.Span("{{ p.name }} · {{ hs_probe_notes[i] }}")
        with v3.VRow(dense=True):  # x, y, z a row of their own: a clicked point's digits fit
            for c in "xyz":
                with v3.VCol(cols=4):
                    number(f"hs_p_{c}", c, ("hs_unit",), id=f"hs-p-{c}", classes="hs-coord")
            with v3.VCol(cols=5):
                number("hs_p_name", "Name", id="hs-p-name")
            with v3.VCol(cols=7):
                number("hs_p_threshold", "Threshold (this probe)", "°C", id="hs-p-threshold")
        v3.VBtn("Add probe", prepend_icon="mdi-plus", size="small", variant="tonal", color="#2f5d50",
                click=after_edits(panel.server, ctrl.hs_add_probe), id="hs-add-probe")
        html.Div("{{ hs_probe_error }}", v_if="hs_probe_error", classes="text-caption text-error",
                 id="hs-probe-error")
        note("Or choose 'place probe' above and click on the surface. The threshold typed here goes with "
             "the next probe added only.")
