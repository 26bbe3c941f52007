"""Tables that never cut a figure, and the one escape for text that rich would read as markup.

Every cell is handed to rich as :class:`rich.text.Text`, never as a markup string, so a book's
``[estimation]`` or a unit such as ``[USD]`` shows as written. Column widths are chosen here, not
by rich: a figure column is exactly as wide as its widest figure, text columns wrap between
words, and when the columns still do not fit the console the table is split into parts that
each repeat the key columns. No cell ever ends in an ellipsis.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

from rich.console import Console
from rich.markup import escape
from rich.table import Table
from rich.text import Text


def plain(value: object) -> str:
    """``value`` as a string in which rich markup shows literally (``[x]`` stays ``[x]``)."""
    return escape(str(value))


def text(value: object, style: str | None = None) -> Text:
    """A rich Text that is never parsed as markup."""
    if isinstance(value, Text):
        return value
    return Text(str(value), style=style or "")


def _words(t: Text) -> int:
    return max((len(w) for w in t.plain.split()), default=0)


def _lines(t: Text) -> int:
    return max((len(line) for line in t.plain.splitlines()), default=0)


@dataclass
class Column:
    """One column: its header, alignment and whether it holds wrap-able text.

    ``wrap=False`` (figures, ids) keeps every cell on one line at full width; ``wrap=True`` lets
    a cell break between words (a word is never broken).
    """

    header: str
    justify: str = "right"
    wrap: bool = False
    style: str | None = None


@dataclass
class Grid:
    """A titled table of cells, laid out by :func:`fit` for a given width."""

    title: str
    columns: list[Column]
    rows: list[list[Text]] = field(default_factory=list)
    sections: set[int] = field(default_factory=set)   # row indices followed by a rule
    keys: int = 1                                       # leading columns repeated in each part
    caption: str | None = None
    show_header: bool = True

    def add_row(self, *cells: object, end_section: bool = False) -> None:
        if len(cells) != len(self.columns):
            raise ValueError(f"{len(cells)} cells for {len(self.columns)} columns")
        self.rows.append([text(c) for c in cells])
        if end_section:
            self.sections.add(len(self.rows) - 1)


def _needs(grid: Grid) -> tuple[list[int], list[int]]:
    """Natural width (no wrapping) and least width (wrap between words) of each column."""
    natural, least = [], []
    for j, col in enumerate(grid.columns):
        cells = [r[j] for r in grid.rows]
        head = Text(col.header) if grid.show_header else Text("")
        widest = max([_lines(c) for c in cells] + [0])
        head_word = _words(head)
        if col.wrap:
            natural.append(max(widest, _lines(head)))
            least.append(max([_words(c) for c in cells] + [head_word, 1]))
        else:
            natural.append(max(widest, _lines(head)))
            least.append(max(widest, head_word, 1))
    return natural, least


def _frame(n: int) -> int:
    """Characters a box table spends besides its cells: padding 1 + 1 and n + 1 rules."""
    return 3 * n + 1


def _widths(cols: Sequence[int], natural: list[int], least: list[int], wrap: list[bool],
            width: int) -> list[int] | None:
    """Widths for the columns ``cols`` within ``width``, or None when even the least won't fit."""
    room = width - _frame(len(cols))
    full = [natural[j] for j in cols]
    if sum(full) <= room:
        return full
    low = [least[j] for j in cols]
    if sum(low) > room:
        return None
    # headers of figure columns wrap first, then text columns shrink towards their longest word
    out = list(full)
    for step in (lambda k: not wrap[cols[k]], lambda k: wrap[cols[k]]):
        for k in sorted(range(len(cols)), key=lambda k: -(out[k] - low[k])):
            if not step(k):
                continue
            excess = sum(out) - room
            if excess <= 0:
                return out
            out[k] -= min(excess, out[k] - low[k])
    return out if sum(out) <= room else None


def _parts(grid: Grid, width: int) -> list[tuple[list[int], list[int]]]:
    natural, least = _needs(grid)
    wrap = [c.wrap for c in grid.columns]
    n = len(grid.columns)
    keys = list(range(min(grid.keys, n)))
    every = list(range(n))
    w = _widths(every, natural, least, wrap, width)
    if w is not None:
        return [(every, w)]
    parts, current = [], list(keys)
    for j in range(len(keys), n):
        trial = current + [j]
        if _widths(trial, natural, least, wrap, width) is None and len(current) > len(keys):
            parts.append(current)
            current = keys + [j]
        else:
            current = trial
    parts.append(current)
    # even the parts out: move trailing columns right while the next part is the thinner one
    k0 = len(keys)
    for i in range(len(parts) - 2, -1, -1):
        while len(parts[i]) - k0 > len(parts[i + 1]) - k0 + 1:
            trial = keys + [parts[i][-1]] + parts[i + 1][k0:]
            if _widths(trial, natural, least, wrap, width) is None:
                break
            parts[i + 1] = trial
            parts[i] = parts[i][:-1]
    # a part that cannot fit even alone is shown at its least widths (nothing more can be done)
    return [(p, _widths(p, natural, least, wrap, width) or [least[j] for j in p]) for p in parts]


def fit(grid: Grid, width: int) -> list[Table]:
    """Rich tables showing ``grid`` whole within ``width`` characters (split when needed)."""
    parts = _parts(grid, width)
    tables = []
    for k, (cols, widths) in enumerate(parts):
        title = grid.title if len(parts) == 1 else f"{grid.title} (part {k + 1} of {len(parts)})"
        t = Table(title=text(title), title_justify="left", show_header=grid.show_header,
                  caption=None if grid.caption is None or k < len(parts) - 1
                  else text(grid.caption), caption_justify="left")
        for j, w in zip(cols, widths, strict=True):
            c = grid.columns[j]
            t.add_column(text(c.header), justify=c.justify, width=w, overflow="fold",
                         no_wrap=False, style=c.style)
        for i, row in enumerate(grid.rows):
            t.add_row(*[row[j] for j in cols], end_section=i in grid.sections)
        tables.append(t)
    return tables


def show(console: Console, grids: Grid | Iterable[Grid]) -> None:
    """Print each grid whole at the console's width."""
    for g in [grids] if isinstance(grids, Grid) else grids:
        for t in fit(g, console.width):
            console.print(t)
