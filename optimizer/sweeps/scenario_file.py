"""Limit scenarios: the scenario file, its validation against a book, grids, and applying one.

A scenario file is TOML. Its top-level keys are all optional:

``[sweep]``
    ``include_base = true`` adds a scenario named ``base`` (the book as it is, plus
    ``[defaults]``) in front of the others.
``[defaults]``
    Scenario keys (below, except ``name``) applied to every scenario unless the scenario sets the
    key itself. A scenario that sets one key of an either/or pair (``shock_pct`` /
    ``replay_worst``, ``participation`` / ``participation_scale``) drops the other from the
    defaults.
``[[scenario]]``
    One named scenario each.
``[[grid]]``
    ``name`` plus ``vary``, a table of scenario keys to values: a list (``[0.5, 1, 2]``) or a
    range ``{ start = 0.1, stop = 1.0, step = 0.1 }`` (``stop`` included). Every combination of
    the ``vary`` values becomes one scenario named ``"<name> key=value ..."``; the grid's other
    keys are scenario keys shared by all its points.

Scenario keys (a scenario changes only what it names):

=======================  =============================================================
``name``                 unique name (required in ``[[scenario]]``)
``note``                 free text shown nowhere but the JSON
``limit_scale``          multiply every instrument position limit and group limit (≥ 0)
``instrument_limits``    ``{ ID = L }`` (−L…L), ``{ ID = [min, max] }`` or
                         ``{ ID = { min = a, max = b } }``; replaces that instrument's
                         position limits (explicit values are not scaled)
``group_limits``         ``{ GROUP = L }``: set a group's limit (not scaled)
``remove``               ``["ID", ...]`` instruments that may not be traded; they leave
                         their groups (a group left empty is dropped)
``adv_scale``            multiply every ADV (> 0)
``participation``        set every ``max_participation`` (0 < p ≤ 1)
``participation_scale``  multiply every ``max_participation`` (> 0; capped at 1)
``margin_budget``        set the margin budget (currency, > 0)
``margin_scale``         multiply every initial margin per contract (> 0)
``horizon_days``         hedge horizon (business days, ≥ 1)
``window``               estimation window (price rows, ≥ 2)
``estimator``            covariance estimator (:data:`optimizer.estimation.covariance.ESTIMATORS`)
``sampling``             horizon sampling (overlapping, non-overlapping, scaled)
``shock_pct``            ``{ SERIES = pct }``: price moves in percent of today's price
                         (> −100) for the stress P&L
``replay_worst``         ``"unhedged"`` or ``"hedged"``: replay the horizon window of the
                         price history that hurt the unhedged (or this scenario's hedged)
                         book most
=======================  =============================================================

Every problem is one :class:`~data_adapters.errors.InputError` naming the scenario file, the
scenario and the key: unknown keys, unknown instrument / group / series names, a shock to a
series the book does not declare, and conflicting overrides in one scenario (removing an
instrument and also setting its limit, both keys of an either/or pair).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from basiswise.data_adapters.book import Book
from basiswise.data_adapters.boundary import input_boundary
from basiswise.data_adapters.toml_file import read_toml

from .scenario_checks import (
    _CHOICES,
    _FLOATS,
    _INTS,
    _TABLES,
    EITHER_OR,
    ESTIMATION_KEYS,
    MAX_SCENARIOS,
    SCENARIO_KEYS,
    _Checker,
)

__all__ = ["Scenario", "ScenarioSet", "apply_scenario", "load_scenarios", "parse_scenarios"]


@dataclass(frozen=True)
class Scenario:
    """One validated scenario. ``settings`` holds its keys as written (plain TOML values)."""

    name: str
    settings: dict[str, Any] = field(default_factory=dict)

    def get(self, key: str, default: Any = None) -> Any:
        return self.settings.get(key, default)

    @property
    def estimation(self) -> dict[str, Any]:
        """The estimation overrides (horizon_days, window, estimator, sampling) it sets."""
        return {k: self.settings[k] for k in ESTIMATION_KEYS if k in self.settings}

    @property
    def removed(self) -> frozenset[str]:
        return frozenset(self.settings.get("remove", ()))

    @property
    def frontier_scale(self) -> float | None:
        """Limit scale for the frontier chart (the base counts as 1)."""
        if "limit_scale" in self.settings:
            return float(self.settings["limit_scale"])
        return 1.0 if self.name == "base" and not self.frontier_group else None

    @property
    def frontier_group(self) -> str:
        """Settings other than the limit scale and the stress: one frontier line per group."""
        skip = {"name", "note", "limit_scale", "shock_pct", "replay_worst"}
        items = sorted((k, v) for k, v in self.settings.items() if k not in skip)
        return ", ".join(f"{k}={_fmt(v)}" for k, v in items)


@dataclass(frozen=True)
class ScenarioSet:
    """Scenarios of one file, in file order (base first, then scenarios, then grid points)."""

    source: str
    scenarios: tuple[Scenario, ...]

    def __len__(self) -> int:
        return len(self.scenarios)

    def __iter__(self):
        return iter(self.scenarios)

    def names(self) -> list[str]:
        return [s.name for s in self.scenarios]


def _fmt(v: Any) -> str:
    if isinstance(v, float):
        # 1000000.0 reads 1,000,000, not 1e+06; fractions keep their short form
        return f"{v:,.0f}" if v.is_integer() and abs(v) >= 1e4 else f"{v:g}"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{k}={_fmt(x)}" for k, x in v.items()) + "}"
    if isinstance(v, list | tuple):
        return "[" + ", ".join(_fmt(x) for x in v) + "]"
    return str(v)


def _where(kind: str, i: int, raw: Any) -> str:
    name = raw.get("name") if isinstance(raw, dict) else None
    return f"{kind} {name!r}" if isinstance(name, str) and name else f"{kind}[{i + 1}]"


def _merge(defaults: dict, own: dict) -> dict:
    merged = dict(defaults)
    for a, b in EITHER_OR:
        if a in own:
            merged.pop(b, None)
        if b in own:
            merged.pop(a, None)
    merged.update(own)
    return merged


def _grid_values(chk: _Checker, where: str, key: str, spec: Any) -> list:
    wkey = f"vary.{key}"
    if key not in SCENARIO_KEYS or key in ("name", "note", *_TABLES, "remove"):
        chk.fail(where, wkey, "only scalar scenario keys can vary: "
                              + ", ".join((*_FLOATS, *_INTS, *_CHOICES)))
    if isinstance(spec, dict):
        if set(spec) != {"start", "stop", "step"}:
            chk.fail(where, wkey, "a range needs exactly start, stop and step")
        a, b, st = (chk.number(where, f"{wkey}.{k}", spec[k]) for k in ("start", "stop", "step"))
        if st <= 0 or b < a:
            chk.fail(where, wkey, "a range needs step > 0 and stop ≥ start")
        count = math.floor((b - a) / st + 1e-9) + 1
        if count > MAX_SCENARIOS:
            chk.fail(where, wkey, f"expands to {count} values; at most {MAX_SCENARIOS}")
        ints = key in _INTS
        values = [round(a + i * st, 10) for i in range(count)]
        values = [int(round(v)) for v in values] if ints else values
    elif isinstance(spec, list) and spec:
        values = list(spec)
    else:
        chk.fail(where, wkey, "give a list of values or { start, stop, step }")
    return [chk.scalar(where, key, v, f"{wkey}[{j + 1}]") for j, v in enumerate(values)]


def parse_scenarios(data: dict, book: Book, source: str = "scenarios.toml") -> ScenarioSet:
    """Validate a parsed scenario file against ``book`` and expand its grids.

    Raises
    ------
    InputError
        Naming ``source``, the scenario (or grid) and the key at fault.
    """
    chk = _Checker(book, source)
    unknown = set(data) - {"sweep", "defaults", "scenario", "grid"}
    if unknown:
        chk.fail("", sorted(unknown)[0],
                 "unknown top-level key; use sweep, defaults, scenario, grid")
    sweep = data.get("sweep", {})
    if not isinstance(sweep, dict) or set(sweep) - {"include_base"}:
        chk.fail("sweep", "include_base", "[sweep] takes only include_base = true/false")
    include_base = sweep.get("include_base", True)
    if not isinstance(include_base, bool):
        chk.fail("sweep", "include_base", f"must be true or false, got {include_base!r}")
    defaults_raw = data.get("defaults", {})
    if not isinstance(defaults_raw, dict):
        chk.fail("", "defaults", "must be a table of scenario keys")
    if "name" in defaults_raw:
        chk.fail("defaults", "name", "defaults cannot set a name")
    defaults = chk.scenario("defaults", defaults_raw, need_name=False)

    out: list[Scenario] = []
    if include_base:
        base = chk.scenario("scenario 'base'", _merge(defaults, {}), need_name=False)
        out.append(Scenario("base", base))
    for kind in ("scenario", "grid"):
        items = data.get(kind, [])
        if not isinstance(items, list) or not all(isinstance(x, dict) for x in items):
            chk.fail("", kind, f"write each entry as a [[{kind}]] table")
        for i, raw in enumerate(items):
            where = _where(kind, i, raw)
            if kind == "scenario":
                s = chk.scenario(where, _merge(defaults, raw))
                out.append(Scenario(s["name"], {k: v for k, v in s.items() if k != "name"}))
                continue
            raw = dict(raw)
            vary = raw.pop("vary", None)
            if not isinstance(vary, dict) or not vary:
                chk.fail(where, "vary", "a grid needs vary = { key = [values] or {start, stop, "
                                        "step} }")
            fixed = chk.scenario(where, raw)
            axes = {k: _grid_values(chk, where, k, spec) for k, spec in vary.items()}
            for k in axes:
                if k in fixed:
                    chk.fail(where, f"vary.{k}", "is both varied and fixed in this grid")
            total = math.prod(len(v) for v in axes.values())
            if len(out) + total > MAX_SCENARIOS:
                chk.fail(where, "vary", f"the file expands to over {MAX_SCENARIOS} scenarios")
            base_name = fixed.pop("name")
            for combo in itertools.product(*axes.values()):
                point = dict(zip(axes, combo, strict=True))
                label = " ".join(f"{k}={_fmt(v)}" for k, v in point.items())
                s = chk.scenario(where, _merge(defaults, {**fixed, **point}), need_name=False)
                out.append(Scenario(f"{base_name} {label}", s))
    if not out:
        chk.fail("", "scenario", "the file defines no scenarios")
    seen: set[str] = set()
    for s in out:
        if s.name in seen:
            chk.fail(f"scenario {s.name!r}", "name", "the name is used twice")
        seen.add(s.name)
    return ScenarioSet(source, tuple(out))


def load_scenarios(path: str | Path, book: Book) -> ScenarioSet:
    """Read, validate and expand a scenario file for ``book``."""
    data = read_toml(path, "scenario file")
    source = str(path)
    with input_boundary(source, "scenario file"):
        return parse_scenarios(data, book, source)


# --------------------------------------------------------------------------- applying


def _scaled(v: float | None, s: float) -> float | None:
    return None if v is None else float(v) * s


def apply_scenario(book: Book, sc: Scenario) -> Book:
    """The book as ``sc`` changes its limits, liquidity and margins (estimation untouched).

    The scenario was validated against this book; the copy is made without re-validation so
    that a sweep stays fast. Estimation keys are applied by the caller (see
    :meth:`Scenario.estimation`), once per distinct setting.
    """
    s = sc.settings
    removed = sc.removed
    ls = s.get("limit_scale")
    explicit = s.get("instrument_limits", {})
    instruments = []
    for ins in book.instruments:
        if ins.id in removed:
            continue
        upd: dict[str, Any] = {}
        if ins.id in explicit:
            upd = {"position_limit": None, "min_position": explicit[ins.id][0],
                   "max_position": explicit[ins.id][1]}
        elif ls is not None:
            upd = {"position_limit": _scaled(ins.position_limit, ls),
                   "min_position": _scaled(ins.min_position, ls),
                   "max_position": _scaled(ins.max_position, ls)}
        if "adv_scale" in s and ins.adv is not None:
            upd["adv"] = ins.adv * s["adv_scale"]
        if "participation" in s:
            upd["max_participation"] = s["participation"]
        elif "participation_scale" in s:
            upd["max_participation"] = min(1.0, ins.max_participation * s["participation_scale"])
        if "margin_scale" in s:
            upd["margin"] = ins.margin * s["margin_scale"]
        instruments.append(ins.model_copy(update=upd) if upd else ins)
    groups = []
    set_groups = s.get("group_limits", {})
    for g in book.group_limits:
        members = [i for i in g.instruments if i not in removed]
        if not members:
            continue
        limit = set_groups.get(g.id, g.limit * ls if ls is not None else g.limit)
        if members != g.instruments or limit != g.limit:
            g = g.model_copy(update={"instruments": members, "limit": float(limit)})
        groups.append(g)
    update: dict[str, Any] = {"instruments": instruments, "group_limits": groups}
    if removed:
        update["exposures"] = [e.model_copy(update={"proxy": None}) if e.proxy in removed else e
                               for e in book.exposures]
    if "margin_budget" in s:
        update["constraints"] = book.constraints.model_copy(
            update={"margin_budget": s["margin_budget"]})
    return book.model_copy(update=update)
