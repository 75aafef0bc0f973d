"""The estimated time-step error of a run, kept per probe and for the field, as reported.

The stepper estimates the error of its temperatures at every node and step
(see :mod:`heatsoak.core.solve.stepping.error`); this keeps what is reported:
per probe the largest estimated error over the run, and for the field the
largest over nodes at the times the field is written.
"""

from __future__ import annotations

import numpy as np


class TimeErrorRecord:
    """Largest estimated time-step errors of a run [K].

    Parameters
    ----------
    probes : ProbeSet or None
        Interpolates a nodal field at the probes (``values(E)``, ``names``).
    """

    def __init__(self, probes=None):
        self.probes = probes
        names = [] if probes is None else list(probes.names)
        self.per_probe = dict.fromkeys(names, 0.0)
        self.field = 0.0

    def record(self, error: np.ndarray | None, written: bool) -> None:
        """Take the estimated error (n_nodes,) [K] of one step; ``written``: the field is written then."""
        if error is None:
            return
        if self.per_probe:
            at = np.abs(self.probes.values(error))
            for name, e in zip(self.per_probe, at):
                self.per_probe[name] = max(self.per_probe[name], float(e))
        if written:
            self.field = max(self.field, float(np.max(np.abs(error), initial=0.0)))

    def largest_at_probes(self) -> float:
        """Largest estimate over all probes [K] (0 without probes)."""
        return max(self.per_probe.values(), default=0.0)


def threshold_margin(values, threshold: float) -> float | None:
    """How far a probe history went past its threshold, or stayed short of it [K].

    From a start below the threshold (heating) it is |max - threshold|, from
    above (cooling) |min - threshold|; None when it starts on the threshold.
    A time-step error larger than this could turn "reached" into "not
    reached" or back.
    """
    v = np.asarray(values, dtype=float)
    if v.size == 0 or v[0] == threshold:
        return None
    extreme = v.max() if v[0] < threshold else v.min()
    return float(abs(extreme - threshold))


def margin_warnings(per_probe: dict, thresholds: dict, history: dict) -> list:
    """Warnings for probes whose time-step error is larger than their margin to their threshold.

    Parameters
    ----------
    per_probe : dict name -> estimated error [K]
    thresholds : dict name -> threshold [degC] or None
    history : dict name -> (n,) probe temperatures [degC]
    """
    out = []
    for name, err in per_probe.items():
        thr, values = thresholds.get(name), history.get(name)
        margin = None if thr is None or values is None else threshold_margin(values, thr)
        if margin is not None and err > margin:
            v = np.asarray(values, dtype=float)
            reached = v.max() >= thr if v[0] < thr else v.min() <= thr
            verdict = "reached" if reached else "not reached"
            out.append(f"probe {name}: the time-step error (at most {err:.3g} K) is larger than the {margin:.3g} K "
                       f"by which its threshold {thr:g} degC is {verdict}; take a smaller step or set time.tolerance")
    return out
