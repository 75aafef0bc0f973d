"""Small line plots rendered on the server as SVG text (the schedule preview of the set-up).

matplotlib's object API (no pyplot) so plots can be drawn from any thread.
"""

from __future__ import annotations

import io

from matplotlib.figure import Figure

INK = "#2d3331"
GRID = "#d9dcd6"
WINDOW = "#e9efe9"
#: Curve colours (distinct, calm), cycled.
CURVES = ("#1f6f8b", "#d1495b", "#edae49", "#00798c", "#6a4c93", "#8c6d46", "#3c8d2f", "#b5651d")


def _figure(width: float = 4.2, height: float = 1.9):
    fig = Figure(figsize=(width, height), dpi=100)
    fig.patch.set_alpha(0.0)
    ax = fig.add_subplot(1, 1, 1)
    ax.set_facecolor("white")
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(INK)
    ax.tick_params(colors=INK, labelsize=7.5)
    ax.grid(True, color=GRID, linewidth=0.6)
    return fig, ax


def _svg(fig) -> str:
    fig.tight_layout(pad=0.4)
    buf = io.StringIO()
    fig.savefig(buf, format="svg")
    text = buf.getvalue()
    return text[text.find("<svg"):]


def schedule_svg(times, values, unit: str, window: float | None = None, width: float = 3.9) -> str:
    """Preview of a schedule: value against time, with the run's time window shaded.

    Parameters
    ----------
    times, values : (n,) arrays
        Samples of the schedule (times in s).
    unit : str
        Unit of the value, shown on the axis.
    window : float, optional
        End time of the run [s]; the span [0, window] is shaded.
    """
    fig, ax = _figure(width, 1.6)
    if window:
        ax.axvspan(0.0, window, color=WINDOW, zorder=0, label="run")
    ax.plot(times, values, color=CURVES[0], linewidth=1.8)
    ax.set_xlabel("time [s]", fontsize=8, color=INK)
    ax.set_ylabel(unit, fontsize=8, color=INK)
    return _svg(fig)


def empty_svg(message: str, width: float = 5.2, height: float = 1.0) -> str:
    """A placeholder that says why there is no plot."""
    fig = Figure(figsize=(width, height), dpi=100)
    fig.patch.set_alpha(0.0)
    fig.text(0.5, 0.5, message, ha="center", va="center", fontsize=9, color="#6d7470")
    return _svg(fig)
