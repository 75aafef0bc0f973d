"""``heatsoak sweep``: many variants of one case on a distributed engine, one table.

Folder layout of ``--out DIR``::

    DIR/variants/<variant>.toml   each variant as a case file ``heatsoak run`` runs alone
    DIR/<variant>/                its results, as ``heatsoak run`` writes them
    DIR/sweep.csv                 one row per variant (see :mod:`.table`)
    DIR/plots/                    probe curves per variant, a quantity against each key

Rerunning the same command skips the variants whose case file is unchanged
and whose results say "complete"; the others run again.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field
from pathlib import Path

try:
    import tomllib
except ModuleNotFoundError:  # Python 3.10
    import tomli as tomllib

from heatsoak.core.app.sweep.plan import SweepPlan, plan_sweep
from heatsoak.core.app.sweep.table import Row, read_results_row, write_table
from heatsoak.core.app.sweep.worker import VariantTask
from heatsoak.core.case.casefile import case_to_toml
from heatsoak.core.errors import InputError

__all__ = ["SweepResult", "cmd_sweep", "prepare", "run_sweep"]

#: Exit code of a sweep stopped with Ctrl-C (128 + SIGINT, as ``run``).
EXIT_CANCELLED = 130


@dataclass
class SweepResult:
    """What a sweep gave: its rows in variant order, "complete" or "cancelled", and where the table is."""

    rows: list
    status: str
    table: Path
    skipped: list = field(default_factory=list)
    plots: list = field(default_factory=list)


def _write_variant(path: Path, data: dict) -> tuple:
    """Write a variant's case file unless it already holds the same text; (data as read back, unchanged?)."""
    text = case_to_toml(data)
    try:
        unchanged = path.read_text(encoding="utf-8") == text
    except OSError:
        unchanged = False
    if not unchanged:
        tmp = path.with_name(path.name + ".tmp")
        tmp.write_text(text, encoding="utf-8")
        tmp.replace(path)
    return tomllib.loads(text), unchanged


def prepare(plan: SweepPlan, out_dir) -> tuple:
    """Write every variant's case file; ``(tasks to run, rows of variants already complete)``."""
    out = Path(out_dir)
    folder = out / "variants"
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputError(f"--out {out}: cannot create {folder} ({exc.strerror})") from None
    tasks, done = [], {}
    for v in plan.variants:
        path = folder / f"{v.name}.toml"
        data, unchanged = _write_variant(path, v.data)
        row = read_results_row(out / v.name, v.name, v.values) if unchanged else None
        if row is not None and row.status == "complete":
            done[v.name] = row
        else:
            tasks.append(VariantTask(v.name, v.values, data, str(path), str(out / v.name)))
    return tasks, done


def run_sweep(plan: SweepPlan, out_dir, workers=None, scheduler=None, on_row=None, should_stop=None,
              plot: str | None = None, say=None, full: bool = False) -> SweepResult:
    """Run the variants of ``plan`` not already complete in ``out_dir`` and write the table and plots.

    Parameters
    ----------
    plan : SweepPlan
    out_dir : path
    workers : int, optional
        Worker processes of the local cluster (default: the cores).
    scheduler : str, optional
        ``tcp://host:port`` of a running dask scheduler, used instead of a local cluster.
    on_row : callable, optional
        Called with each :class:`~.table.Row` as its variant ends.
    should_stop : callable, optional
        Polled while variants run; True stops the sweep (as Ctrl-C does).
    plot : str, optional
        The table column plotted against each varied key (default: the first probe's maximum).
    say : callable, optional
        Told in one line what engine runs the variants.
    full : bool
        Run every variant in full, even when they differ only in schedules (which a reduced
        model answers on this machine by default, see :mod:`.reduced`).
    """
    from heatsoak.core.app.sweep.engine import describe, open_engine, run_tasks
    from heatsoak.core.app.sweep.reduced import answer_reduced, schedule_only

    out = Path(out_dir)
    tasks, rows = prepare(plan, out)
    skipped = list(rows)
    table = out / "sweep.csv"
    ordered = lambda: [rows[v.name] for v in plan.variants if v.name in rows]  # noqa: E731

    def collect(row: Row) -> None:
        rows[row.variant] = row
        write_table(table, plan.keys, ordered())
        if on_row is not None:
            on_row(row)

    status = "complete"
    cases = None if full else schedule_only(tasks)
    if cases is not None:
        status = answer_reduced(tasks, cases, out, collect, should_stop, say)
        tasks = tasks if status is None else []
        status = status or "complete"
    if tasks:
        with open_engine(workers, scheduler) as client:
            if say is not None:
                say(f"running {len(tasks)} variant(s) on {describe(client)}")
            status = run_tasks(client, tasks, collect, should_stop)
    for v in plan.variants:  # a row for every variant, whatever happened
        rows.setdefault(v.name, Row(v.name, v.values, "cancelled"))
    write_table(table, plan.keys, ordered())
    from heatsoak.core.app.sweep.plots import write_plots

    plots = write_plots(out, plan.keys, ordered(), plot)
    return SweepResult(ordered(), status, table, skipped, plots)


def _printer(total: int, quiet: bool):
    count = [0]

    def show(row: Row) -> None:
        count[0] += 1
        if quiet:
            return
        wall = "" if row.wall_s is None else f" in {row.wall_s:.1f} s"
        why = f": {row.error.splitlines()[0]}" if row.error else ""
        print(f"[{count[0]}/{total}] {row.variant} {row.status}{wall}{why}", flush=True)

    return show


def cmd_sweep(args) -> int:
    """``heatsoak sweep CASE --vary KEY=VALUES [...] --out DIR [--workers N] [--scheduler ADDR] [--quiet]``.

    Exit 0 when every variant completed, 1 when some failed, 130 when cancelled.
    """
    plan = plan_sweep(args.case, args.vary or (), args.list, args.out)
    if args.workers is not None and args.workers < 1:
        raise InputError(f"--workers {args.workers}: give at least 1 worker process")
    t0 = time.perf_counter()
    show = _printer(len(plan.variants), args.quiet)
    say = None if args.quiet else (lambda line: print(line, flush=True))
    result = run_sweep(plan, args.out, args.workers, args.scheduler, on_row=show, plot=args.plot, say=say,
                       full=args.full)
    counts = {s: sum(r.status == s for r in result.rows) for s in ("complete", "failed", "cancelled")}
    done = ", ".join(f"{n} {s}" for s, n in counts.items() if n)
    again = f" ({len(result.skipped)} already complete, not rerun)" if result.skipped else ""
    print(f"{len(plan.variants)} variants: {done}{again} in {time.perf_counter() - t0:.1f} s; "
          f"table {result.table}")
    if result.status == "cancelled":
        return EXIT_CANCELLED
    return 1 if counts["failed"] else 0
