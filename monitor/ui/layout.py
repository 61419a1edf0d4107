"""Lay out a MonitorView as text lines for a given width and height (pure: the widgets only add colour).

A Line is a tuple of (text, style) segments; style is '' or space-separated style names ('critical',
'selected', 'label', 'big', 'dim', 'key', 'caution', 'stale'), which the widgets map to the component
classes styled in monitor.tcss. plain(line) is what a monochrome terminal shows.
"""

from __future__ import annotations

import math
import textwrap

import numpy as np

from monitor.ui import glyphs
from monitor.ui.keys import keys_for
from monitor.ui.view import STATE_WORDS, AlertRow, Banner, LinkView, MonitorView, Tile, Trend

Segment = tuple[str, str]
Line = tuple[Segment, ...]
BARS = " ▁▂▃▄▅▆▇█"  # index 0 = no data, 1..8 = eighths of a cell
TILE_GAP = 1
MIN_TILE_W = 18


def plain(line: Line) -> str:
    return "".join(text for text, _ in line)


def fit(text: str, width: int, align: str = "left") -> str:
    """Exactly `width` columns: cut with '…' or padded (left, right or center)."""
    if width <= 0:
        return ""
    if len(text) > width:
        return text[: width - 1] + "…"
    if align == "right":
        return text.rjust(width)
    if align == "center":
        return text.center(width)
    return text.ljust(width)


def fit_left(text: str, width: int) -> str:
    """Exactly `width` columns, cutting from the left ('…' first): for file paths."""
    return text.ljust(width) if len(text) <= width else "…" + text[len(text) - width + 1 :]


def header_line(view: MonitorView, width: int) -> Line:
    status = " " + view.status + " "
    title = fit(" " + view.title, max(width - len(status), 0))
    return ((title, "label"), (fit(status, width - len(title), "right"), "")) if width else ()


def caution_line(view: MonitorView, width: int) -> Line:
    text = next((c for c in view.cautions if len(c) + 1 <= width), view.cautions[-1])
    return ((fit(" " + text, width), "caution"),)


def banner_lines(b: Banner | None, width: int, height: int = 3) -> list[Line]:
    if b is None:
        return []
    rows = [f" {b.title} · {b.hint}", f" {b.message}", f" {b.facts}"]
    return [((fit(r, width), "label" if k == 0 else ""),) for k, r in enumerate(rows[:height])]


