"""``heatsoak whatif --find KEY=LO:HI --goal GOAL``: the edge of a goal found on the reduced model,
confirmed by one full run.

Goals (P, Q probe names; X a temperature [degC]; TIME [s]):

* ``max(P) < X``        the probe stays below X over the whole run
* ``min(P) > X``        the probe stays above X
* ``maxdiff(P, Q) < X`` the two probes never differ by X or more
* ``reach(P, V) < TIME`` the probe reaches V before TIME

The number at KEY (e.g. ``boundary.bore.ramp.over``) is scanned over [LO, HI]
on the reduced model, then the first change between holding and failing is
narrowed by bisection; the answer is the edge value on the side where the
goal holds. The reduced answers are taken on the unsafe side by their
estimated error (a limit X must hold for the temperature plus the estimate),
so the edge is safe against the full model. A full run at that value (files
in ``--out``) says whether the goal holds there; the margin is how far the
goal's quantity is from its limit.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
from heatsoak.core.case.casefile import case_from_data
from heatsoak.core.case.overrides import apply_assignment
from heatsoak.core.errors import InputError
from heatsoak.core.results.record import first_crossing

__all__ = ["Goal", "parse_find", "parse_goal", "search"]

_NUM = r"([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)"
_NAME = r"\s*([^,()\s]+)\s*"
_GOALS = {
    "max": (re.compile(rf"^\s*max\({_NAME}\)\s*<\s*{_NUM}\s*$"), 1),
    "min": (re.compile(rf"^\s*min\({_NAME}\)\s*>\s*{_NUM}\s*$"), 1),
    "maxdiff": (re.compile(rf"^\s*maxdiff\({_NAME},{_NAME}\)\s*<\s*{_NUM}\s*$"), 2),
    "reach": (re.compile(rf"^\s*reach\({_NAME},\s*{_NUM}\s*\)\s*<\s*{_NUM}\s*$"), 1),
}
SCAN = 33
BISECTIONS = 40


@dataclass
class Goal:
    """A goal on probe histories: ``margin`` > 0 when it holds.

    Attributes
    ----------
    kind : "max", "min", "maxdiff" or "reach"
    probes : tuple of probe names
    value : float, the threshold of ``reach`` (None otherwise) [degC]
    limit : float [degC] (a time [s] for ``reach``)
    text : str, as given
    """

    kind: str
    probes: tuple
    value: float | None
    limit: float
    text: str

    def quantity(self, times, history: dict, error: float = 0.0) -> float:
        """The goal's quantity of probe histories ``history`` (name -> (n,) array) at ``times``,
        taken on the unsafe side by ``error`` [K] (the reduced model's estimated error)."""
        a = history[self.probes[0]]
        if self.kind == "max":
            return float(a.max()) + error
        if self.kind == "min":
            return float(a.min()) - error
        if self.kind == "maxdiff":
            return float(np.abs(a - history[self.probes[1]]).max()) + 2 * error
        target = self.value + error * np.sign(self.value - a[0])  # a little further to go
        hit = first_crossing(times, a, target)
        return np.inf if hit is None else hit

    def margin(self, quantity: float) -> float:
        return quantity - self.limit if self.kind == "min" else self.limit - quantity


def parse_goal(text: str, probe_names) -> Goal:
    """The :class:`Goal` written in ``text``; InputError listing the forms and the probe names."""
    for kind, (rx, n) in _GOALS.items():
        m = rx.match(text)
        if m:
            g = m.groups()
            probes = tuple(g[:n])
            value = float(g[1]) if kind == "reach" else None
            goal = Goal(kind, probes, value, float(g[-1]), text.strip())
            unknown = [p for p in probes if p not in probe_names]
            if unknown:
                raise InputError(f"--goal {text!r}: no probe {unknown[0]!r}; probes are {list(probe_names)}")
            return goal
    raise InputError(f"--goal {text!r}: expected 'max(P) < X', 'min(P) > X', 'maxdiff(P, Q) < X' or "
                     f"'reach(P, V) < TIME' with probe names from {list(probe_names)}")


def parse_find(text: str):
    """(key, lo, hi) of ``KEY=LO:HI``; InputError naming the text."""
    m = re.match(rf"^\s*([^=\s]+)\s*=\s*{_NUM}\s*:\s*{_NUM}\s*$", text or "")
    if not m:
        raise InputError(f"--find {text!r}: expected KEY=LO:HI, e.g. boundary.bore.ramp.over=60:1200")
    key, lo, hi = m.group(1), float(m.group(2)), float(m.group(3))
    if not lo < hi:
        raise InputError(f"--find {text!r}: LO must be below HI")
    return key, lo, hi


def search(evaluate, lo: float, hi: float):
    """Scan then bisect for the edge of a goal.

    Parameters
    ----------
    evaluate : callable x -> margin (> 0 when the goal holds)
    lo, hi : float, the range of x

    Returns
    -------
    dict with ``edge`` (the holding side's x, or None when the goal holds everywhere or
    nowhere), ``fails_at`` (the other side), ``edges`` (changes seen in the scan),
    ``evaluations``, ``holds`` (all/none/edge).
    """
    xs = np.linspace(lo, hi, SCAN)
    ok = np.array([evaluate(x) > 0 for x in xs])
    count = SCAN
    changes = np.flatnonzero(ok[1:] != ok[:-1])
    if changes.size == 0:
        return {"edge": None, "fails_at": None, "edges": 0, "evaluations": count,
                "holds": "all" if ok.all() else "none"}
    i = changes[0]
    good, bad = (xs[i], xs[i + 1]) if ok[i] else (xs[i + 1], xs[i])
    for _ in range(BISECTIONS):
        mid = 0.5 * (good + bad)
        count += 1
        if evaluate(mid) > 0:
            good = mid
        else:
            bad = mid
        if abs(good - bad) <= 1e-9 * (hi - lo):
            break
    return {"edge": float(good), "fails_at": float(bad), "edges": int(changes.size), "evaluations": count,
            "holds": "edge"}


def case_at(case, key: str, x: float):
    """``case`` with the number at ``key`` set to ``x`` (mesh reused, files relative to the case file)."""
    data = apply_assignment(case.data, key, float(x))
    return case_from_data(data, case.base_dir, mesh=case.mesh, path=case.path)


def _histories(names, outputs) -> dict:
    return {n: outputs[i] for i, n in enumerate(names)}


def _reduced_margin(model, outputs, case, key, goal, names):
    """evaluate(x) -> margin on the reduced model, and a function giving (margin, estimate, quantity)."""
    from heatsoak.core.solve.reduced import answer

    def full(x):
        c = case_at(case, key, x)
        ans = answer(model, c.problem, c.time, outputs, check=False)
        q = goal.quantity(ans.times, _histories(names, ans.outputs), ans.error_estimate)
        return goal.margin(q), ans.error_estimate, q

    return (lambda x: full(x)[0]), full


def cmd_find(args, case, say) -> int:
    """Find the edge of ``--goal`` over ``--find KEY=LO:HI``, print it and confirm it with a full run."""
    import csv
    import json
    from pathlib import Path

    from heatsoak.core.app.runner import _probe_set, run_case
    from heatsoak.core.app.whatif import cache_path, obtain_model
    from heatsoak.core.results.reduced import answer_outputs
    from heatsoak.core.solve.reduced import stale_reasons

    if not (args.find and args.goal):
        raise InputError("--find KEY=LO:HI and --goal GOAL go together")
    key, lo, hi = parse_find(args.find)
    names = [p.name for p in case.probes]
    goal = parse_goal(args.goal, names)
    model, _ = obtain_model(case, cache_path(case, args.cache), say, args.rebuild)
    stale = stale_reasons(model, case_at(case, key, lo).problem, case.time)
    if stale:
        raise InputError(f"--find {key}: not a schedule, so the reduced model cannot vary it ({'; '.join(stale)})")
    outputs = answer_outputs(model, case.mesh, _probe_set(case))
    margin, detail = _reduced_margin(model, outputs, case, key, goal, names)
    found = search(margin, lo, hi)
    result = {"key": key, "range": [lo, hi], "goal": goal.text, **found}
    if found["edge"] is None:
        print(f"{goal.text} holds {'everywhere' if found['holds'] == 'all' else 'nowhere'} for {key} in "
              f"[{lo:g}, {hi:g}] ({found['evaluations']} reduced answers); no full run made")
    else:
        m, est, q = detail(found["edge"])
        out = Path(args.out)
        run_case(case_at(case, key, found["edge"]), out)
        with open(out / "probes.csv", newline="", encoding="utf-8") as f:
            rows = list(csv.reader(f))
        data = np.array(rows[1:], dtype=float)
        hist = {n: data[:, rows[0].index(n)] for n in names}
        q_full = goal.quantity(data[:, 0], hist)
        result.update(reduced={"quantity": q, "margin": m, "error_estimate": est},
                      full_run={"quantity": q_full, "margin": goal.margin(q_full), "holds": goal.margin(q_full) > 0})
        unit = "s" if goal.kind == "reach" else "K"
        print(f"answer: {key} = {found['edge']:.6g} (goal {goal.text} holds there, fails at {found['fails_at']:.6g}; "
              f"{found['evaluations']} reduced answers, {found['edges']} edge(s) in the scan)")
        print(f"reduced model: quantity {q:.6g} with its estimated error {est:.2g} K on the unsafe side, "
              f"margin {m:.3g} {unit}")
        print(f"confirming full run: quantity {q_full:.6g}, margin {goal.margin(q_full):.3g} {unit}, goal "
              f"{'holds' if goal.margin(q_full) > 0 else 'does NOT hold'}; files in {out}")
    Path(args.out).mkdir(parents=True, exist_ok=True)
    (Path(args.out) / "find.json").write_text(json.dumps(result, indent=2, default=float) + "\n", encoding="utf-8")
    return 0
