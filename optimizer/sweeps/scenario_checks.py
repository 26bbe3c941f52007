"""Validation of scenario keys against a book: every error names file, scenario and key."""

from __future__ import annotations

import math
from typing import Any

from basiswise.data_adapters.book import Book
from basiswise.data_adapters.book_rules import MAX_CONTRACTS, MAX_DAYS, MAX_MONEY
from basiswise.data_adapters.errors import InputError, shorten, summarise

from ..estimation.changes import SAMPLINGS
from ..estimation.covariance import ESTIMATORS

_SCALES = ("limit_scale", "adv_scale", "participation_scale", "margin_scale")
_FLOATS = (*_SCALES, "participation", "margin_budget")
_INTS = ("horizon_days", "window")
_CHOICES = {"estimator": ESTIMATORS, "sampling": SAMPLINGS, "replay_worst": ("unhedged", "hedged")}
_TABLES = ("instrument_limits", "group_limits", "shock_pct")
SCENARIO_KEYS = ("name", "note", *_FLOATS, *_INTS, *_CHOICES, *_TABLES, "remove")
EITHER_OR = (("shock_pct", "replay_worst"), ("participation", "participation_scale"))
ESTIMATION_KEYS = ("horizon_days", "window", "estimator", "sampling")
MAX_SCENARIOS = 100_000
#: Plausible upper bounds of scenario numbers, checked at the door (a scale of 1e6 turns a
#: desk's limits into no limits; beyond, products overflow in the solver). Margins stay below
#: 1e4 times the book's so the margin row keeps its precision next to the budget.
MAX_VALUE = {**dict.fromkeys(_SCALES, 1e6), "margin_scale": 1e4, "participation": 1.0,
             "margin_budget": MAX_MONEY, "horizon_days": MAX_DAYS, "window": 1_000_000}
MAX_SHOCK_PCT = 1e4


