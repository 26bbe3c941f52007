"""The one schema of every command's JSON output: key, type, unit and meaning.

The same thing has the same key and type in every command (``hedged_std`` is a number in the
book's currency over the horizon wherever it appears). Types:

``str``, ``bool``, ``int``, ``number`` (finite int or float) — a trailing ``?`` allows ``null``;
``count`` — whole contracts: an int, a float only where the result is fractional (``solve`` /
``sweep`` with method ``continuous``, a backtest run with ``whole_contracts`` false);
``list[str]``, ``list[number]`` and ``object`` (keys chosen by the input, e.g. scenario settings).

A path ``a[].b`` is key ``b`` of each element of list ``a``; ``a.*`` is every key of object ``a``.
:func:`validate` checks a command's JSON against this table, :func:`markdown_table` renders it for
the README.
"""

from __future__ import annotations

import math
import re

CUR = "currency"
CUR_H = "currency over the horizon"

_COMMON = [
    ("book", "str", "", "book name"),
    ("currency", "str", "", "book currency (ISO code)"),
    ("horizon_days", "int", "business days", "hedge horizon"),
    ("method", "str", "", "exact, round or continuous"),
]

SCHEMA: dict[str, list[tuple[str, str, str, str]]] = {
    "solve": _COMMON + [
        ("status", "str", "", "certified, time-limited, rounded, optimal, infeasible, …"),
        ("as_of", "str?", "ISO date", "decision date from [book] as_of"),
        ("price_date", "str?", "ISO date", "last price date used"),
        ("overrides", "object", "", "settings replaced on the command line"),
        ("estimator", "str", "", "covariance estimator"),
        ("estimator_detail", "str", "", "what the estimator did"),
        ("shrinkage", "number?", "fraction", "shrinkage intensity"),
        ("observations", "int", "rows", "change rows used by the estimate"),
        ("changes", "str", "", "relative, log or absolute"),
        ("sampling", "str", "", "overlapping, non-overlapping or scaled"),
        ("unhedged_std", "number", CUR_H, "P&L std without futures"),
        ("hedged_std", "number?", CUR_H, "P&L std with the target positions"),
        ("relaxed_hedged_std", "number?", CUR_H, "continuous relaxation (lower bound)"),
        ("basis_floor_std", "number", CUR_H, "best std with no limits"),
        ("variance_reduction", "number?", "fraction", "1 − hedged / unhedged variance"),
        ("relaxed_variance_reduction", "number?", "fraction", "the relaxation's"),
        ("rounding_cost_std", "number?", CUR_H, "hedged − relaxed std"),
        ("var95_unhedged", "number", CUR_H, "normal VaR 95 %, a loss shown positive"),
        ("var99_unhedged", "number", CUR_H, "normal VaR 99 %"),
        ("var95_hedged", "number?", CUR_H, "normal VaR 95 % hedged"),
        ("var99_hedged", "number?", CUR_H, "normal VaR 99 % hedged"),
        ("margin_used", "number?", CUR, "initial margin of the target positions"),
        ("margin_budget", "number?", CUR, "[constraints] margin_budget"),
        ("solve_seconds", "number", "seconds", "solve time"),
        ("solver_detail", "str", "", "what the solver did"),
        ("instruments[].id", "str", "", "instrument id"),
        ("instruments[].series", "str", "", "its price series"),
        ("instruments[].contract_month", "str", "YYYY-MM", "empty when not set"),
        ("instruments[].current", "count", "contracts", "held now, negative = short"),
        ("instruments[].target", "count", "contracts", "after the trade"),
        ("instruments[].trade", "count", "contracts", "target − current"),
        ("instruments[].side", "str", "", "BUY, SELL or HOLD (from the trade as shown)"),
        ("instruments[].price", "number", "series price unit", "current price"),
        ("instruments[].target_notional", "number", CUR, "target × contract value, signed"),
        ("instruments[].trade_notional", "number", CUR, "|trade| × contract value"),
        ("instruments[].target_margin", "number", CUR, "|target| × margin per contract"),
        ("instruments[].margin_change", "number", CUR, "target margin − current margin"),
        ("instruments[].adv_share", "number?", "fraction", "|trade| / ADV"),
        ("instruments[].days_to_execute", "number?", "days", "|trade| / (participation × ADV)"),
        ("instruments[].limit_use", "number?", "fraction", "|target| / its position limit"),
        ("instruments[].on_limit", "str", "", "the limit the target sits on, or empty"),
        ("instruments[].shadow", "number", CUR_H, "std removed per extra contract of it"),
        ("instruments[].risk_contribution", "number", CUR_H, "Euler share of hedged std"),
        ("exposures[].id", "str", "", "exposure id"),
        ("exposures[].series", "str", "", "its price series"),
        ("exposures[].quantity", "number", "exposure unit", "negative = must buy"),
        ("exposures[].unit", "str", "", "quantity unit"),
        ("exposures[].value", "number", CUR, "quantity × price"),
        ("exposures[].standalone_std", "number", CUR_H, "std of this exposure alone"),
        ("exposures[].risk_before", "number", CUR_H, "Euler share of unhedged std"),
        ("exposures[].risk_after", "number", CUR_H, "Euler share of hedged std"),
        ("limits[].name", "str", "", "limit name"),
        ("limits[].kind", "str", "", "position limit, group limit, margin, …"),
        ("limits[].binding", "bool", "", "binds in the continuous relaxation"),
        ("limits[].shadow", "number", CUR_H, "std removed per `unit` of extra limit"),
        ("limits[].unit", "str", "", "what one unit of the limit is"),
        ("warnings", "list[str]", "", "short history or a singular covariance, in words"),
        ("notes", "list[str]", "", "notes in words"),
        ("cautions", "list[str]", "", "cautions"),
    ],
    "sweep": _COMMON + [
        ("mode", "str", "", "serial, processes or dask"),
        ("seconds", "number", "seconds", "wall time of the sweep"),
        ("scenarios[].name", "str", "", "scenario name"),
        ("scenarios[].status", "str", "", "as solve's status"),
        ("scenarios[].feasible", "bool", "", "a hedge exists"),
        ("scenarios[].horizon_days", "int", "business days", "this scenario's horizon"),
        ("scenarios[].unhedged_std", "number?", CUR_H, "as in solve"),
        ("scenarios[].hedged_std", "number?", CUR_H, "as in solve"),
        ("scenarios[].relaxed_hedged_std", "number?", CUR_H, "as in solve"),
        ("scenarios[].variance_reduction", "number?", "fraction", "as in solve"),
        ("scenarios[].margin_used", "number?", CUR, "as in solve"),
        ("scenarios[].margin_budget", "number?", CUR, "as in solve"),
        ("scenarios[].contracts.*", "count", "contracts", "target per instrument id"),
        ("scenarios[].binding[].name", "str", "", "as solve's limits[].name"),
        ("scenarios[].binding[].kind", "str", "", "as solve's limits[].kind"),
        ("scenarios[].binding[].shadow", "number", CUR_H, "as solve's limits[].shadow"),
        ("scenarios[].binding[].unit", "str", "", "as solve's limits[].unit"),
        ("scenarios[].conflicts", "list[str]", "", "why infeasible"),
        ("scenarios[].stress.label", "str", "", "the shock or replayed window"),
        ("scenarios[].stress.unhedged", "number?", CUR, "stress P&L unhedged (loss < 0)"),
        ("scenarios[].stress.hedged", "number?", CUR, "stress P&L hedged (loss < 0)"),
        ("scenarios[].stress.futures", "number?", CUR, "stress P&L of the futures"),
        ("scenarios[].settings", "object", "", "the scenario's settings as written"),
        ("scenarios[].estimation", "str", "", "estimation settings used"),
        ("scenarios[].seconds", "number", "seconds", "solve time"),
        ("scenarios[].limit_scale", "number?", "", "limit scale of a frontier point"),
        ("scenarios[].frontier_group", "str", "", "frontier line it belongs to"),
        ("frontier[].group", "str", "", "frontier line"),
        ("frontier[].limit_scale", "list[number]", "", "scales"),
        ("frontier[].hedged_std", "list[number]", CUR_H, "per scale"),
        ("frontier[].relaxed_hedged_std", "list[number]", CUR_H, "per scale"),
        ("frontier[].unhedged_std", "number", CUR_H, "the line's unhedged std"),
        ("frontier[].infeasible_scales", "list[number]", "", "scales with no hedge"),
        ("cautions", "list[str]", "", "cautions"),
    ],
    "backtest": [r for r in _COMMON] + [
        ("window", "int", "rows", "estimation window"),
        ("step", "int", "business days", "between rebalances"),
        ("rebalances", "int", "", "rebalance dates"),
        ("first_date", "str", "ISO date", "first rebalance"),
        ("last_date", "str", "ISO date", "end of the last horizon"),
        ("seconds", "number", "seconds", "wall time"),
        ("ranking[].strategy", "str", "", "hedging strategy"),
        ("ranking[].estimator", "str?", "", "null for rules without an estimate"),
        ("ranking[].variance_reduction", "number", "fraction", "realised, out of sample"),
        ("ranking[].in_sample_vr", "number", "fraction", "what the estimate promised"),
        ("ranking[].hedged_std", "number", CUR_H, "realised"),
        ("ranking[].unhedged_std", "number", CUR_H, "realised"),
        ("ranking[].worst_loss", "number", CUR_H, "largest realised loss, positive"),
        ("ranking[].contracts_traded", "count", "contracts", "Σ |trade| over the rebalances"),
        ("ranking[].whole_contracts", "bool", "", "false for joint-continuous"),
        ("ranking[].trading_cost", "number", CUR, "contracts traded × cost per contract"),
        ("ranking[].rebalances", "int", "", "rebalances of the run"),
        ("ranking[].held", "int", "", "rebalances that kept the previous positions"),
        ("effectiveness.strategy", "str", "", "best run"),
        ("effectiveness.estimator", "str?", "", "best run's estimator"),
        ("effectiveness.groups[].group", "str", "", "hedge relationship"),
        ("effectiveness.groups[].exposures", "list[str]", "", "its exposures"),
        ("effectiveness.groups[].instruments", "list[str]", "", "its instruments"),
        ("effectiveness.groups[].periods", "int", "", "holding periods"),
        ("effectiveness.groups[].slope", "number?", "", "regression slope"),
        ("effectiveness.groups[].intercept", "number?", CUR, "regression intercept"),
        ("effectiveness.groups[].r2", "number?", "fraction", "regression R²"),
        ("effectiveness.groups[].exposure_pnl", "number", CUR, "summed exposure P&L"),
        ("effectiveness.groups[].hedge_pnl", "number", CUR, "summed hedge-leg P&L"),
        ("effectiveness.groups[].dollar_offset", "number?", "fraction", "cumulative offset"),
        ("effectiveness.groups[].regression_ok", "bool?", "", "inside the practice band"),
        ("effectiveness.groups[].offset_ok", "bool?", "", "inside the practice band"),
        ("effectiveness.groups[].within_practice", "bool", "", "both tests inside"),
        ("effectiveness.note", "str", "", "how to read the evidence"),
        ("notes", "list[str]", "", "notes"),
        ("cautions", "list[str]", "", "cautions"),
    ],
}


