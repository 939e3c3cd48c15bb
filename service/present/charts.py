"""Charts drawn on the server as SVG, each with its numbers as a table.

Two shapes, both returned as one ``<figure>`` (markup safe to embed in a page or a document):

- :func:`bar_chart` — horizontal bars, one row per category, series side by side or stacked;
- :func:`line_chart` — one value over time as a step line (the value holds until the next record).

Every chart reads in grey scale (each series has its own fill pattern and an outline, values
are written at the bar ends), starts its scale at 0 (negative values extend to the left of, or
below, a drawn zero line), is scaled on its own numbers only (one chart per element, so 100 g
of sulfur never dwarfs the cadmium), carries ``<title>`` and ``<desc>`` for assistive
technology and is followed by a table of the same numbers with the unit in the column header.
The markup is well-formed XML, so the SVG also embeds in PDF documents.

Pure: no Flask, no database.
"""

from __future__ import annotations

import hashlib
import math
from datetime import date, datetime
from decimal import Decimal
from typing import Callable, Mapping, Optional, Sequence, Union

from markupsafe import Markup, escape

from service.chem.figures import NONE_SHOWN, significant, unit_text

__all__ = ["bar_chart", "line_chart", "nice_scale", "PATTERNS"]

Number = Union[int, float, Decimal]
Values = Sequence[Optional[Number]]

WIDTH = 560          # viewBox width; the SVG scales to its box
LABEL_W = 118        # room for category labels on the left
RIGHT_W = 64         # room for the value written after the longest bar
BAR_H, GAP = 16, 10  # one bar, and the space between categories
CHAR_W = 6.6         # rough width of one character at font-size 12, for layout only
INK, MUTED, GRID = "#1d2430", "#5b6675", "#d5dbe3"

# Fill patterns told apart without colour: dark, hatched, light, dotted, cross-hatched, open.
PATTERNS = (
    '<rect width="6" height="6" fill="#2d5d8a"/>',
    '<rect width="6" height="6" fill="#fff"/><path d="M-1,1 l2,-2 M0,6 l6,-6 M5,7 l2,-2" stroke="#1d2430" stroke-width="1.3"/>',
    '<rect width="6" height="6" fill="#b9c7d6"/>',
    '<rect width="6" height="6" fill="#fff"/><circle cx="3" cy="3" r="1.3" fill="#1d2430"/>',
    '<rect width="6" height="6" fill="#e9edf1"/><path d="M0,3 h6 M3,0 v6" stroke="#1d2430" stroke-width="1"/>',
    '<rect width="6" height="6" fill="#fff"/>',
)


def nice_scale(low: float, high: float, ticks: int = 4) -> tuple[float, float, float]:
    """A scale that holds ``low``..``high`` and 0, with round steps of 1, 2 or 5 × 10ⁿ.

    :returns: (start, end, step) with start ≤ min(0, low) and end ≥ max(0, high)

    >>> nice_scale(0, 930)
    (0.0, 1000.0, 250.0)
    >>> nice_scale(-120, 800)
    (-250.0, 1000.0, 250.0)
    >>> nice_scale(0, 0)
    (0.0, 1.0, 0.25)
    """
    low, high = min(0.0, float(low)), max(0.0, float(high))
    if high == low:
        high = 1.0
    raw = (high - low) / ticks
    power = 10 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1, 2, 2.5, 5, 10) if m * power >= raw)
    return math.floor(low / step) * step + 0.0, math.ceil(high / step) * step + 0.0, step


