"""``heatsoak whatif``: a case answered by its reduced model, with files in the formats of ``heatsoak run``.

The reduced model of a case is kept in a cache folder (default ``.heatsoak-cache``
beside the case file, ``--cache DIR`` elsewhere) as ``<case stem>.reduced.npz``.
The first what-if builds it; later ones reuse it while the mesh, materials,
boundary kinds, convection coefficients and time settings stay the same
(schedules and initial values may change freely). When one of those changed,
the command says which and rebuilds.
"""

from __future__ import annotations

import sys
import time as _time
from pathlib import Path

from heatsoak.core.app.runner import _probe_set, _report, _summary
from heatsoak.core.case.overrides import load_case_with
from heatsoak.core.results.reduced import energy_balance, run_answer, time_errors
from heatsoak.core.results.writer import ResultFiles
from heatsoak.core.solve.reduced import build_reduced, load_model, save_model, stale_reasons

__all__ = ["cache_path", "cmd_whatif", "obtain_model", "whatif"]

CACHE_DIR = ".heatsoak-cache"


def cache_path(case, cache_dir=None) -> Path:
    """Where the reduced model of ``case`` is kept."""
    folder = Path(cache_dir) if cache_dir is not None else case.base_dir / CACHE_DIR
    stem = case.path.stem if case.path is not None else "case"
    return folder / f"{stem}.reduced.npz"


def obtain_model(case, path: Path, say=None, rebuild: bool = False):
    """(model, reused) for ``case``: the one saved at ``path`` when it fits, else a new one saved there.

    ``say`` (callable, optional) is told why a saved model is not used.
    """
    model = None if rebuild else load_model(path)
    if model is not None:
        stale = stale_reasons(model, case.problem, case.time)
        if not stale:
            return model, True
        if say is not None:
            say("reduced model is stale (" + "; ".join(stale) + "): rebuilding")
    model = build_reduced(case.problem, case.time)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        save_model(model, path)
    except OSError as exc:
        if say is not None:
            say(f"cannot keep the reduced model in {path.parent} ({exc.strerror}); use --cache DIR")
    return model, False


class _ReducedRun:
    """What a run summary asks of a stepper, for a reduced answer."""

    def __init__(self, case, model, ans, energy: dict):
        self.case, self.model, self.ans, self._energy = case, model, ans, energy

    def energy(self) -> dict:
        return self._energy

    def report(self) -> dict:
        tm = self.case.time
        return dict(solver="reduced", reason=f"reduced model with {self.model.size} basis vectors, "
                    f"{self.ans.method}", factorizations=0, steps=int(self.ans.times.size - 1), theta=tm.theta,
                    mass=tm.mass, start_steps=tm.start_steps, dt_critical=None,
                    warnings=list(self.model.info.get("warnings", [])))


def _write(files: ResultFiles, rec, model, ans, every: int) -> None:
    from heatsoak.core.solve.reduced import reconstruct

    for i, t in enumerate(rec.times):
        files.step(t, rec.probe_history[i], rec.region_history[i])
    if files.field is not None:
        steps = sorted(set(range(0, rec.times.size, every)) | {rec.times.size - 1})
        for s in steps:
            files.field.write(rec.times[s], reconstruct(model, ans, [s])[0])


def whatif(case, out_dir, cache_dir=None, field: bool = False, exact_time: bool = False, say=None,
           rebuild: bool = False, model=None) -> dict:
    """Answer ``case`` with its reduced model and write probes.csv, regions.csv, summary.json
    (and the field with ``field``) into ``out_dir``; returns the summary.

    ``model``: a reduced model already at hand that fits ``case`` (a sweep shares one); the cache is then
    not looked at. summary["reduced"] = {"basis", "error_estimate" [K], "build_s", "answer_s", "reused",
    "method", "cache"}.
    """
    t0 = _time.perf_counter()
    path = cache_path(case, cache_dir)
    given = model is not None
    model, reused = (model, True) if given else obtain_model(case, path, say, rebuild)
    build_s = float(model.info.get("build_s", 0.0))
    probes = _probe_set(case)
    thresholds = [p.threshold for p in case.probes]
    ans, rec = run_answer(model, case.problem, case.time, case.mesh, probes, thresholds, exact_time)
    files = ResultFiles(out_dir, case.mesh, probes.names, field=field)
    t1 = _time.perf_counter()
    _write(files, rec, model, ans, case.output_every)
    energy = energy_balance(model, case.problem, case.time, ans)
    clock = {"setup": t1 - t0 - ans.answer_s, "stepping": ans.answer_s, "output": _time.perf_counter() - t1}
    clock["wall"] = _time.perf_counter() - t0
    terr = time_errors(model, case.problem, case.time, ans, probes, case.output_every)
    summary = _summary(case, _ReducedRun(case, model, ans, energy), rec, files, "complete", clock, terr)
    if exact_time:
        summary["time_error_method"] = "none: the answer is exact in time for piecewise-linear schedules"
    if getattr(case.time, "tolerance", None) is not None:
        summary["warnings"].append("time.tolerance asks a run for adaptive steps; the reduced answer takes the "
                                   "fixed steps of time.step (as a run without a tolerance does)")
    summary["reduced"] = {"basis": model.size, "error_estimate": ans.error_estimate, "build_s": build_s,
                          "answer_s": ans.answer_s, "reused": reused, "method": ans.method, "cache": None if given else str(path)}
    return files.finish(summary)


def cmd_whatif(args) -> int:
    """``heatsoak whatif CASE [--set KEY=VALUE ...] --out DIR [--quiet] [--field] [--find ...]``."""
    case = load_case_with(args.case, args.set or [])
    say = None if args.quiet else (lambda line: print(line, file=sys.stderr, flush=True))
    if args.find or args.goal:
        from heatsoak.core.app.whatif_find import cmd_find

        return cmd_find(args, case, say)
    out = Path(args.out)
    summary = whatif(case, out, args.cache, args.field, args.exact_time, say, args.rebuild)
    r = summary["reduced"]
    lines = _report(summary, out)
    lines.insert(1, f"reduced model: {r['basis']} basis vectors, {'reused' if r['reused'] else 'built'} "
                 f"(build {r['build_s']:.2f} s), answer {1000 * r['answer_s']:.1f} ms, {r['method']}; "
                 f"estimated error {r['error_estimate']:.2g} K against the full model")
    print("\n".join(lines))
    return 0