# --- big numbers --------------------------------------------------------------------------------------
def _tile_block(tile: Tile, width: int, height: int, size: str) -> list[Line]:
    glyph_rows = glyphs.LARGE_ROWS if size == "large" else glyphs.SMALL_ROWS
    big = (glyphs.large if size == "large" else glyphs.small)(tile.value)
    if glyphs.width(tile.value, size) > width - 1:
        big = [""] * (glyph_rows // 2) + [tile.value] + [""] * (glyph_rows - glyph_rows // 2 - 1)
    lines: list[Line] = [((fit(tile.label, width), "label"),)]
    lines += [((fit(" " + row, width), "big"),) for row in big]
    lines.append(((fit(" " + tile.plus_minus, width), "dim"),))
    lines += [((fit(" " + d, width), ""),) for d in tile.details]
    return (lines + [((" " * width, ""),)] * height)[:height]


def tile_size(tiles: tuple[Tile, ...], tile_w: int, height: int) -> str:
    """'large' when every value fits large and the block is tall enough, else 'small' (or 'line')."""
    large_w = max(glyphs.width(t.value, "large") for t in tiles)
    if height >= 1 + glyphs.LARGE_ROWS + 1 + 2 and large_w <= tile_w - 1:
        return "large"
    return "small" if height >= 1 + glyphs.SMALL_ROWS + 1 else "line"


def tile_lines(tiles: tuple[Tile, ...], width: int, height: int) -> list[Line]:
    """The big numbers side by side (two by two when the screen is narrow)."""
    if not tiles or width <= 0 or height <= 0:
        return []
    per_row = len(tiles) if width >= len(tiles) * MIN_TILE_W + (len(tiles) - 1) * TILE_GAP else 2
    grid_rows = math.ceil(len(tiles) / per_row)
    tile_h = height // grid_rows
    tile_w = (width - (per_row - 1) * TILE_GAP) // per_row
    size = tile_size(tiles, tile_w, tile_h)
    if size == "line":
        return [((fit(f"{t.label} {t.value} {t.plus_minus}", width), "label"),) for t in tiles][:height]
    out: list[Line] = []
    for r in range(grid_rows):
        blocks = [_tile_block(t, tile_w, tile_h, size) for t in tiles[r * per_row : (r + 1) * per_row]]
        for row in range(tile_h):
            line: list[Segment] = []
            for k, block in enumerate(blocks):
                if k:
                    line.append((" " * TILE_GAP, ""))
                line.extend(block[row])
            rest = width - sum(len(text) for text, _ in line)
            out.append(tuple(line) + (((" " * rest, ""),) if rest > 0 else ()))
    return out[:height]


# --- trends -------------------------------------------------------------------------------------------
def spark_rows(t_s: np.ndarray, values: np.ndarray, t_end_s: float, window_s: float, columns: int,
               rows: int = 1) -> list[str]:
    """A bar chart of the window in `columns` cells and `rows` lines, newest on the right.

    Each column shows the newest point in its time slice, scaled from the window's lowest to its highest
    value (a flat trend sits at the middle); a column without a finite point is blank (a dropout shows
    as a gap).
    """
    if columns <= 0 or rows <= 0:
        return [""] * max(rows, 0)
    edges = t_end_s - window_s + window_s * np.arange(1, columns + 1) / columns
    idx = np.searchsorted(t_s, edges, side="right") - 1
    left = edges - window_s / columns
    has = (idx >= 0) & (t_s[np.clip(idx, 0, None)] > left) if t_s.size else np.zeros(columns, dtype=bool)
    col = np.where(has, values[np.clip(idx, 0, max(t_s.size - 1, 0))] if t_s.size else np.nan, np.nan)
    finite = np.isfinite(col)
    levels = rows * 8
    fill = np.zeros(columns, dtype=int)
    if finite.any():
        lo, hi = float(col[finite].min()), float(col[finite].max())
        frac = (col[finite] - lo) / (hi - lo) if hi > lo else np.full(int(finite.sum()), 0.5)
        fill[finite] = 1 + np.rint(frac * (levels - 1)).astype(int)
    out = []
    for r in range(rows - 1, -1, -1):  # top row first
        cell = np.clip(fill - 8 * r, 0, 8)
        if r:  # upper rows: a cell is blank when the bar ends below it
            cell = np.where(fill > 8 * r, cell, 0)
        out.append("".join(BARS[c] for c in cell))
    return out


def window_text(window_s: float) -> str:
    return f"{window_s:g} s" if window_s < 60 else f"{window_s / 60:g} min"


def trend_lines(trends: tuple[Trend, ...], window_s: float, width: int, height: int) -> list[Line]:
    """A title row, then per trend: label, bars over the window, last value (and the range when wide)."""
    if width <= 0 or height <= 0:
        return []
    out: list[Line] = [((fit(f" TRENDS · last {window_text(window_s)} ([ ] change)", width), "label"),)]
    shown = trends[: max(height - 1, 0)]
    per = max(1, min(3, (height - 1) // max(len(shown), 1)))
    label_w, value_w = 11, 13
    range_w = 17 if width >= 72 else 0
    spark_w = max(width - label_w - value_w - range_w - 2, 0)
    for tr in shown:
        t_end = float(tr.t_s[-1]) if tr.t_s.size else 0.0
        bars = spark_rows(tr.t_s, tr.values, t_end, window_s, spark_w, per)
        for k, bar in enumerate(bars):
            label = fit(" " + tr.label if k == 0 else "", label_w)
            value = fit(f"{tr.last} {tr.unit}".rstrip() if k == 0 else "", value_w, "right")
            span = fit(f" {tr.low}..{tr.high}" if k == 0 else "", range_w, "right") if range_w else ""
            line: Line = ((label, "label"), (" " + bar, "bars"), (value + span, ""))
            rest = width - sum(len(text) for text, _ in line)
            out.append(line + ((" " * rest, ""),) if rest > 0 else line)
    return out[:height]


# --- alerts -------------------------------------------------------------------------------------------
def _alert_row(r: AlertRow, width: int) -> Line:
    mark = ">" if r.selected else " "
    head = f"{mark}{r.marks} {r.severity} {r.state:<7} {r.time:>7} "
    value_w = 16 if width >= 64 else 0
    name = fit(r.name, max(width - len(head) - value_w, 0))
    value = fit(r.value, value_w, "right") if value_w else ""
    style = r.level + (" selected" if r.selected else "") + (" new" if r.unacknowledged else "")
    return ((fit(head + name + value, width), style),)


def alert_lines(view: MonitorView, width: int, height: int) -> list[Line]:
    """Summary, the listed alerts (scrolled to keep the selection in sight), the selected alert's details."""
    if width <= 0 or height <= 0:
        return []
    out: list[Line] = [((fit(" " + view.alert_summary, width), "label"),)]
    rows = view.alerts
    detail: list[Line] = []
    sel = next((r for r in rows if r.selected), None)
    if sel is not None and height >= 5:
        facts = f"{sel.name}: {sel.value}" + (f", limit {sel.limit}" if sel.limit else "") + f"; {sel.state_long}"
        rows_for_message = 2 if height >= 8 else 1
        message = textwrap.wrap(sel.message, max(width - 2, 10))[:rows_for_message]
        detail = [((fit(f"  {m}", width), "dim"),) for m in message]
        detail += [((fit(f"  {r}", width), "dim"),) for r in textwrap.wrap(facts, max(width - 2, 10))[:2]]
    room = max(height - 1 - len(detail), 0)
    first = 0
    if sel is not None and room:
        index = rows.index(sel)
        first = min(max(index - room + 1, 0), max(len(rows) - room, 0))
    out += [_alert_row(r, width) for r in rows[first : first + room]]
    out += [((" " * width, ""),)] * (room - len(rows[first : first + room]))
    return (out + detail)[:height]


# --- link health --------------------------------------------------------------------------------------
def link_lines(link: LinkView, width: int, height: int) -> list[Line]:
    """One line on a small screen; the full table when there is room."""
    if width <= 0 or height <= 0:
        return []
    style = "" if link.up and not link.stale else "stale"
    if height == 1:
        head = f" {link.brief} │ "
        head = fit(head, width) if len(head) > width else head
        return [((head, style), (fit_left(link.recording, width - len(head)), "dim"))]
    out: list[Line] = [((fit(" " + link.summary, width), style),), ((" " + fit_left(link.recording, width - 1), "dim"),)]
    out.append(((fit(f" {'channel':<18} {'rate':>9} {'last good':>10} {'bad samples':>12}", width), "label"),))
    for r in link.rows:
        text = f" {r.name:<18} {r.rate:>9} {r.age:>10} {r.bad:>12}" + ("  STALE" if r.stale else "")
        out.append(((fit(text, width), "stale" if r.stale else ""),))
    extra = [f" event {e}" for e in link.events] + [f" ! {p}" for p in link.problems]
    out += [((fit(e, width), "dim" if not e.startswith(" !") else "stale"),) for e in extra]
    return out[:height]


def key_line(items: tuple[tuple[str, str], ...], width: int) -> Line:
    """The key bar: each key, then its word."""
    line: list[Segment] = []
    used = 0
    for key, word in items:
        piece = len(key) + len(word) + 3
        if used + piece > width:
            break
        line += [(f" {key} ", "key"), (f"{word} ", "")]
        used += piece
    line.append((" " * max(width - used, 0), ""))
    return tuple(line)


def _wrapped(text: str, width: int, indent: int, style: str = "", first: str = "") -> list[Line]:
    """`first` then `text` wrapped to width, the following rows indented by `indent` columns."""
    rows = textwrap.wrap(text, max(width - indent, 20)) or [""]
    out = [((fit(first.ljust(indent) + rows[0], width), style),)]
    out += [((fit(" " * indent + r, width), style),) for r in rows[1:]]
    return out


def help_lines(mode: str, width: int, cautions: tuple[str, ...]) -> list[Line]:
    """The help screen: every key of this mode, the alert states and symbols, the units, the cautions."""
    blank: Line = ((" " * width, ""),)
    out: list[Line] = [((fit(" KEYS", width), "label"),)]
    for key in keys_for(mode):
        out += _wrapped(key.description, width, 9, "", f"  {key.label}")
    out += _wrapped("Close this screen (also q, ?, F1); ↑ ↓ PgUp PgDn scroll it.", width, 9, "", "  Esc")
    out += [blank, ((fit(" ALERTS: severity by marks and a word, state by a word", width), "label"),)]
    out += _wrapped("critical: takes over the screen and rings the bell until acknowledged", width, 11,
                    "critical", "  ▲▲▲ CRIT")
    out += _wrapped("warning", width, 11, "warning", "  ▲▲  WARN")
    out += _wrapped("advisory", width, 11, "advisory", "  ▲   ADV")
    for short, long in STATE_WORDS.values():
        out += _wrapped(long, width, 11, "", f"  {short}")
    out += _wrapped("the selected alert: a, s and u act on it", width, 11, "", "  >")
    out += [blank, ((fit(" NUMBERS", width), "label"),)]
    out += _wrapped("± is two standard uncertainties (2σ, coverage factor k = 2, about 95 %); -- means not known "
                    "yet. Channels are shown in the units the rig file chose: 'bar g' is gauge, 'bar a' absolute.",
                    width, 2, "", "")
    out += [blank, ((fit(" CAUTION", width), "label"),)]
    for caution in cautions:
        out += _wrapped(caution, width, 4, "caution", "  ")
    return out


def header_line_block(view: MonitorView, width: int, height: int) -> list[Line]:
    return [header_line(view, width)][:height]


def caution_line_block(view: MonitorView, width: int, height: int) -> list[Line]:
    return [caution_line(view, width)][:height]