class _Checker:
    """Validates scenario keys against one book; every error names file, scenario and key."""

    def __init__(self, book: Book, source: str) -> None:
        self.book, self.source = book, source
        self.instruments = [i.id for i in book.instruments]
        self.groups = {g.id: g for g in book.group_limits}
        self.series = list(book.series)

    def fail(self, where: str, key: str, message: str) -> None:
        raise InputError(message, file=self.source, key=f"{where}.{key}" if where else key)

    def number(self, where: str, key: str, v: Any) -> float:
        if isinstance(v, bool) or not isinstance(v, int | float) or not math.isfinite(v):
            self.fail(where, key, f"must be a finite number, got {shorten(v)}")
        return float(v)

    def scalar(self, where: str, key: str, v: Any, shown: str | None = None) -> Any:
        """Check one scalar key (also used for grid values, with ``shown`` as their key)."""
        kind, key = key, shown or key
        if kind in _INTS:
            if isinstance(v, bool) or not isinstance(v, int):
                self.fail(where, key, f"must be a whole number, got {shorten(v)}")
            low = 1 if kind == "horizon_days" else 2
            if v < low:
                self.fail(where, key, f"must be at least {low}, got {v}")
            if v > MAX_VALUE[kind]:
                self.fail(where, key, f"must be at most {MAX_VALUE[kind]:g}, got {shorten(v)}")
            return v
        if kind in _CHOICES:
            if v not in _CHOICES[kind]:
                choices = ", ".join(_CHOICES[kind])
                self.fail(where, key, f"{shorten(v)} is not valid; use one of: {choices}")
            return v
        x = self.number(where, key, v)
        if kind == "limit_scale" and x < 0:
            self.fail(where, key, f"must be 0 or more, got {x:g}")
        if kind != "limit_scale" and x <= 0:
            self.fail(where, key, f"must be above 0, got {x:g}")
        if kind == "participation" and x > 1:
            self.fail(where, key, f"is a share of ADV, at most 1, got {x:g}")
        if x > MAX_VALUE[kind]:
            self.fail(where, key, f"must be at most {MAX_VALUE[kind]:g} (plausible range), "
                                  f"got {x:g}")
        return x

    def name_in(self, where: str, key: str, v: Any, known: list[str], what: str) -> str:
        if v not in known:
            self.fail(where, key, f"{shorten(v)} is not {what} of the book (known: "
                                  f"{summarise(known, 8)})")
        return v

    def table(self, where: str, key: str, v: Any) -> dict:
        if not isinstance(v, dict) or not v:
            self.fail(where, key, f"must be a non-empty table, got {shorten(v)}")
        out: dict[str, Any] = {}
        for name, item in v.items():
            sub = f"{key}.{name}"
            if key == "instrument_limits":
                self.name_in(where, sub, name, self.instruments, "an instrument")
                out[name] = self.limit_pair(where, sub, item)
            elif key == "group_limits":
                self.name_in(where, sub, name, list(self.groups), "a group limit")
                x = self.number(where, sub, item)
                if x < 0 or x > MAX_CONTRACTS * 100:
                    self.fail(where, sub, f"must be 0 to {MAX_CONTRACTS * 100:g}, got {x:g}")
                out[name] = x
            else:
                if name not in self.series:
                    self.fail(where, sub, f"series {shorten(name)} is not declared in the book "
                                          f"(declared: {summarise(self.series, 8)})")
                x = self.number(where, sub, item)
                if x <= -100:
                    self.fail(where, sub, f"a price cannot fall {x:g} %; use a move above -100")
                if x > MAX_SHOCK_PCT:
                    self.fail(where, sub, f"must be at most {MAX_SHOCK_PCT:g} %, got {x:g}")
                out[name] = x
        return out

    def limit_pair(self, where: str, key: str, v: Any) -> list[float | None]:
        """``L`` → [-L, L]; ``[min, max]``; ``{min=, max=}`` (either may be left out)."""
        if isinstance(v, dict):
            extra = set(v) - {"min", "max"}
            if extra or not v:
                self.fail(where, key, "use { min = ..., max = ... }")
            lo = None if "min" not in v else self.number(where, f"{key}.min", v["min"])
            hi = None if "max" not in v else self.number(where, f"{key}.max", v["max"])
        elif isinstance(v, list):
            if len(v) != 2:
                self.fail(where, key, f"give [min, max], got {shorten(v)}")
            lo, hi = (self.number(where, key, x) for x in v)
        else:
            lim = self.number(where, key, v)
            if lim < 0:
                self.fail(where, key, f"a symmetric limit must be 0 or more, got {lim:g}")
            lo, hi = -lim, lim
        for x in (lo, hi):
            if x is not None and abs(x) > MAX_CONTRACTS:
                self.fail(where, key, f"must be within ±{MAX_CONTRACTS:g} contracts, got {x:g}")
        if lo is not None and hi is not None and lo > hi:
            self.fail(where, key, f"min {lo:g} is above max {hi:g}")
        return [lo, hi]

    def scenario(self, where: str, raw: dict, *, need_name: bool = True) -> dict:
        """Validate a scenario's keys; returns the cleaned settings."""
        out: dict[str, Any] = {}
        for key, v in raw.items():
            if key not in SCENARIO_KEYS:
                self.fail(where, key, f"unknown scenario key; allowed: {', '.join(SCENARIO_KEYS)}")
            if key in ("name", "note"):
                if not isinstance(v, str) or not v.strip():
                    self.fail(where, key, f"must be non-empty text, got {shorten(v)}")
                if any(ord(ch) < 32 or 127 <= ord(ch) < 160 for ch in v):
                    self.fail(where, key, "contains a control character (newline, tab, "
                                          "escape…); use plain text")
                out[key] = v.strip()
            elif key in _TABLES:
                out[key] = self.table(where, key, v)
            elif key == "remove":
                if not isinstance(v, list) or not v:
                    self.fail(where, key, "must be a non-empty list of instrument ids")
                for j, inst in enumerate(v):
                    self.name_in(where, f"{key}[{j + 1}]", inst, self.instruments, "an instrument")
                out[key] = sorted(set(v), key=self.instruments.index)
            else:
                out[key] = self.scalar(where, key, v)
        if need_name and "name" not in out:
            self.fail(where, "name", "required key is missing")
        self.conflicts(where, out)
        return out

    def conflicts(self, where: str, s: dict) -> None:
        for a, b in EITHER_OR:
            if a in s and b in s:
                self.fail(where, b, f"conflicts with {a}: give one of them")
        removed = set(s.get("remove", ()))
        for inst in s.get("instrument_limits", {}):
            if inst in removed:
                self.fail(where, f"instrument_limits.{inst}",
                          f"conflicts with remove: {inst!r} is removed in the same scenario")
        for gid in s.get("group_limits", {}):
            if set(self.groups[gid].instruments) <= removed:
                self.fail(where, f"group_limits.{gid}",
                          "conflicts with remove: every instrument of the group is removed")
        if removed and len(removed) == len(self.instruments):
            self.fail(where, "remove", "removes every instrument; nothing is left to hedge with")


# --------------------------------------------------------------------------- parsing