def _leaves(obj, path: str, out: list, whole: bool) -> None:
    """(path, value, whole) of every value; ``object`` paths are matched by the caller."""
    if isinstance(obj, dict):
        w = obj.get("whole_contracts", whole) is not False
        out.append((path, obj, w))
        for k, v in obj.items():
            _leaves(v, f"{path}.{k}" if path else k, out, w)
    elif isinstance(obj, list) and any(isinstance(v, dict) for v in obj):
        for v in obj:
            _leaves(v, path + "[]", out, whole)
    else:
        out.append((path, obj, whole))


def _is_number(v) -> bool:
    return isinstance(v, int | float) and not isinstance(v, bool) and math.isfinite(v)


def _type_ok(kind: str, v, whole: bool) -> bool:
    if kind.endswith("?"):
        return v is None or _type_ok(kind[:-1], v, whole)
    if kind == "str":
        return isinstance(v, str)
    if kind == "bool":
        return isinstance(v, bool)
    if kind == "int":
        return isinstance(v, int) and not isinstance(v, bool)
    if kind == "number":
        return _is_number(v)
    if kind == "count":
        return (isinstance(v, int) and not isinstance(v, bool)) or (not whole and _is_number(v))
    if kind == "object":
        return isinstance(v, dict)
    if kind.startswith("list["):
        inner = kind[5:-1]
        return isinstance(v, list) and all(_type_ok(inner, x, whole) for x in v)
    raise ValueError(f"unknown schema type {kind!r}")


