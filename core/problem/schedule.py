"""Schedules: a quantity as a function of time.

A schedule gives a prescribed temperature [degC], a heat flux [W/m2], an
ambient temperature [degC] or a volumetric source [W/m3] at time t [s].
Three shapes cover what a case file can say:

* :class:`Constant` - one value for all time;
* :class:`Ramp` - hold ``start``, change linearly to ``end`` over ``over``
  seconds from time ``at``, then hold ``end`` (``over = 0`` is a step);
* :class:`Table` - piecewise linear through (time, value) points, held
  constant before the first and after the last point. Chains of ramps and
  holds are written as tables.

Schedules are right-continuous: at a step time the new value applies, and
:meth:`Schedule.rate` is the right-sided derivative at corners.
"""

from __future__ import annotations

import math
import re
import warnings
from pathlib import Path

import numpy as np
from heatsoak.core.errors import InputError, ScheduleError


def _num(x) -> str:
    return f"{float(x):g}"


class Schedule:
    """Base class: a scalar function of time.

    Subclasses implement :meth:`__call__`, :meth:`rate`, :meth:`breakpoints`,
    :meth:`describe` and :meth:`to_toml`.
    """

    def __call__(self, t):
        """Value at time ``t`` [s]: float for a float, array for an array."""
        raise NotImplementedError

    def rate(self, t):
        """d(value)/dt at ``t``, right-sided at corners [unit/s]."""
        raise NotImplementedError

    def breakpoints(self) -> np.ndarray:
        """Sorted times [s] where the slope changes (ramp corners, table times)."""
        raise NotImplementedError

    def describe(self) -> str:
        """Short plain-text description, e.g. ``ramp 20 -> 180 over 600 s from 0 s``."""
        raise NotImplementedError

    def to_toml(self):
        """The case-file value this schedule is written as."""
        raise NotImplementedError

    def lowest(self) -> float:
        """The smallest value the schedule takes for t >= 0 (piecewise linear: at a corner or
        just before one, where a ramp of zero length jumps)."""
        bp = np.asarray(self.breakpoints(), dtype=float)
        bp = bp[bp >= 0.0]
        t = np.concatenate([[0.0], bp, bp * (1.0 - 1e-12) - 1e-300])
        return float(np.min(self(t[t >= 0.0])))

    def __repr__(self) -> str:
        return f"{type(self).__name__}({self.describe()})"


def _shape_like(t, values):
    return float(values) if np.ndim(t) == 0 else values


class Constant(Schedule):
    """One value for all time."""

    def __init__(self, value: float):
        self.value = float(value)

    def __call__(self, t):
        return _shape_like(t, np.full(np.shape(t), self.value))

    def rate(self, t):
        return _shape_like(t, np.zeros(np.shape(t)))

    def breakpoints(self) -> np.ndarray:
        return np.empty(0)

    def describe(self) -> str:
        return f"constant {_num(self.value)}"

    def to_toml(self):
        return self.value


