"""The limit frontier: residual risk of the best hedge against a scale on every position limit.

Scenarios that set ``limit_scale`` (and the base, at scale 1) are points; scenarios that share
all other settings form one line. A line shows the hedged P&L standard deviation (the residual
risk, currency) falling as limits widen, the continuous-relaxation bound under it and the
unhedged standard deviation as the ceiling. Infeasible points are left out of the lines and
listed separately.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

from basiswise.data_adapters.output import atomic_path

__all__ = ["FrontierLine", "frontier_lines", "frontier_text", "write_frontier_png"]


@dataclass(frozen=True)
class FrontierLine:
    """One frontier line: points sorted by limit scale."""

    group: str
    scale: list[float] = field(default_factory=list)
    hedged_std: list[float] = field(default_factory=list)
    relaxed_std: list[float | None] = field(default_factory=list)
    unhedged_std: float | None = None
    infeasible: list[float] = field(default_factory=list)

    @property
    def label(self) -> str:
        return self.group or "book settings"

    def to_dict(self) -> dict:
        return {"group": self.label, "limit_scale": self.scale, "hedged_std": self.hedged_std,
                "relaxed_hedged_std": self.relaxed_std, "unhedged_std": self.unhedged_std,
                "infeasible_scales": self.infeasible}


def frontier_lines(results) -> list[FrontierLine]:
    """Group scenario results (:class:`.runner.ScenarioResult`) into frontier lines."""
    groups: dict[str, list] = {}
    for r in results:
        if r.limit_scale is not None:
            groups.setdefault(r.frontier_group, []).append(r)
    lines = []
    for g, rs in groups.items():
        rs = sorted(rs, key=lambda r: r.limit_scale)
        ok = [r for r in rs if r.feasible and r.hedged_std is not None]
        if not ok and not rs:
            continue
        lines.append(FrontierLine(
            group=g, scale=[float(r.limit_scale) for r in ok],
            hedged_std=[float(r.hedged_std) for r in ok],
            relaxed_std=[r.relaxed_std for r in ok],
            unhedged_std=next((r.unhedged_std for r in rs if r.unhedged_std is not None), None),
            infeasible=[float(r.limit_scale) for r in rs if not r.feasible]))
    return lines


def frontier_text(lines: list[FrontierLine], currency: str = "", *, width: int = 50,
                  height: int = 12) -> str:
    """A character chart of the frontier lines for the terminal (one marker per line)."""
    pts = [(s, v, k) for k, ln in enumerate(lines) for s, v in zip(ln.scale, ln.hedged_std,
                                                                    strict=True)]
    if len(pts) < 2:
        return "limit frontier: fewer than two feasible limit-scale points"
    xs, ys = [p[0] for p in pts], [p[1] for p in pts]
    x0, x1 = min(xs), max(xs)
    ceilings = [ln.unhedged_std for ln in lines if ln.unhedged_std is not None]
    y0, y1 = 0.0, max(ys + ceilings)
    x1 = x1 if x1 > x0 else x0 + 1.0
    y1 = y1 if y1 > y0 else 1.0
    grid = [[" "] * width for _ in range(height)]
    marks = "*o+x#@%&"

    def row(v: float) -> int:
        return min(height - 1, max(0, round((y1 - v) / (y1 - y0) * (height - 1))))

    for c in ceilings[:1]:
        grid[row(c)] = ["-" if ch == " " else ch for ch in grid[row(c)]]
    for s, v, k in pts:
        col = min(width - 1, max(0, round((s - x0) / (x1 - x0) * (width - 1))))
        grid[row(v)][col] = marks[k % len(marks)]
    label_w = 12
    out = [f"Limit frontier: hedged P&L std ({currency}) against limit scale"
           + ("; - - unhedged" if ceilings else "")]
    for i, line in enumerate(grid):
        v = y1 - i * (y1 - y0) / (height - 1)
        tick = f"{v:,.0f}" if i in (0, height // 2, height - 1) else ""
        out.append(f"{tick:>{label_w}} |{''.join(line)}")
    out.append(" " * label_w + " +" + "-" * width)
    left, right = f"{x0:g}", f"{x1:g}"
    out.append(" " * (label_w + 2) + left + " " * max(1, width - len(left) - len(right)) + right)
    if len(lines) > 1:
        out += [f"  {marks[k % len(marks)]} {ln.label}" for k, ln in enumerate(lines)]
    return "\n".join(out)


def write_frontier_png(lines: list[FrontierLine], path: str | Path, *, currency: str = "",
                       title: str = "Limit frontier") -> Path:
    """Draw the frontier with matplotlib (Agg) and write it atomically as PNG."""
    import matplotlib

    matplotlib.use("Agg", force=True)
    from matplotlib.figure import Figure

    fig = Figure(figsize=(7.5, 4.5), dpi=110)
    ax = fig.add_subplot(1, 1, 1)
    drawn = False
    for k, ln in enumerate(lines):
        if not ln.scale:
            continue
        drawn = True
        (h,) = ax.plot(ln.scale, ln.hedged_std, marker="o", label=f"hedged — {ln.label}")
        rel = [(s, r) for s, r in zip(ln.scale, ln.relaxed_std, strict=True)
               if r is not None and math.isfinite(r)]
        if rel and any(abs(r - v) > 1e-9 * max(1.0, v)
                       for (_, r), v in zip(rel, ln.hedged_std, strict=False)):
            ax.plot(*zip(*rel, strict=True), linestyle=":", color=h.get_color(),
                    label=f"continuous bound — {ln.label}")
        if ln.unhedged_std is not None and k == 0:
            ax.axhline(ln.unhedged_std, color="grey", linestyle="--", label="unhedged")
        for s in ln.infeasible:
            ax.axvline(s, color="red", alpha=0.3, linewidth=1)
    if not drawn:
        ax.text(0.5, 0.5, "no feasible limit-scale scenario", ha="center", va="center",
                transform=ax.transAxes)
    ax.set_xlabel("limit scale (× every position and group limit)")
    ax.set_ylabel(f"P&L standard deviation over the horizon ({currency})".replace(" ()", ""))
    ax.set_ylim(bottom=0)
    ax.set_title(title)
    ax.grid(True, alpha=0.3)
    if drawn:
        ax.legend(fontsize=8)
    fig.text(0.01, 0.01, "Estimates from price history; not a forecast.", fontsize=7,
             color="grey")
    fig.tight_layout()
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format="png")
    return Path(path)
