"""The estimated time-step error beside the probe curves, and a warning when it is larger than a
probe's margin to its threshold.

State: ``hs_time_error`` (one line, "" with no run) and ``hs_time_error_warn`` ("" or the warning).
"""

from __future__ import annotations

from heatsoak.core.results.time_error import margin_warnings
from trame.widgets import html
from trame.widgets import vuetify3 as v3


def _largest(summary: dict) -> float | None:
    """Largest estimated time-step error of a run at its probes [K], None when it has none."""
    per_probe = summary.get("time_error") or {}
    return max(per_probe.values()) if per_probe else None


def _run_text(run) -> str:
    """'0.0076 K' (and how the step was chosen) for one run, '' without an estimate."""
    largest = _largest(run.summary)
    if largest is None:
        return ""
    tol = (run.summary.get("solver") or {}).get("tolerance")
    how = f" (adaptive steps, tolerance {tol:g} K)" if tol is not None else ""
    return f"{largest:.2g} K{how}"


def _warnings(run) -> list:
    """Probes of ``run`` whose time-step error is larger than their closest approach to their threshold."""
    summary = run.summary
    thresholds = {name: info.get("threshold") for name, info in (summary.get("probes") or {}).items()}
    return margin_warnings(summary.get("time_error") or {}, thresholds, run.probes)


def note(runs) -> tuple:
    """(line, warning) for the runs whose curves are shown."""
    texts = [(run.id, _run_text(run)) for run in runs]
    texts = [(i, t) for i, t in texts if t]
    if not texts:
        return "", ""
    if len(texts) == 1:
        line = f"time-step error at most {texts[0][1]} at the probes"
    else:
        line = "time-step error at most " + ", ".join(f"{t} (run {i})" for i, t in texts) + " at the probes"
    warned = [f"run {run.id}: {w}" if len(runs) > 1 else w for run in runs for w in _warnings(run)]
    return line, " ".join(warned)


def refresh(panel) -> None:
    """Update the line and the warning for the runs chosen for comparison."""
    state = panel.state
    runs = [r for r in (panel.runs.get(i) for i in state.hs_compare or []) if r is not None]
    state.hs_time_error, state.hs_time_error_warn = note(runs)


def register(panel) -> None:
    panel.state.update({"hs_time_error": "", "hs_time_error_warn": ""})

    @panel.state.change("hs_compare", "hs_runs")
    def on_runs(**_):
        refresh(panel)


def widget() -> None:
    """The line under the probe curves' title, and its warning."""
    html.Div("{{ hs_time_error }}", v_if="hs_time_error", classes="text-caption", id="hs-time-error")
    v3.VAlert(v_if="hs_time_error_warn", text=("hs_time_error_warn",), type="warning", density="compact",
              variant="tonal", classes="my-1 text-caption", id="hs-time-error-warn")