class Table(Schedule):
    """Piecewise linear through ``(times[i], values[i])``.

    Parameters
    ----------
    times : (n,) array
        Strictly increasing times [s], n >= 1.
    values : (n,) array
    source : str
        The CSV file the points came from, as written in the case file
        ("" for points given inline); :meth:`to_toml` writes it back.
    """

    def __init__(self, times, values, source: str = ""):
        t = np.array(times, dtype=float).ravel()
        v = np.array(values, dtype=float).ravel()
        if t.size == 0 or t.shape != v.shape:
            raise ScheduleError(f"a table needs n >= 1 times and n values, got {t.size} and {v.size}")
        if not (np.isfinite(t).all() and np.isfinite(v).all()):
            raise ScheduleError("table times and values must be finite numbers")
        if np.any(np.diff(t) <= 0):
            i = int(np.argmax(np.diff(t) <= 0)) + 1
            raise ScheduleError(f"table times must increase: point {i + 1} has time {_num(t[i])} "
                                f"after {_num(t[i - 1])}")
        t.flags.writeable = v.flags.writeable = False  # shared by breakpoints() without copying
        self.times, self.values, self.source = t, v, str(source)

    def __call__(self, t):
        return _shape_like(t, np.interp(np.asarray(t, dtype=float), self.times, self.values))

    def rate(self, t):
        tt = np.asarray(t, dtype=float)
        if self.times.size < 2:
            return _shape_like(t, np.zeros(tt.shape))
        slopes = np.concatenate([[0.0], np.diff(self.values) / np.diff(self.times), [0.0]])
        return _shape_like(t, slopes[np.searchsorted(self.times, tt, side="right")])

    def breakpoints(self) -> np.ndarray:
        return self.times  # read-only: steppers ask for it every step

    def describe(self) -> str:
        where = f" from {self.source}" if self.source else ""
        return (f"table of {self.times.size} points{where}, "
                f"{_num(self.times[0])} to {_num(self.times[-1])} s")

    def to_toml(self):
        if self.source:
            return {"table": self.source}
        return {"table": [[float(a), float(b)] for a, b in zip(self.times, self.values)]}


class Ramp(Schedule):
    """Hold ``start``, go linearly to ``end`` during [at, at + over], hold ``end``.

    Parameters
    ----------
    start, end : float
        Values before and after the ramp.
    at : float
        Start time of the ramp [s].
    over : float
        Duration [s], >= 0; 0 is a step at ``at`` (the new value applies at ``at``).
    """

    def __init__(self, start: float, end: float, at: float = 0.0, over: float = 0.0):
        self.start, self.end, self.at, self.over = (float(x) for x in (start, end, at, over))
        if not all(math.isfinite(x) for x in (self.start, self.end, self.at, self.over)):
            raise ScheduleError(f"ramp values must be finite numbers, got {self.to_toml()}")
        if self.over < 0:
            raise ScheduleError(f"ramp duration 'over' must be >= 0 s, got {_num(self.over)}")

    def __call__(self, t):
        tt = np.asarray(t, dtype=float)
        if self.over == 0:
            out = np.where(tt >= self.at, self.end, self.start)
        else:
            s = np.clip((tt - self.at) / self.over, 0.0, 1.0)
            out = self.start + s * (self.end - self.start)
        return _shape_like(t, np.asarray(out, dtype=float))

    def rate(self, t):
        tt = np.asarray(t, dtype=float)
        if self.over == 0:
            return _shape_like(t, np.zeros(tt.shape))
        inside = (tt >= self.at) & (tt < self.at + self.over)
        return _shape_like(t, np.where(inside, (self.end - self.start) / self.over, 0.0))

    def breakpoints(self) -> np.ndarray:
        return np.unique([self.at, self.at + self.over])

    def describe(self) -> str:
        if self.over == 0:
            return f"step {_num(self.start)} -> {_num(self.end)} at {_num(self.at)} s"
        return (f"ramp {_num(self.start)} -> {_num(self.end)} over {_num(self.over)} s "
                f"from {_num(self.at)} s")

    def to_toml(self):
        return {"ramp": {"start": self.start, "end": self.end, "at": self.at, "over": self.over}}


# --------------------------------------------------------------------------- CSV tables

_SPLIT = {";": re.compile(r"\s*;\s*"), ",": re.compile(r"\s*,\s*")}


def _fields(line: str):
    """Split a data line on ';', ',' or whitespace (in that order of preference).

    With ';' as separator a decimal comma is accepted (``1,5;20``).
    """
    if ";" in line:
        return [f.replace(",", ".") for f in _SPLIT[";"].split(line.strip())]
    if "," in line:
        return _SPLIT[","].split(line.strip())
    return line.split()


