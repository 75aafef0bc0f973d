"""The ``heatsoak`` command: one entry point, one subcommand per job.

Each subcommand's work lives in its own module; this file only parses the
command line and turns errors into exit codes: 0 ok, 2 bad input, 1 failure,
130 interrupted.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from heatsoak.core.errors import HeatsoakError, InputError

#: subcommand -> (module, function, help). Modules are imported lazily so
#: ``heatsoak inspect`` never loads the UI stack.
COMMANDS = {
    "inspect": ("heatsoak.core.mesh.inspect", "cmd_inspect", "show what heatsoak understood of a mesh file"),
    "check": ("heatsoak.core.app.runner", "cmd_check", "validate a case file without running it"),
    "run": ("heatsoak.core.app.runner", "cmd_run", "run a case file headless and write result files"),
    "sweep": ("heatsoak.core.app.sweep.command", "cmd_sweep", "run many variants of a case on a dask cluster, one table"),
    "whatif": ("heatsoak.core.app.whatif", "cmd_whatif",
               "answer a changed case in milliseconds with its reduced model (files as `run` writes)"),
    "bench": ("heatsoak.core.app.bench", "cmd_bench", "measure assembly and solver speed on cube meshes"),
    "ui": ("heatsoak.plugin.app", "cmd_ui", "start the browser UI"),
}


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="heatsoak",
        description="Transient heat diffusion on tetrahedral meshes. "
        "Results are engineering estimates to be checked; defer to local codes and licensed practice.",
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, (module, func, help_) in COMMANDS.items():
        p = sub.add_parser(name, help=help_, description=help_)
        p.set_defaults(_target=(module, func))
        _ARGUMENTS[name](p)
    return parser


def _inspect_args(p):
    p.add_argument("mesh", help="mesh file in any format meshio reads")
    p.add_argument("--unit", default="m", choices=["m", "cm", "mm", "in"], help="length unit of the file (default m)")
    p.add_argument("--feature-angle", type=float, default=30.0, help="degrees, to split untagged surfaces (default 30)")
    p.add_argument("--json", action="store_true", help="print the facts as JSON")


def _check_args(p):
    p.add_argument("case", help="case file (TOML)")


def _run_args(p):
    p.add_argument("case", nargs="+", help="case file(s) (TOML); several run one after the other")
    p.add_argument("--out", help="results folder (default: CASE-results next to each case file; "
                   "with several cases, one subfolder per case)")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.add_argument("--max-memory", type=float, metavar="GB",
                   help="memory one run may use (default: half the machine's); a case estimated above it is "
                        "refused, a run that grows past it stops")


def _sweep_args(p):
    p.add_argument("case", help="case file (TOML) the variants start from")
    p.add_argument("--vary", action="append", metavar="KEY=VALUES",
                   help="a dotted case key and a TOML array of values, e.g. 'boundary.bore.ramp.over=[300, 600]'; "
                   "several --vary make every combination")
    p.add_argument("--list", metavar="FILE", help="CSV of variants: a header of keys (and optionally 'variant'), "
                   "one variant a row, cells as TOML values")
    p.add_argument("--out", required=True, help="sweep folder: variants/, one results folder per variant, sweep.csv")
    p.add_argument("--workers", type=int, help="worker processes of the local cluster (default: the cores)")
    p.add_argument("--scheduler", metavar="ADDRESS", help="tcp://host:port of a running dask scheduler to use instead")
    p.add_argument("--plot", metavar="COLUMN", help="table column plotted against each key (default: first probe's max)")
    p.add_argument("--full", action="store_true", help="run every variant in full, even when they differ only in "
                   "schedules (answered by one reduced model on this machine otherwise)")
    p.add_argument("--quiet", action="store_true", help="no line per finished variant")


def _bench_args(p):
    p.add_argument("--sizes", default="small,medium,large", help="comma list of small, medium, large")
    p.add_argument("--json", help="also write the numbers to this JSON file")
    p.add_argument("--steps", type=int, default=1000, help="steps of the long runs (default 1000)")
    p.add_argument("--sweep", action="store_true", help="also time a sweep of 8 variants on 2 local worker processes "
                   "against the same variants one after another (needs the cluster extra)")
    p.add_argument("--reduced", action="store_true", help="also time the reduced model (heatsoak whatif) per size: "
                   "build against a full run, one answer, its error against the full run")
    p.add_argument("--reduced-only", action="store_true", help="measure only the reduced-model rows")
    p.add_argument("--pymor", action="store_true", help="with --reduced: also build pyMOR's balanced truncation "
                   "of the same system and compare (the mor extra; small sizes only)")
    p.add_argument("--time-error", action="store_true", help="also compare adaptive steps (tolerance) with the "
                   "fixed step of the same accuracy on the demo case and a cube")


def _ui_args(p):
    p.add_argument("input", nargs="?", help="mesh or case file to open (default: the demo case)")
    p.add_argument("--data-dir", help="folder the file browser may open files from (and the only one "
                   "cases opened in the UI may name files in)")
    p.add_argument("--work-dir", help="folder for uploads and run results, kept at exit (default: a temporary "
                   "folder removed when the UI stops)")
    p.add_argument("--port", default="8080", help="port to listen on, 1-65535 (default 8080)")
    p.add_argument("--host", default="127.0.0.1", help="interface to bind (default 127.0.0.1)")
    p.add_argument("--key-file", help="file holding the access key (needed when --host is not loopback)")
    p.add_argument("--server", action="store_true", help="do not open a browser")


def _whatif_args(p):
    p.add_argument("case", help="case file (TOML)")
    p.add_argument("--set", action="append", metavar="KEY=VALUE",
                   help="change the case: KEY a dotted path (boundary.bore.ramp.over), VALUE a TOML value; repeatable")
    p.add_argument("--out", required=True, help="results folder")
    p.add_argument("--quiet", action="store_true", help="print only the result lines")
    p.add_argument("--field", action="store_true", help="also write the temperature field (rebuilt from the model)")
    p.add_argument("--exact-time", action="store_true",
                   help="integrate exactly in time (piecewise-linear schedules) instead of the case's theta steps")
    p.add_argument("--cache", help="folder of saved reduced models (default .heatsoak-cache beside the case)")
    p.add_argument("--rebuild", action="store_true", help="build the reduced model again even if a saved one fits")
    p.add_argument("--find", metavar="KEY=LO:HI",
                   help="search the number at KEY between LO and HI for the edge where --goal starts or stops holding")
    p.add_argument("--goal", metavar="GOAL",
                   help="what must hold: 'max(P) < X', 'min(P) > X', 'maxdiff(P, Q) < X' or 'reach(P, V) < TIME'")


#: Exit code after Ctrl-C (128 + SIGINT, common practice, no source).
EXIT_INTERRUPTED = 130

_ARGUMENTS = {"inspect": _inspect_args, "check": _check_args, "run": _run_args, "sweep": _sweep_args,
              "whatif": _whatif_args, "bench": _bench_args, "ui": _ui_args}


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 2
    module, func = args._target
    try:
        return int(getattr(importlib.import_module(module), func)(args) or 0)
    except InputError as exc:
        print(f"heatsoak {args.command}: {exc}", file=sys.stderr)
        return 2
    except HeatsoakError as exc:
        print(f"heatsoak {args.command}: {exc}", file=sys.stderr)
        return 1
    except MemoryError:
        print(f"heatsoak {args.command}: out of memory: the job needed more than this process may use "
              "(see heatsoak check for its estimate; heatsoak run --max-memory)", file=sys.stderr)
        return 1
    except BrokenPipeError:  # output piped into a pager or head that closed early
        sys.stderr.close()
        return 0
    except KeyboardInterrupt:  # before a run had result files to close (set-up, checking): nothing to keep
        print(f"heatsoak {args.command}: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED


if __name__ == "__main__":
    sys.exit(main())
