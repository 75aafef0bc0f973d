"""Reading back the temperature field a run wrote (``temperature.xdmf`` + ``.h5``).

The writer is :class:`heatsoak.core.results.writer.XdmfSeries`; this reader serves
viewers that replay a run frame by frame without loading it all at once.
"""

from __future__ import annotations

import re
from pathlib import Path

import h5py
import numpy as np
from heatsoak.core.errors import InputError
from heatsoak.core.results.writer import FIELD_NAME

_TIME = re.compile(r'<Time Value="([^"]+)"/>')


class FieldSeries:
    """The nodal temperature of a results folder, one frame at a time.

    Parameters
    ----------
    out_dir : path
        A results folder written by :func:`heatsoak.core.app.runner.run_case`.

    Attributes
    ----------
    times : ndarray, shape (n_frames,)
        Times of the written frames [s].
    """

    def __init__(self, out_dir):
        self.out_dir = Path(out_dir)
        xdmf = self.out_dir / f"{FIELD_NAME}.xdmf"
        try:
            text = xdmf.read_text(encoding="utf-8")
        except OSError as exc:
            raise InputError(f"{xdmf}: cannot read the results ({exc.strerror})") from None
        self.times = np.array([float(v) for v in _TIME.findall(text)])
        self._h5 = h5py.File(xdmf.with_suffix(".h5"), "r")

    def __len__(self) -> int:
        return int(self.times.size)

    def frame(self, k: int) -> np.ndarray:
        """Temperature at every node in frame ``k``, shape (n_nodes,) [degC]."""
        if not 0 <= k < len(self):
            raise IndexError(f"frame {k} of a series of {len(self)}")
        return np.asarray(self._h5[f"{FIELD_NAME}/{k}"][()])

    def range(self) -> tuple:
        """(min, max) temperature over every frame [degC]."""
        lo, hi = np.inf, -np.inf
        for k in range(len(self)):
            f = self.frame(k)
            lo, hi = min(lo, float(f.min())), max(hi, float(f.max()))
        return lo, hi

    def nearest(self, t: float) -> int:
        """Index of the frame whose time is closest to ``t`` [s]."""
        return int(np.argmin(np.abs(self.times - float(t))))

    def difference(self, other: FieldSeries, k: int) -> np.ndarray:
        """Frame ``k`` minus the frame of ``other`` nearest in time, (n_nodes,) [K].

        Both series must be on the same mesh.
        """
        return self.frame(k) - other.frame(other.nearest(self.times[k]))

    def difference_bound(self, other: FieldSeries) -> float:
        """Largest absolute difference to ``other`` over every frame [K] (a symmetric colour range)."""
        return max((float(np.abs(self.difference(other, k)).max()) for k in range(len(self))), default=0.0)

    def close(self) -> None:
        if self._h5.id.valid:
            self._h5.close()
