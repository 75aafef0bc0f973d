"""The package layout promises: core is pure numerics, the CLI lists every command."""

import subprocess
import sys

from heatsoak.core.app import cli

UI_PACKAGES = ("pyvista", "vtk", "vtkmodules", "trame", "trame_server", "matplotlib", "wslink")


def test_core_imports_no_ui_package():
    code = (
        "import pkgutil, importlib, sys, heatsoak.core as c\n"
        "for m in pkgutil.walk_packages(c.__path__, 'heatsoak.core.'):\n"
        "    importlib.import_module(m.name)\n"
        "print(' '.join(sorted({n.split('.')[0] for n in sys.modules})))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()
    leaked = sorted(set(out) & set(UI_PACKAGES))
    assert leaked == [], f"heatsoak.core pulled in UI packages: {leaked}"


def test_help_lists_every_command(capsys):
    try:
        cli.main(["--help"])
    except SystemExit as exc:
        assert exc.code == 0
    text = capsys.readouterr().out
    for name in ("inspect", "check", "run", "bench", "ui"):
        assert name in text


def test_console_script_is_installed():
    out = subprocess.run(["heatsoak", "--help"], capture_output=True, text=True)
    assert out.returncode == 0 and "engineering estimates" in " ".join(out.stdout.split())


def test_no_command_is_an_error_exit():
    assert cli.main([]) == 2


def _core_imports():
    """(importing file, line, imported core module) for every import of heatsoak.core, lazy ones too."""
    import ast
    from pathlib import Path

    import heatsoak.core as core

    root = Path(core.__file__).parent
    for path in root.rglob("*.py"):
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.ImportFrom) and node.level:
                yield path.relative_to(root), node.lineno, "(relative)"
            elif isinstance(node, ast.ImportFrom) and (node.module or "").startswith("heatsoak."):
                yield path.relative_to(root), node.lineno, node.module
            elif isinstance(node, ast.Import):
                for alias in node.names:
                    if alias.name.startswith("heatsoak."):
                        yield path.relative_to(root), node.lineno, alias.name


def test_core_imports_go_down_the_layers_only():
    from heatsoak.core import LAYERS

    rank = {"errors": -1, **{name: i for i, name in enumerate(LAYERS)}}
    wrong = []
    for rel, line, module in _core_imports():
        if module == "(relative)":
            wrong.append(f"{rel}:{line} relative import (use heatsoak.core.<layer>)")
            continue
        parts = module.split(".")
        if parts[1] != "core" or len(parts) < 3:
            wrong.append(f"{rel}:{line} imports {module}")
            continue
        own = rel.parts[0] if len(rel.parts) > 1 else None
        if own is None:  # core/__init__.py and core/errors.py import nothing of heatsoak's
            wrong.append(f"{rel}:{line} imports {module}")
        elif parts[2] not in rank:
            wrong.append(f"{rel}:{line} imports {module}, which is in no layer")
        elif rank[parts[2]] > rank[own]:
            wrong.append(f"{rel}:{line}: {own} imports the higher layer {parts[2]} ({module})")
    assert wrong == [], "imports against the layer order in core/README.md:\n" + "\n".join(wrong)


def test_every_core_package_is_a_layer_and_the_top_level_stays_small():
    from pathlib import Path

    import heatsoak.core as core
    import heatsoak.plugin as plugin
    from heatsoak.core import LAYERS

    root = Path(core.__file__).parent
    packages = {p.name for p in root.iterdir() if (p / "__init__.py").exists()}
    assert packages == set(LAYERS)
    for pkg in (root, Path(plugin.__file__).parent):
        modules = [p.name for p in pkg.glob("*.py")]
        assert len(modules) <= 8, f"{pkg.name}/ holds {len(modules)} modules: {sorted(modules)}"
        too_long = [(str(p), n) for p in pkg.rglob("*.py") if (n := len(p.read_text().splitlines())) >= 450]
        assert too_long == []


def test_every_package_folder_is_listed_for_installation():
    """A subpackage missing from pyproject's list installs in editable mode but not from a wheel."""
    from pathlib import Path

    try:
        import tomllib
    except ModuleNotFoundError:  # Python 3.10
        import tomli as tomllib

    root = Path(__file__).resolve().parents[1]
    listed = set(tomllib.loads((root / "pyproject.toml").read_text())["tool"]["setuptools"]["packages"])
    found = set()
    for folder, name in (("core", "heatsoak.core"), ("plugin", "heatsoak.plugin")):
        for init in (root / folder).rglob("__init__.py"):
            found.add(".".join([name, *init.parent.relative_to(root / folder).parts]))
    assert found - listed == set() and listed - found == set()
