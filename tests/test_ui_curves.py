"""Curves built from run records (plotly figure specs), runs kept per mesh by content.

The figure specs are checked by plotly's own figure validator (a library this project did not
write): a property plotly.js does not know raises there.
"""

from __future__ import annotations

import copy
import csv
import io
import shutil
from pathlib import Path

import numpy as np
import pytest
from heatsoak.core.app.runner import run_case
from heatsoak.core.case.casefile import load_case, read_case_toml
from heatsoak.core.mesh.read import read_mesh
from heatsoak.plugin.results import figures
from heatsoak.plugin.runs.store import RunStore, mesh_key, read_probes_csv

MESHES = Path(__file__).resolve().parent.parent / "meshes"


@pytest.fixture(scope="module")
def demo_runs(tmp_path_factory):
    """Two runs of the demo (the second with a slower bore ramp) kept in a store, and the mesh."""
    folder = tmp_path_factory.mktemp("curves")
    for name in ("platen_warmup.toml", "platen.msh", "platen_base.csv"):
        shutil.copy(MESHES / name, folder / name)
    case = load_case(folder / "platen_warmup.toml")
    data = read_case_toml(folder / "platen_warmup.toml")
    store = RunStore()
    summary = run_case(case, folder / "run1")
    store.add(data, folder / "run1", summary, mesh=case.mesh)
    slower = copy.deepcopy(data)
    slower["boundary"]["bore"]["ramp"]["over"] = 1200
    toml = folder / "slower.toml"
    from heatsoak.core.case.casefile import save_case

    save_case(slower, toml)
    case2 = load_case(toml)
    store.add(slower, folder / "run2", run_case(case2, folder / "run2"), mesh=case2.mesh)
    return store, case.mesh, folder


def newest_first(store):
    return sorted(store.runs, key=lambda r: -r.id)


def test_probe_figure_is_valid_plotly_with_one_legend_entry_per_probe(demo_runs):
    go = pytest.importorskip("plotly.graph_objects")
    store, _, _ = demo_runs
    fig = figures.probe_figure(newest_first(store))
    go.Figure(fig)  # raises on anything plotly.js does not know
    lines = [t for t in fig["data"] if t.get("meta")]
    assert len(lines) == 3 * 2  # three probes, two runs
    legend = [t["name"] for t in fig["data"] if t.get("showlegend") and t.get("legend") != "legend2"]
    assert legend == ["top-mid", "rim", "sleeve"]
    keyed = [t["name"] for t in fig["data"] if t.get("legend") == "legend2"]
    assert keyed == ["run 2", "run 1"]


def test_probes_are_coloured_per_probe_and_runs_told_apart_by_line_style(demo_runs):
    store, _, _ = demo_runs
    lines = [t for t in figures.probe_figure(newest_first(store))["data"] if t.get("meta")]
    by_probe = {}
    for t in lines:
        by_probe.setdefault(t["meta"]["curve"], []).append((t["meta"]["run"], t["line"]["color"], t["line"]["dash"]))
    colours = {name: {c for _, c, _ in rows} for name, rows in by_probe.items()}
    assert all(len(c) == 1 for c in colours.values()) and len(set.union(*colours.values())) == 3
    for rows in by_probe.values():
        assert dict((run, dash) for run, _, dash in rows) == {2: "solid", 1: "dash"}


def test_probe_curve_values_are_those_of_probes_csv(demo_runs):
    store, _, folder = demo_runs
    times, probes = read_probes_csv(folder / "run1" / "probes.csv")
    fig = figures.probe_figure([store.get(1)])
    trace = next(t for t in fig["data"] if t.get("meta", {}).get("curve") == "sleeve")
    np.testing.assert_array_equal(trace["x"], times)
    np.testing.assert_array_equal(trace["y"], probes["sleeve"])


def test_thresholds_drawn_once_and_each_crossing_marked_with_words_only_in_its_hover(demo_runs):
    store, _, _ = demo_runs
    fig = figures.probe_figure(newest_first(store))
    limits = [t for t in fig["data"] if t["name"].endswith(" limit")]
    assert sorted((t["name"], t["y"][0]) for t in limits) == [("sleeve limit", 100.0), ("top-mid limit", 30.0)]
    marks = {t["name"]: t for t in fig["data"] if t["name"].endswith(" crossing")}
    sleeve = marks["sleeve crossing"]
    assert len(sleeve["x"]) == 2  # one mark per run
    for run_id, t, text in zip((2, 1), sleeve["x"], sleeve["text"]):
        crossing = store.get(run_id).summary["probes"]["sleeve"]["crossing_time"]
        assert t == pytest.approx(crossing) and f"run {run_id}" in text
    # a slower ramp reaches the limit later
    assert sleeve["x"][0] > sleeve["x"][1]
    assert all(t["mode"] in ("lines", "markers") for t in fig["data"])  # no text printed on the plot
    assert "annotations" not in fig["layout"]