def _pattern(path: str) -> re.Pattern:
    return re.compile("^" + re.escape(path).replace(r"\*", r"[^.\[\]]+") + "$")


def validate(command: str, obj: dict, *, fractional: bool = False) -> list[str]:
    """Problems of ``obj`` against the schema of ``command`` (empty when it conforms).

    Every value must be declared with a matching type, and every declared key must appear
    (lists that are empty in ``obj`` excepted).
    """
    rows = SCHEMA[command]
    pats = [(_pattern(p), p, t) for p, t, _, _ in rows]
    objects = [p for p, t, _, _ in rows if t == "object"]
    leaves: list = []
    _leaves(obj, "", leaves, not fractional)
    dicts = {path for path, value, _ in leaves if isinstance(value, dict)}
    problems, seen = [], set()
    for path, value, whole in leaves:
        if path == "" or any(path == o or path.startswith(o + ".") for o in objects):
            if path in objects:
                seen.add(path)
                if not isinstance(value, dict):
                    problems.append(f"{path}: expected object, got {type(value).__name__}")
            continue
        match = next(((p, t) for rx, p, t in pats if rx.match(path)), None)
        if match is None:
            below = any(p.startswith(path + ".") or p.startswith(path + "[]") for _, p, _ in pats)
            empty = value is None or value == [] or isinstance(value, dict)
            if not (below and empty):
                problems.append(f"{path}: not in the schema")
            continue
        seen.add(match[0])
        if not _type_ok(match[1], value, whole):
            problems.append(f"{path}: expected {match[1]}, got {value!r}")
    for path, _, _, _ in rows:
        cut = max(path.rfind("."), path.rfind("[]") + 1 if "[]" in path else -1)
        parent = path[:cut] if cut > 0 else ""
        if parent.endswith("["):
            parent += "]"
        required = parent == "" or parent in dicts or parent + "[]" in dicts
        if path not in seen and "*" not in path and required:
            problems.append(f"{path}: missing")
    return problems


def markdown_table() -> str:
    """The schema as the README's Markdown table."""
    lines = ["| command | key | type | unit | meaning |", "| --- | --- | --- | --- | --- |"]
    for command, rows in SCHEMA.items():
        for path, kind, unit, meaning in rows:
            lines.append(f"| {command} | `{path}` | {kind} | {unit} | {meaning} |")
    return "\n".join(lines)
