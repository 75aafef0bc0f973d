"""Several cases in one ``heatsoak run``: a results folder of its own for each, every case run
whatever happens to the others, and a batch summary.

Results folders: ``DIR/<case stem>`` with ``--out DIR``, else ``<case stem>-results`` beside
each case. Cases whose folders would coincide (``a/c.toml`` and ``b/c.toml``) get the name of
their own folder in front (``DIR/a-c``, ``DIR/b-c``), then a number if still needed; the same
file named twice is refused before anything runs.

The batch summary (printed, and written to ``DIR/batch.json`` with ``--out``) lists each case
with its results folder, status (complete, failed, cancelled or "not run" after a Ctrl-C),
steps, end time and the reason of a failure.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

from heatsoak.core.errors import CaseError, HeatsoakError
from heatsoak.core.results.writer import write_summary

#: Exit code of a batch stopped with Ctrl-C (128 + SIGINT, common practice, no source).
EXIT_CANCELLED = 130


def _folder_key(path: Path) -> str:
    return os.path.normcase(os.path.abspath(path))


def output_folders(paths, out=None) -> list:
    """One distinct results folder per case file (see the module notes).

    Raises
    ------
    CaseError
        When one file is named twice (its results would overwrite each other).
    """
    paths = [Path(p) for p in paths]
    seen = {}
    for p in paths:
        key = _folder_key(Path(os.path.realpath(p)))
        if key in seen:
            raise CaseError(f"{p}: the case is named twice in the batch (also as {seen[key]}); "
                            "its results would overwrite each other")
        seen[key] = p

    def base(p: Path, prefix: str = "") -> Path:
        name = f"{prefix}{p.stem}"
        return Path(out) / name if out is not None else p.parent / f"{name}-results"

    folders = [base(p) for p in paths]
    keys = [_folder_key(f) for f in folders]
    clash = {k for k in keys if keys.count(k) > 1}
    folders = [base(p, f"{p.resolve().parent.name}-") if k in clash else f for p, f, k in zip(paths, folders, keys)]
    taken, final = set(), []
    for f in folders:
        candidate, n = f, 1
        while _folder_key(candidate) in taken:
            n += 1
            candidate = f.with_name(f"{f.name}-{n}")
        taken.add(_folder_key(candidate))
        final.append(candidate)
    return final


def _row(path, folder, status: str, summary=None, error: str = "") -> dict:
    summary = summary or {}
    return {"case": str(path), "results": str(folder), "status": status, "steps": summary.get("steps"),
            "end_time": summary.get("end_time"), "error": error or summary.get("error", "")}


def _one(run_one, path, folder, quiet: bool) -> dict:
    """Run one case of the batch; its row (a failure is caught, reported and kept in the row)."""
    try:
        summary = run_one(path, folder, quiet)
    except HeatsoakError as exc:
        print(f"heatsoak run: {path}: {exc}", file=sys.stderr, flush=True)
        return _row(path, folder, "failed", error=str(exc))
    except Exception as exc:  # noqa: BLE001 - whatever stops one case, the others still run
        message = f"{type(exc).__name__}: {exc}"
        print(f"heatsoak run: {path}: {message}", file=sys.stderr, flush=True)
        return _row(path, folder, "failed", error=message)
    return _row(path, folder, summary["status"], summary)


def run_batch(paths, out, quiet: bool, run_one) -> int:
    """Run every case into its own folder; print and write the batch summary.

    ``run_one(path, folder, quiet) -> summary`` runs one case. Exit 0 when all
    complete, 1 when one or more failed, 130 after Ctrl-C (the cases after it
    are listed as not run).
    """
    paths = [Path(p) for p in paths]
    folders = output_folders(paths, out)
    rows = []
    for path, folder in zip(paths, folders):
        print(f"== {path} -> {folder}", flush=True)
        try:
            rows.append(_one(run_one, path, folder, quiet))
        except KeyboardInterrupt:
            rows.append(_row(path, folder, "cancelled"))
        if rows[-1]["status"] == "cancelled":
            break
    rows += [_row(p, f, "not run") for p, f in zip(paths[len(rows):], folders[len(rows):])]
    _report(rows, out)
    if any(r["status"] == "cancelled" for r in rows):
        return EXIT_CANCELLED
    return 1 if any(r["status"] == "failed" for r in rows) else 0


def _report(rows: list, out) -> None:
    counts = {s: sum(r["status"] == s for r in rows) for s in ("complete", "failed", "cancelled", "not run")}
    print(f"batch: {len(rows)} cases, " + ", ".join(f"{n} {s}" for s, n in counts.items() if n))
    for r in rows:
        why = f": {r['error'].splitlines()[0]}" if r["error"] else ""
        print(f"  {r['status']:<9} {r['case']} -> {r['results']}{why}")
    if out is not None:
        Path(out).mkdir(parents=True, exist_ok=True)
        write_summary(Path(out) / "batch.json", {"cases": rows, "counts": counts})