def bar_chart(title: str, categories: Sequence[str], series: Union[Mapping[str, Values], Sequence[tuple[str, Values]]],
              unit: str, *, stacked: bool = False, marks: Sequence[tuple[str, Number]] = (),
              chart_id: Optional[str] = None, number: Callable[[Number], str] = significant) -> Markup:
    """Horizontal bars: one row per category, one bar per series (side by side, or ``stacked``).

    :param categories: the row labels, e.g. ("input", "product", "waste")
    :param series: name → one value per category (None: not there), in drawing order
    :param unit: the unit of every value, e.g. "mg"; shown on the axis and in the table header
    :param stacked: series add up along one bar per category (negative parts to the left of 0)
    :param marks: reference lines across the plot, (label, value), e.g. a tolerance
    :param chart_id: prefix of the ids in the markup (default: derived from the title and numbers)
    :param number: how a value is written (default 3 significant figures)
    :raises ValueError: a series without one value per category

    >>> import re
    >>> svg = bar_chart("Cd in run 3", ["input", "waste"], {"Cd": [1000, 250]}, "mg")
    >>> [float(w) for w in re.findall(r'<rect x="[^"]+" y="[^"]+" width="([^"]+)"', svg)]  # 250 mg: a quarter
    [378.0, 94.5]
    >>> "<th scope=\\"col\\" class=\\"num\\">Cd (mg)</th>" in svg
    True
    """
    named = list(series.items()) if isinstance(series, Mapping) else [(n, v) for n, v in series]
    for name, values in named:
        if len(values) != len(categories):
            raise ValueError(f"series {name!r} has {len(values)} values for {len(categories)} categories")
    cid = chart_id or _chart_id("bar", title, categories, named)
    spans = [_spans(named, i, stacked) for i in range(len(categories))]
    extremes = [x for row in spans for _, lo, hi, _ in row for x in (lo, hi)] + [float(v) for _, v in marks]
    start, end, step = nice_scale(min(extremes, default=0), max(extremes, default=0))
    plot_w = WIDTH - LABEL_W - RIGHT_W

    def x(value: float) -> float:
        return round(LABEL_W + (value - start) / (end - start) * plot_w, 1)

    legend, top = _legend(cid, [n for n, _ in named]) if len(named) > 1 else ("", 8)
    top += 14 if marks else 0
    rows_h = BAR_H if stacked else BAR_H * len(named)
    parts, y = [], top
    for label, row in zip(categories, spans):
        parts.append(_text(LABEL_W - 8, y + rows_h / 2 + 4, label, anchor="end"))
        for k, (s, lo, hi, value) in enumerate(row):
            bar_y = y if stacked else y + k * BAR_H
            if value is None:
                parts.append(_text(x(0) + 4, bar_y + BAR_H / 2 + 4, NONE_SHOWN, fill=MUTED))
                continue
            parts.append(f'<rect x="{x(lo)}" y="{bar_y + 1}" width="{round(x(hi) - x(lo), 1)}" height="{BAR_H - 2}" '
                         f'fill="url(#{cid}-p{s % len(PATTERNS)})" stroke="{INK}" stroke-width="0.8"/>')
            if not stacked:
                parts.append(_text(max(x(hi), x(0)) + 4, bar_y + BAR_H / 2 + 4, number(value)))
        if stacked and row:
            total = sum(v for *_, v in row if v is not None)
            parts.append(_text(max(x(hi) for _, _, hi, _ in row) + 4, y + BAR_H / 2 + 4, number(total)))
        y += rows_h + GAP
    bottom = y - GAP + 4
    axis = _x_axis(start, end, step, x, top - 4, bottom, unit)
    axis.append(f'<line class="baseline" x1="{x(0)}" y1="{top - 4}" x2="{x(0)}" y2="{bottom}" stroke="{INK}" stroke-width="1.5"/>')
    for label, value in marks:
        axis.append(f'<line class="mark" x1="{x(float(value))}" y1="{top - 14}" x2="{x(float(value))}" y2="{bottom}" '
                    f'stroke="{INK}" stroke-dasharray="4 3"/>')
        if label:
            axis.append(_text(x(float(value)), top - 16, label, anchor="middle", size=10))
    desc = (f"Horizontal {'stacked ' if stacked else ''}bars in {unit_text(unit)} from {number(start)} to {number(end)}, "
            f"zero line drawn; the numbers are in the table below.")
    svg = _svg(cid, title, desc, bottom + 30, legend + "".join(axis) + "".join(parts))
    table = _bar_table(cid, title, categories, named, unit, stacked, number)
    return _figure(cid, title, svg, table)


def _spans(named, i: int, stacked: bool) -> list:
    """For category ``i``: (series index, left end, right end, value) per series."""
    row, pos, neg = [], 0.0, 0.0
    for s, (_, values) in enumerate(named):
        value = values[i]
        v = 0.0 if value is None else float(value)
        if not stacked:
            row.append((s, min(0.0, v), max(0.0, v), value))
        elif v >= 0:
            row.append((s, pos, pos + v, value))
            pos += v
        else:
            row.append((s, neg + v, neg, value))
            neg += v
    return row


