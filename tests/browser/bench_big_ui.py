"""Benchmark of the UI on a million-cell part: opening the case, picking a group in 3D, playback.

    python tests/browser/bench_big_ui.py [--cells-per-side 57] [--gmsh] [--out DIR]

Writes a box of 6 * n^3 tetrahedra (``box_mesh``, binary MSH 2.2 in mm; with ``--gmsh`` also a box
meshed by gmsh and saved as gmsh's default ASCII MSH 4.1, about 1.07 million cells, which takes
a minute or two to mesh) and a case on it (steel, one side at 200 degC, convection on another,
20 steps of 10 s written every step, one probe), then prints a table:

* open: the panel opens the case in this process (read, surface groups, facts, case checked,
  surface built), no browser;
* in headless chromium on ``heatsoak ui``: the time from a click in the 3D view to the selected
  group in the page's state (median of six), and the pictures a second the page shows while playing
  at 10 frames/s, in two-second windows from the press of play (the first windows include the
  preparation of the pictures in a worker).

Times depend on the machine and its load: compare rows of one run.
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path
from types import SimpleNamespace

sys.path.insert(0, str(Path(__file__).resolve().parent))

CASE = """title = "million-cell steel box"
[mesh]
file = "{mesh}"
unit = "mm"
[material.{region}]
density = 7850
specific_heat = 470
conductivity = 45
[initial]
temperature = 20
[boundary.{hot}]
kind = "temperature"
value = 200
[boundary.{air}]
kind = "convection"
h = 15
ambient = 20
[time]
step = 10
end = 200
[output]
every = 1
[[probe]]
name = "core"
at = [{centre}]
"""


def write_box(folder: Path, n: int) -> Path:
    import meshio
    from heatsoak.core.mesh.generate import box_mesh
    from heatsoak.core.mesh.write import write_msh22

    mesh = box_mesh((n, n, n), size=(0.2, 0.2, 0.2))
    text = folder / "box_text.msh"
    write_msh22(mesh, text, scale=0.001)
    meshio.write(folder / "box.msh", meshio.read(text), file_format="gmsh22", binary=True)
    text.unlink()
    (folder / "box.toml").write_text(CASE.format(mesh="box.msh", region="box", hot="xmin", air="xmax",
                                                 centre="100, 100, 100"))
    return folder / "box.toml"


def write_gmsh_box(folder: Path, size_mm: float = 2.0) -> Path:
    import gmsh

    gmsh.initialize(["", "-nopopup"])
    try:
        gmsh.option.setNumber("General.Terminal", 0)
        gmsh.model.add("box")
        gmsh.model.occ.addBox(0, 0, 0, 200, 120, 80)
        gmsh.model.occ.synchronize()
        for _, tag in gmsh.model.getEntities(2):
            gmsh.model.addPhysicalGroup(2, [tag], name=f"face{tag}")
        gmsh.model.addPhysicalGroup(3, [1], name="steel")
        gmsh.option.setNumber("Mesh.MeshSizeMax", size_mm)
        gmsh.model.mesh.generate(3)
        gmsh.write(str(folder / "gbox.msh"))
    finally:
        gmsh.finalize()
    (folder / "gbox.toml").write_text(CASE.format(mesh="gbox.msh", region="steel", hot="face1", air="face2",
                                                  centre="100, 60, 40"))
    return folder / "gbox.toml"


def time_open(case: Path, work: Path) -> tuple:
    """Seconds the panel takes to open ``case`` (no browser), and the number of cells."""
    from heatsoak.plugin.panel import mount
    from heatsoak.plugin.pvtrame import new_plotter
    from trame.app import get_server

    server = get_server(f"bench-{case.stem}", client_type="vue3")
    heat = mount(server, new_plotter(), data_dir=case.parent, work_dir=work)
    server.state.ready()
    server._root_protocol = SimpleNamespace(addAttachment=lambda data: data, push_state_change=lambda state: None)
    start = time.perf_counter()
    assert heat.open_path(case), heat.state.hs_mesh_error
    seconds = time.perf_counter() - start
    heat.jobs.close()
    return seconds, heat.mesh.n_cells


def in_browser(case: Path, log_dir: Path) -> dict:
    """Click-to-group in 3D and playback pace in headless chromium."""
    from playwright.sync_api import sync_playwright
    from uidriver import UiServer, launch_browser, wait_for

    server = UiServer(case, case.parent, log_dir)
    server.wait_ready(180)
    out = {}
    try:
        with sync_playwright() as p:
            browser = launch_browser(p, 1600, 1000)
            page = browser.new_page()
            page.goto(server.url)
            page.wait_for_selector("#hs-facts", timeout=180_000)
            page.wait_for_function("() => trame.state.get('hs_me')", timeout=60_000)
            page.wait_for_timeout(3000)
            out["click in 3D to selected group (median of 6)"] = click_times(page)
            page.click("#hs-run")
            wait_for(lambda: page.locator(".hs-run-row").count() > 0, 600, what="the run")
            page.wait_for_selector("#hs-progress-text >> text=complete", timeout=600_000)
            page.wait_for_timeout(2000)
            out.update(play_pace(page))
            browser.close()
    finally:
        server.stop()
    return out


def click_times(page) -> str:
    box = page.locator(".hs-view").bounding_box()
    times = []
    for fx, fy in [(0.45, 0.35), (0.55, 0.6), (0.62, 0.45)] * 2:
        page.evaluate("() => trame.state.set('hs_group', null)")
        page.wait_for_timeout(1500)
        start = time.perf_counter()
        page.mouse.click(box["x"] + fx * box["width"], box["y"] + fy * box["height"])
        page.wait_for_function("() => trame.state.get('hs_group') !== null", timeout=20_000, polling=10)
        times.append(time.perf_counter() - start)
    return f"{sorted(times)[len(times) // 2]:.2f} s (range {min(times):.2f}-{max(times):.2f})"


def play_pace(page, seconds: int = 14) -> dict:
    page.evaluate("() => trame.state.set('hs_speed', 10)")
    page.wait_for_timeout(500)
    page.evaluate("""() => { window.hsShown = []; new MutationObserver(() => {
        if (document.querySelector('#hs-picture')) window.hsShown.push(performance.now()); })
        .observe(document.body, {subtree: true, attributes: true, attributeFilter: ['src'], childList: true}); }""")
    start = page.evaluate("() => performance.now()")
    page.click("#hs-play")
    page.wait_for_timeout(seconds * 1000)
    shown = page.evaluate("() => window.hsShown")
    page.click("#hs-play")
    rows = {}
    for w in range(0, seconds, 2):
        n = sum(start + 1000 * w <= t < start + 1000 * (w + 2) for t in shown)
        rows[f"pictures/s shown at 10 asked, {w}-{w + 2} s after play"] = f"{n / 2:.1f}"
    return rows


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cells-per-side", type=int, default=57)
    parser.add_argument("--gmsh", action="store_true", help="also a gmsh-meshed box saved as ASCII MSH 4.1")
    parser.add_argument("--out", type=Path, default=None)
    args = parser.parse_args(argv)
    folder = args.out or Path(tempfile.mkdtemp(prefix="bench-big-ui-"))
    folder.mkdir(parents=True, exist_ok=True)
    cases = [write_box(folder, args.cells_per_side)]
    if args.gmsh:
        cases.append(write_gmsh_box(folder))
    rows = []
    for case in cases:
        seconds, cells = time_open(case, folder / "work")
        label = f"{case.stem} ({cells / 1e6:.2f}M cells, {case.with_suffix('.msh').name})"
        rows.append((label, "open the case (no browser)", f"{seconds:.2f} s"))
        rows += [(label, k, v) for k, v in in_browser(case, folder).items()]
    width = max(len(r[1]) for r in rows)
    for label, what, value in rows:
        print(f"{label:40s} {what:{width}s} {value}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