def test_region_figure_band_and_statistics(demo_runs):
    go = pytest.importorskip("plotly.graph_objects")
    store, _, _ = demo_runs
    runs = newest_first(store)
    band = figures.region_figure(runs)
    go.Figure(band)
    legend = [t["name"] for t in band["data"] if t.get("showlegend") and t.get("legend") != "legend2"]
    assert legend == ["platen mean", "sleeve mean"]
    filled = [t for t in band["data"] if t.get("fill") == "tonexty"]
    assert len(filled) == 2 * 2  # per region and run
    only_max = figures.region_figure(runs, ["sleeve"], "max")
    lines = [t for t in only_max["data"] if t.get("meta")]
    assert [t["meta"]["curve"] for t in lines] == ["sleeve max", "sleeve max"]
    np.testing.assert_array_equal(lines[1]["y"], store.get(1).regions["sleeve"]["max"])
    with pytest.raises(ValueError, match="median"):
        figures.region_figure(runs, None, "median")


def test_many_regions_default_to_the_hottest_few():
    class R:
        def __init__(self, peaks):
            self.regions = {f"r{i}": {"max": np.array([0.0, p])} for i, p in enumerate(peaks)}

    peaks = [5, 90, 10, 70, 60, 1, 80, 30]
    assert figures.default_regions([R(peaks)], most=3) == ["r1", "r6", "r3"]
    assert figures.default_regions([R(peaks[:3])], most=3) == ["r0", "r1", "r2"]


def test_curves_csv_holds_what_is_plotted(demo_runs):
    store, _, folder = demo_runs
    text = figures.figure_csv(figures.probe_figure(newest_first(store)))
    rows = list(csv.DictReader(io.StringIO(text)))
    times, probes = read_probes_csv(folder / "run2" / "probes.csv")
    rim2 = [r for r in rows if r["run"] == "2" and r["curve"] == "rim"]
    np.testing.assert_array_equal([float(r["value"]) for r in rim2], probes["rim"])
    np.testing.assert_array_equal([float(r["time_s"]) for r in rim2], times)
    assert {r["curve"] for r in rows} == {"top-mid", "rim", "sleeve"}  # no threshold or key lines


def test_mesh_key_follows_content_not_the_object(tmp_path):
    a = read_mesh(MESHES / "platen.msh", "mm")
    b = read_mesh(MESHES / "platen.msh", "mm")
    copy_path = tmp_path / "renamed.msh"
    shutil.copy(MESHES / "platen.msh", copy_path)
    assert a is not b and mesh_key(a) == mesh_key(b) == mesh_key(read_mesh(copy_path, "mm"))
    assert mesh_key(read_mesh(MESHES / "platen.msh", "m")) != mesh_key(a)  # another unit: other coordinates
    assert mesh_key(read_mesh(MESHES / "lblock.vtu", "mm")) != mesh_key(a)


def test_runs_compare_only_with_runs_on_the_same_mesh(demo_runs):
    store, mesh, folder = demo_runs
    assert store.get(2).base_id == 1 and "bore ramp over 600 s -> 1200 s" in store.get(2).label
    other = read_mesh(MESHES / "lblock.vtu", "mm")
    elsewhere = store.add({"mesh": {"file": "lblock.vtu"}}, folder / "run1", {"status": "complete"}, mesh=other)
    assert elsewhere.base_id is None and elsewhere.label == "another mesh: platen.msh -> lblock.vtu"
    again = read_mesh(MESHES / "platen.msh", "mm")  # the demo opened again: a new object, same content
    assert store.latest(mesh_key(again)).id == 2
    assert [r.id for r in store.on_mesh(mesh_key(again))] == [1, 2]
    store.runs.remove(elsewhere)


def test_a_clicked_point_is_rounded_to_what_a_click_can_tell():
    from heatsoak.plugin.setup.actions import clicked_coordinates

    point = np.array([0.02998312764, -1.2e-19, 0.01900000004])  # metres, a 120 mm part
    assert clicked_coordinates(point, 1e-3, 0.12) == [29.98, 0.0, 19.0]  # mm: 0.012 mm steps
    assert clicked_coordinates(point, 1.0, 0.12) == [0.02998, 0.0, 0.019]