def line_chart(title: str, points: Sequence[tuple[Union[date, datetime, str], Optional[Number]]], unit: str, *,
               marks: Sequence[tuple[str, Number]] = (), chart_id: Optional[str] = None,
               when_label: str = "when", number: Callable[[Number], str] = significant) -> Markup:
    """One value over time as a step line: each value holds until the next point.

    :param points: (when, value) in time order; dates and datetimes are placed by time, text evenly
    :param unit: the unit of the values, shown on the axis and in the table header
    :param marks: horizontal reference lines, (label, value), e.g. a limit
    :param when_label: the header of the time column in the table

    >>> svg = line_chart("Cd in W-3", [(date(2024, 1, 1), 0), (date(2024, 1, 3), 40)], "mg")
    >>> svg.count('r="3.2"'), "<td class=\\"num\\">40.0</td>" in svg
    (2, True)
    """
    cid = chart_id or _chart_id("line", title, [str(w) for w, _ in points], [("", [v for _, v in points])])
    known = [float(v) for _, v in points if v is not None]
    start, end, step = nice_scale(min(known + [float(v) for _, v in marks], default=0),
                                  max(known + [float(v) for _, v in marks], default=0))
    left, right, top, height = 64, WIDTH - 56, 18, 180
    times = _positions([w for w, _ in points])

    def x(t: float) -> float:
        return round(left + t * (right - left), 1)

    def y(value: float) -> float:
        return round(top + (end - value) / (end - start) * height, 1)

    parts = []
    for tick in _ticks(start, end, step):
        parts.append(f'<line x1="{left}" y1="{y(tick)}" x2="{right}" y2="{y(tick)}" stroke="{GRID}"/>')
        parts.append(_text(left - 6, y(tick) + 4, _tick(tick), anchor="end", fill=MUTED, size=11))
    parts.append(_text(left - 6, top - 6, unit_text(unit), anchor="end", fill=MUTED, size=11))
    parts.append(f'<line class="baseline" x1="{left}" y1="{y(0)}" x2="{right}" y2="{y(0)}" stroke="{INK}" stroke-width="1.5"/>')
    for label, value in marks:
        parts.append(f'<line class="mark" x1="{left}" y1="{y(float(value))}" x2="{right}" y2="{y(float(value))}" '
                     f'stroke="{INK}" stroke-dasharray="4 3"/>')
        parts.append(_text(right, y(float(value)) - 4, label, anchor="end", size=10))
    path, last = [], None
    for t, (_, value) in zip(times, points):
        if value is None:
            continue
        if last is not None:
            path.append(f"H{x(t)} V{y(float(value))}")
        else:
            path.append(f"M{x(t)},{y(float(value))}")
        last = (t, value)
    if last is not None:
        path.append(f"H{x(1.0)}")
        parts.append(f'<path d="{" ".join(path)}" fill="none" stroke="{INK}" stroke-width="2.2"/>')
        parts.append(_text(x(1.0) + 4, y(float(last[1])) + 4, number(last[1])))
    for t, (_, value) in zip(times, points):
        if value is not None:
            parts.append(f'<circle cx="{x(t)}" cy="{y(float(value))}" r="3.2" fill="#fff" stroke="{INK}" stroke-width="1.5"/>')
    for i in sorted({0, len(points) - 1} | set(range(0, len(points), max(1, len(points) // 4)))) if points else ():
        parts.append(_text(x(times[i]), top + height + 16, _when(points[i][0]), anchor="middle", fill=MUTED, size=10))
    desc = (f"Step line in {unit_text(unit)} from {number(start)} to {number(end)}, {len(points)} points; "
            f"the numbers are in the table below.")
    svg = _svg(cid, title, desc, top + height + 28, "".join(parts))
    head = f'<th scope="col">{escape(when_label)}</th><th scope="col" class="num">{escape(_header("value", unit))}</th>'
    body = "".join(f'<tr><th scope="row">{escape(_when(w))}</th><td class="num">{escape(_shown(v, number))}</td></tr>'
                   for w, v in points) or '<tr><td colspan="2" class="empty">Nothing recorded.</td></tr>'
    return _figure(cid, title, svg, _table(cid, title, head, body))


def _positions(whens: list) -> list[float]:
    """Each point's place along the time axis, 0..1: by time for dates, evenly for text."""
    if len(whens) < 2:
        return [0.0] * len(whens)
    if all(isinstance(w, (date, datetime)) for w in whens):
        stamps = [_stamp(w) for w in whens]
        span = (stamps[-1] - stamps[0]) or 1.0
        return [(s - stamps[0]) / span for s in stamps]
    return [i / (len(whens) - 1) for i in range(len(whens))]


def _stamp(when: Union[date, datetime]) -> float:
    moment = when if isinstance(when, datetime) else datetime(when.year, when.month, when.day)
    return moment.replace(tzinfo=None).timestamp()


def _when(when) -> str:
    if isinstance(when, datetime):
        return when.strftime("%Y-%m-%d %H:%M")
    if isinstance(when, date):
        return when.isoformat()
    return str(when)


def _chart_id(kind: str, title: str, labels, named) -> str:
    digest = hashlib.sha1(repr((kind, title, list(labels), [(n, list(map(str, v))) for n, v in named])).encode())
    return f"chart-{digest.hexdigest()[:10]}"


def _text(x: float, y: float, text: str, *, anchor: str = "start", fill: str = INK, size: int = 12) -> str:
    return (f'<text x="{round(x, 1)}" y="{round(y, 1)}" text-anchor="{anchor}" fill="{fill}" '
            f'font-size="{size}">{escape(text)}</text>')


def _tick(value: float) -> str:
    """A tick value without trailing zeros: 250.0 -> "250", 0.5 -> "0.5"."""
    text = significant(Decimal(repr(round(value, 9))), 6)
    return text.rstrip("0").rstrip(".") if "." in text else text


def _ticks(start: float, end: float, step: float) -> list[float]:
    return [round(start + i * step, 9) for i in range(int(round((end - start) / step)) + 1)]


def _x_axis(start, end, step, x, top, bottom, unit) -> list[str]:
    parts = []
    for tick in _ticks(start, end, step):
        parts.append(f'<line x1="{x(tick)}" y1="{top}" x2="{x(tick)}" y2="{bottom}" stroke="{GRID}"/>')
        parts.append(_text(x(tick), bottom + 14, _tick(tick), anchor="middle", fill=MUTED, size=11))
    parts.append(_text(WIDTH - RIGHT_W + 22, bottom + 14, unit_text(unit), fill=MUTED, size=11))
    return parts


def _legend(cid: str, names: list[str]) -> tuple[str, int]:
    """Swatches with the series names, wrapped to the width; returns the markup and the height used."""
    parts, x, y = [], float(LABEL_W), 6
    for s, name in enumerate(names):
        need = 22 + len(name) * CHAR_W + 14
        if x + need > WIDTH and x > LABEL_W:
            x, y = float(LABEL_W), y + 18
        parts.append(f'<rect x="{x}" y="{y}" width="16" height="11" fill="url(#{cid}-p{s % len(PATTERNS)})" '
                     f'stroke="{INK}" stroke-width="0.8"/>')
        parts.append(_text(x + 22, y + 10, name))
        x += need
    return "".join(parts), y + 24


def _svg(cid: str, title: str, desc: str, height: float, body: str) -> str:
    defs = "".join(f'<pattern id="{cid}-p{i}" patternUnits="userSpaceOnUse" width="6" height="6">{p}</pattern>'
                   for i, p in enumerate(PATTERNS))
    return (f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {WIDTH} {round(height)}" role="img" '
            f'aria-labelledby="{cid}-t {cid}-d" font-family="system-ui, DejaVu Sans, sans-serif">'
            f'<title id="{cid}-t">{escape(title)}</title><desc id="{cid}-d">{escape(desc)}</desc>'
            f"<defs>{defs}</defs>{body}</svg>")


def _header(name: str, unit: str) -> str:
    return f"{name} ({unit_text(unit)})"


def _shown(value: Optional[Number], number: Callable[[Number], str]) -> str:
    return NONE_SHOWN if value is None else number(value)


def _bar_table(cid, title, categories, named, unit, stacked, number) -> str:
    head = '<th scope="col"></th>' + "".join(f'<th scope="col" class="num">{escape(_header(n, unit))}</th>' for n, _ in named)
    if stacked:
        head += f'<th scope="col" class="num">{escape(_header("total", unit))}</th>'
    rows = []
    for i, label in enumerate(categories):
        cells = "".join(f'<td class="num">{escape(_shown(v[i], number))}</td>' for _, v in named)
        if stacked:
            cells += f'<td class="num">{escape(number(sum(v[i] for _, v in named if v[i] is not None)))}</td>'
        rows.append(f'<tr><th scope="row">{escape(label)}</th>{cells}</tr>')
    return _table(cid, title, head, "".join(rows))


def _table(cid: str, title: str, head: str, body: str) -> str:
    return (f'<div class="table-wrap" tabindex="0" role="region" aria-label="{escape(title)}: the numbers">'
            f'<table class="chart-numbers" id="{cid}-numbers"><caption>{escape(title)}: the numbers</caption>'
            f"<thead><tr>{head}</tr></thead><tbody>{body}</tbody></table></div>")


def _figure(cid: str, title: str, svg: str, table: str) -> Markup:
    return Markup(f'<figure class="chart" id="{cid}" aria-labelledby="{cid}-c">'
                  f'<figcaption id="{cid}-c">{escape(title)}</figcaption>'
                  f'<div class="chart-box">{svg}</div>{table}</figure>')