def _is_float(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _parse_row(fields, where: str, allow_text: bool):
    """Two floats from a row, or None for a header row (no number in it); ScheduleError otherwise."""
    if len(fields) != 2:
        raise ScheduleError(f"{where}: expected 2 columns (time, value), found {len(fields)}: {fields!r}")
    out = []
    for name, f in zip(("time", "value"), fields):
        try:
            x = float(f)
        except ValueError:
            if allow_text and not any(_is_float(g) for g in fields):
                return None
            raise ScheduleError(f"{where}: {name} {f!r} is not a number") from None
        if not math.isfinite(x):
            raise ScheduleError(f"{where}: {name} {f!r} is not a finite number")
        out.append(x)
    return out


def read_table_csv(path) -> Table:
    """Read a two-column (time [s], value) table from a text file.

    Columns are separated by commas, semicolons (then a decimal comma is
    allowed) or whitespace; blank lines and lines starting with ``#`` are
    skipped; the first row may be a header.

    Raises
    ------
    ScheduleError
        Naming the file, the row (1-based line number) and the value, for an
        unreadable file, a wrong column count, text or NaN/inf in a number,
        times that do not increase, or a file with no data rows.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise ScheduleError(f"{path}: table file not found") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ScheduleError(f"{path}: cannot read table file ({exc})") from None
    return table_from_text(text, str(path))


def _fast_table(lines: list) -> np.ndarray | None:
    """(n, 2) rows of data ``lines`` parsed by numpy in one go, or None when any line needs the
    row-by-row parser (a header, a mixed separator, a decimal comma, a bad or non-finite number,
    times that do not increase); that parser then gives the exact message."""
    if not lines:
        return None
    head = _fields(lines[0])
    skip = 1 if len(head) == 2 and not any(_is_float(f) for f in head) else 0
    sep = ";" if ";" in lines[0] else "," if "," in lines[0] else None
    body = lines[skip:]
    if sep == ";":
        body = [line.replace(",", ".") for line in body]
    try:
        with warnings.catch_warnings():  # "input contained no data": the row parser says it better
            warnings.simplefilter("ignore", UserWarning)
            data = np.loadtxt(body, delimiter=sep, comments=None, dtype=float, ndmin=2)
    except ValueError:
        return None
    # numpy skips blank lines as the row parser does, and nothing else (comments=None)
    ok = data.shape[1:] == (2,) and data.size and np.isfinite(data).all() and np.all(np.diff(data[:, 0]) > 0)
    return data if ok else None


def table_from_text(text: str, source: str) -> Table:
    """The table in CSV ``text`` (format of :func:`read_table_csv`); ``source`` names it in messages.

    Well-formed text is parsed by numpy in one go (a million rows in about a second); anything
    else goes row by row so the message names the row.
    """
    lines = text.splitlines()
    if "#" in text or not lines or not lines[0].strip():
        lines = [line for line in lines if line.strip() and not line.lstrip().startswith("#")]
    data = _fast_table(lines)
    if data is not None:
        return Table(data[:, 0], data[:, 1], source=source)
    return _rows_table(text, source)


def _rows_table(text: str, source: str) -> Table:
    """:func:`table_from_text` row by row, naming the row of the first problem."""
    rows, first = [], True
    for lineno, line in enumerate(text.splitlines(), start=1):
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        row = _parse_row(_fields(line), f"{source}, row {lineno}", allow_text=first)
        first = False
        if row is None:
            continue
        if rows and row[0] <= rows[-1][1][0]:
            raise ScheduleError(f"{source}, row {lineno}: time {_num(row[0])} does not increase "
                                f"(previous row {rows[-1][0]} has time {_num(rows[-1][1][0])})")
        rows.append((lineno, row))
    if not rows:
        raise ScheduleError(f"{source}: no data rows (expected lines of 'time, value')")
    data = np.array([r for _, r in rows])
    return Table(data[:, 0], data[:, 1], source=source)


# --------------------------------------------------------------------------- case-file values

SCHEDULE_FORMS = "a number, { ramp = { start, end, at, over } }, { table = \"file.csv\" } or { table = [[t, v], ...] }"
_RAMP_KEYS = ("start", "end", "at", "over")


def _error(key: str, message: str) -> ScheduleError:
    err = ScheduleError(f"{key}: {message}")
    err.key, err.detail = key, message
    return err


def _is_number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool)


def _parse_ramp(spec, key: str) -> Ramp:
    if not isinstance(spec, dict):
        raise _error(key, f"expected a table {{ start, end, at, over }}, got {spec!r}")
    unknown = sorted(set(spec) - set(_RAMP_KEYS))
    if unknown:
        raise _error(f"{key}.{unknown[0]}", f"unknown key; a ramp has keys {list(_RAMP_KEYS)}")
    for k in ("start", "end", "over"):
        if k not in spec:
            raise _error(f"{key}.{k}", "missing (a ramp needs start, end and over; at defaults to 0)")
    for k in _RAMP_KEYS:
        if k in spec and not (_is_number(spec[k]) and math.isfinite(spec[k])):
            raise _error(f"{key}.{k}", f"{spec[k]!r} is not a finite number")
    if spec["over"] < 0:
        raise _error(f"{key}.over", f"{spec['over']!r} is negative; 'over' is a duration >= 0 s (0 is a step)")
    return Ramp(spec["start"], spec["end"], spec.get("at", 0.0), spec["over"])


def _parse_table(spec, key: str, base_dir, read_text) -> Table:
    if isinstance(spec, str):
        try:
            if read_text is None:
                table = read_table_csv(Path(spec) if base_dir is None else Path(base_dir) / spec)
            else:
                path, text = read_text(key, spec)
                table = table_from_text(text, str(path))
        except ScheduleError as exc:
            raise _error(key, str(exc)) from None
        except InputError as exc:  # the file may not be read: PathError names key and value
            raise _error(key, f"{spec!r}: {getattr(exc, 'detail', exc)}") from None
        return Table(table.times, table.values, source=spec)
    if not isinstance(spec, list) or not spec:
        raise _error(key, f"expected a CSV file name or a non-empty list of [time, value] pairs, got {spec!r}")
    for i, pair in enumerate(spec):
        ok = isinstance(pair, list) and len(pair) == 2 and all(_is_number(x) and math.isfinite(x) for x in pair)
        if not ok:
            raise _error(f"{key}[{i}]", f"{pair!r} is not a [time, value] pair of finite numbers")
        if i and pair[0] <= spec[i - 1][0]:
            raise _error(f"{key}[{i}]", f"time {pair[0]!r} does not increase (previous time {spec[i - 1][0]!r})")
    data = np.array(spec, dtype=float)
    return Table(data[:, 0], data[:, 1])


def parse_schedule(value, key: str, base_dir=None, read_text=None) -> Schedule:
    """Build a schedule from its case-file value.

    Parameters
    ----------
    value : number or dict
        A number, ``{"ramp": {"start", "end", "at", "over"}}``,
        ``{"table": "file.csv"}`` or ``{"table": [[t, v], ...]}``.
    key : str
        Dotted case-file key of ``value``, used in messages
        (e.g. ``"boundary.bore"`` gives ``"boundary.bore.ramp.over"``).
    base_dir : path, optional
        Folder that relative CSV file names are relative to.
    read_text : callable, optional
        ``read_text(key, name) -> (path, text)`` reads a table file named in
        the case, raising InputError when it may not be read (the case
        reader's :meth:`~heatsoak.core.case.paths.CasePaths.read_text`);
        replaces reading ``base_dir / name`` directly.

    Raises
    ------
    ScheduleError
        With attributes ``key``, the dotted key of the offending entry, and
        ``detail``, the message without the key.
    """
    if _is_number(value):
        if not math.isfinite(value):
            raise _error(key, f"{value!r} is not a finite number")
        return Constant(value)
    if isinstance(value, dict) and len(value) == 1 and set(value) <= {"ramp", "table"}:
        if "ramp" in value:
            return _parse_ramp(value["ramp"], f"{key}.ramp")
        return _parse_table(value["table"], f"{key}.table", base_dir, read_text)
    raise _error(key, f"{value!r} is not a schedule; give {SCHEDULE_FORMS}")
