"""What a sweep runs: the variants of a case, from ``--vary KEY=VALUES`` and a ``--list`` file.

Each ``--vary`` gives a dotted key of the case file and a TOML array of values
(``boundary.bore.ramp.over=[300, 600, 1200]``); several make the full
factorial, the first key varying slowest. A list file is a CSV table whose
header names keys (and optionally a ``variant`` column naming each row) and
whose cells are TOML values, one variant a row; with ``--vary`` too, every
row is combined with every ``--vary`` combination.

Keys and values are read by :mod:`heatsoak.core.case.overrides`, the parser
of ``KEY=VALUE`` changes.
"""

from __future__ import annotations

import csv
import itertools
import re
from dataclasses import dataclass
from pathlib import Path

from heatsoak.core.case.casefile import read_case_toml
from heatsoak.core.case.overrides import apply_assignment, parse_assignment, parse_value
from heatsoak.core.case.relocate import relocate_files
from heatsoak.core.errors import CaseError

__all__ = ["SweepPlan", "Variant", "parse_vary", "plan_from_data", "plan_sweep", "read_variant_list"]

#: Most variants one sweep may hold (a typo in a factorial should not queue a million runs).
MAX_VARIANTS = 10_000


@dataclass
class Variant:
    """One case of a sweep.

    Attributes
    ----------
    name : str
        Folder-safe and unique in the sweep: ``variants/<name>.toml``, results in ``<name>/``.
    values : dict
        Varied key -> value.
    data : dict
        The case tables with the values set, file names relative to the variants folder.
    """

    name: str
    values: dict
    data: dict


@dataclass
class SweepPlan:
    """The case a sweep starts from (None when given as data), its varied keys (table columns, in order)
    and its variants."""

    case_path: Path | None
    keys: list
    variants: list


def parse_vary(text: str) -> tuple:
    """``(key, values)`` of one ``--vary KEY=VALUES`` text; VALUES must be a non-empty TOML array."""
    key, values = parse_assignment(text)
    if not isinstance(values, list) or not values:
        raise CaseError(f"--vary {text!r}: VALUES must be a non-empty TOML array, e.g. {key}=[300, 600]")
    return key, values


def read_variant_list(path) -> tuple:
    """``(keys, names, rows)`` of a variant list file.

    Parameters
    ----------
    path : path
        CSV: a header of dotted keys (and optionally ``variant``), then one
        variant a row, each cell a TOML value (plain words need no quotes).

    Returns
    -------
    keys : list of str
    names : list of (str or None)
        The ``variant`` cell of each row, None without that column.
    rows : list of list
        Each row's values in ``keys`` order.
    """
    path = Path(path)
    try:
        with open(path, newline="", encoding="utf-8-sig") as f:
            table = [r for r in csv.reader(f) if any(c.strip() for c in r)]
    except OSError as exc:
        raise CaseError(f"--list {path}: cannot read it ({exc.strerror})") from None
    if len(table) < 2:
        raise CaseError(f"--list {path}: expected a header of keys and at least one row of values")
    header = [h.strip() for h in table[0]]
    keys = [h for h in header if h != "variant"]
    names, rows = [], []
    for line, cells in enumerate(table[1:], start=2):
        if len(cells) != len(header):
            raise CaseError(f"--list {path}, line {line}: {len(cells)} cells, the header has {len(header)}")
        named = dict(zip(header, cells))
        names.append(named["variant"].strip() if "variant" in named else None)
        rows.append([parse_value(named[k], f"--list {path}, line {line}, {k}") for k in keys])
    return keys, names, rows


def _slug(value) -> str:
    text = format(value, "g") if isinstance(value, float) else str(value)
    return re.sub(r"[^A-Za-z0-9.+-]", "", text)[:16] or "x"


#: Names in the sweep folder that a variant's results folder must not take.
RESERVED = ("variants", "plots", "sweep.csv")


def _name(index: int, width: int, keys, values, given) -> str:
    if given:
        safe = re.sub(r"[^A-Za-z0-9._+-]", "_", given).strip("._")[:80]
        if safe:
            return f"{safe}_" if safe.lower() in RESERVED else safe
    parts = [f"{k.rsplit('.', 1)[-1]}-{_slug(v)}" for k, v in zip(keys, values)]
    return "_".join([f"v{index + 1:0{width}d}", *parts])[:80]


def _combinations(vary: list, listed) -> tuple:
    """(keys, [(given name or None, values)]) of the list rows times the --vary factorial."""
    list_keys, names, rows = listed if listed is not None else ([], [None], [[]])
    keys = [*list_keys, *(k for k, _ in vary)]
    twice = sorted({k for k in keys if keys.count(k) > 1})
    if twice:
        raise CaseError(f"--vary/--list: the key(s) {twice} are given more than once")
    if not keys:
        raise CaseError("heatsoak sweep: give at least one --vary KEY=VALUES or a --list FILE")
    combos = []
    for (name, row), rest in itertools.product(zip(names, rows), itertools.product(*(v for _, v in vary))):
        combos.append((name if not vary else None, [*row, *rest]))
    if len(combos) > MAX_VARIANTS:
        raise CaseError(f"--vary/--list: {len(combos)} variants; at most {MAX_VARIANTS} in one sweep")
    return keys, combos


def plan_sweep(case_path, vary=(), list_file=None, out_dir=".") -> SweepPlan:
    """The variants of a sweep of the case file ``case_path``.

    Parameters
    ----------
    case_path : path
    vary : sequence of str
        ``KEY=VALUES`` texts.
    list_file : path, optional
        A variant list (:func:`read_variant_list`).
    out_dir : path
        The sweep's folder; variant case files go to ``out_dir/variants``.
    """
    case_path = Path(case_path)
    return plan_from_data(read_case_toml(case_path), case_path.parent, vary, list_file, out_dir, case_path)


def plan_from_data(base: dict, base_dir, vary=(), list_file=None, out_dir=".", case_path=None) -> SweepPlan:
    """The variants of a sweep of case tables ``base`` whose file names are relative to ``base_dir``
    (a case being edited, not yet saved); other parameters as :func:`plan_sweep`."""
    keys, combos = _combinations([parse_vary(t) for t in vary],
                                 None if list_file is None else read_variant_list(list_file))
    target = Path(out_dir) / "variants"
    width = len(str(len(combos)))
    variants, seen = [], set()
    for i, (given, values) in enumerate(combos):
        data = base
        for key, value in zip(keys, values):
            data = apply_assignment(data, key, value)
        name = _name(i, width, keys, values, given)
        if name in seen:
            raise CaseError(f"--list {list_file}: the variant name {name!r} is used twice")
        seen.add(name)
        variants.append(Variant(name, dict(zip(keys, values)), relocate_files(data, base_dir, target)))
    return SweepPlan(None if case_path is None else Path(case_path), keys, variants)
