"""The package layout promises: core is pure numerics, the CLI lists every command."""

import subprocess
import sys

from heatsoak.core import cli

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