def test_the_bare_case_file_names_its_mesh_and_says_it_must_lie_beside_it(tmp_path):
    from heatsoak.plugin.export.actions import bare_case_toml

    data = read_case_toml(MESHES / "platen_warmup.toml")
    data["mesh"]["file"] = "../meshes/sub/platen.msh"  # as the forms may hold it, relative to the case opened
    data["boundary"]["base"]["table"] = [[0.0, 22.0], [3600.0, 30.0]]  # the UI writes tables inline
    text = bare_case_toml(data, MESHES / "platen.msh")
    assert text.splitlines()[0].startswith("# Needs the mesh file platen.msh in the same folder")
    (tmp_path / "saved.toml").write_text(text)
    shutil.copy(MESHES / "platen.msh", tmp_path / "platen.msh")
    assert load_case(tmp_path / "saved.toml").mesh.n_nodes > 0  # it resolves where it is saved


@pytest.fixture()
def panel(tmp_path):
    """The panel mounted on a bare trame server (no browser) with the demo open."""
    from heatsoak.plugin.app import build_app
    from trame.app import get_server

    folder = tmp_path / "data"
    folder.mkdir()
    for name in ("platen_warmup.toml", "platen.msh", "platen_base.csv", "lblock.vtu", "lblock_cooling.toml"):
        shutil.copy(MESHES / name, folder / name)
    server = get_server(f"curves-{tmp_path.name}", client_type="vue3")
    return build_app(server, input_path=folder / "platen_warmup.toml", data_dir=folder, work_dir=tmp_path / "work")


def run_now(panel, out: Path):
    """Run the set-up now in the forms (in this thread) and keep it, as the run bar does when it ends."""
    from heatsoak.core.case.casefile import case_from_data
    from heatsoak.plugin.results import actions as results_actions
    from heatsoak.plugin.setup import actions as setup_actions

    data, _ = setup_actions.current_case(panel)
    case = case_from_data(data, panel.case_dir, mesh=panel.mesh)
    run = panel.runs.add(data, out, run_case(case, out), mesh=case.mesh)
    results_actions.runs_changed(panel, show=run.id)
    return run


def test_a_typed_threshold_goes_with_one_probe_only(panel):
    state = panel.state
    state.update({"hs_p_name": "A", "hs_p_x": 30.0, "hs_p_y": 0.0, "hs_p_z": 19.0, "hs_p_threshold": 40})
    panel.ctrl.hs_add_probe()
    state.update({"hs_p_name": "B", "hs_p_x": 40.0})
    panel.ctrl.hs_add_probe()
    probes = {p["name"]: p["threshold"] for p in state.hs_probes}
    assert probes["A"] == 40 and probes["B"] is None


def test_new_runs_tick_themselves_and_their_comparison_and_another_mesh_clears_the_screen(panel, tmp_path):
    from heatsoak.plugin.load import actions as load_actions

    state = panel.state
    for i in (1, 2, 3):
        run_now(panel, tmp_path / f"run{i}")
    assert state.hs_compare == [3, 2] and state.hs_shown_run == 3 and state.hs_runs_here == 3
    state.update({"hs_progress_text": "complete: 180 steps", "hs_run_error": "old", "hs_export_error": "old"})
    assert load_actions.open_case(panel, Path(panel.data_dir) / "lblock_cooling.toml")
    assert (state.hs_progress_text, state.hs_run_error, state.hs_export_error, state.hs_n_frames) == ("", "", "", 0)
    assert state.hs_runs_here == 0 and state.hs_compare == [] and state.hs_shown_run is None
    assert state.hs_probe_fig["data"] == [] and state.hs_probe_table == []
    run_now(panel, tmp_path / "run4")
    assert state.hs_compare == [4] and {t["meta"]["run"] for t in state.hs_probe_fig["data"] if t.get("meta")} == {4}
    assert load_actions.open_case(panel, Path(panel.data_dir) / "platen_warmup.toml")  # a new object, same content
    assert state.hs_runs_here == 3 and state.hs_compare == [3, 2] and state.hs_shown_run == 3
    state.hs_view = "results"
    panel.state.flush()
    from heatsoak.plugin.results import actions as results_actions

    results_actions.build_field(panel)
    assert state.hs_n_frames == len(panel.runs.get(3).series) > 1  # viewable in 3D again
