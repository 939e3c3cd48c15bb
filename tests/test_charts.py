"""Charts as SVG: geometry checked against the numbers, computed here independently.

Sources: bar length proportional to the value with the scale starting at 0 is common practice for
bar charts (a truncated axis exaggerates differences; from memory, Cleveland 1985 and the
Government Analysis Function's chart guidance). SVG namespace and ``<title>``/``<desc>``: W3C
SVG 1.1 §5.4; ``role="img"`` with ``aria-labelledby``: WAI-ARIA 1.2 and WCAG technique ARIA16.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from datetime import date

import pytest

from service.present.charts import PATTERNS, bar_chart, line_chart, nice_scale

SVG = "{http://www.w3.org/2000/svg}"


def parse(markup):
    """The figure as an element tree (the markup must be well-formed XML) and its svg element."""
    figure = ET.fromstring(str(markup))
    svg = figure.find(f".//{SVG}svg")
    assert svg is not None, "no SVG element in the SVG namespace"
    return figure, svg


def bars(svg):
    """(x, width) of every drawn bar (rects filled with a pattern, legend swatches left out)."""
    out = []
    for rect in svg.iter(f"{SVG}rect"):
        if rect.get("fill", "").startswith("url(") and rect.get("width") != "16":
            out.append((float(rect.get("x")), float(rect.get("width"))))
    return out


def baseline_x(svg):
    line = next(el for el in svg.iter(f"{SVG}line") if el.get("class") == "baseline")
    return float(line.get("x1"))


def table_rows(figure):
    table = figure.find(".//table")
    head = [th.text or "" for th in table.find("thead").iter("th")]
    body = [[c.text for c in tr] for tr in table.find("tbody").iter("tr")]
    return head, body


@pytest.mark.parametrize("values", [[1000, 250, 500], [7, 3, 1], [0.004, 0.001, 0.002], [96_000_000, 12, 40_000]])
def test_bar_lengths_are_proportional_to_the_values(values):
    _, svg = parse(bar_chart("Cd", ["a", "b", "c"], {"Cd": values}, "µg"))
    widths = [w for _, w in bars(svg)]
    for value, width in zip(values, widths):
        assert width / widths[0] == pytest.approx(value / values[0], abs=0.002)  # widths are rounded to 0.1


def test_the_scale_starts_at_zero_even_when_values_are_close():
    # 950 and 960 on an axis from 940 would look like 1 : 2; from 0 they read 0.99 : 1.
    _, svg = parse(bar_chart("Se", ["in", "out"], {"Se": [960, 950]}, "mg"))
    (x1, w1), (x2, w2) = bars(svg)
    assert x1 == x2 == baseline_x(svg)
    assert w2 / w1 == pytest.approx(950 / 960, abs=0.001)
    ticks = [t.text for t in svg.iter(f"{SVG}text") if t.get("font-size") == "11"]
    assert ticks[0] == "0"


def test_each_chart_has_its_own_scale():
    # 100 g of sulfur and 50 mg of cadmium: in separate charts each bar fills most of its plot
    # (50 mg on a scale to 60 mg: 5/6; on the sulfur's scale it would be 0.05 %).
    plot = bars(parse(bar_chart("full", ["in"], {"x": [100]}, "mg"))[1])[0][1]  # 100 on a scale to 100
    _, sulfur = parse(bar_chart("S", ["in"], {"S": [100_000]}, "mg"))
    _, cadmium = parse(bar_chart("Cd", ["in"], {"Cd": [50]}, "mg"))
    assert bars(sulfur)[0][1] == pytest.approx(plot)
    assert bars(cadmium)[0][1] / plot == pytest.approx(50 / 60, abs=0.002)


def test_a_negative_value_extends_left_of_the_zero_line():
    # unaccounted = input − outputs can be negative (more recorded out than went in)
    _, svg = parse(bar_chart("Pb", ["input", "unaccounted"], {"Pb": [800, -120]}, "µg"))
    zero = baseline_x(svg)
    (x_in, w_in), (x_neg, w_neg) = bars(svg)
    assert x_in == pytest.approx(zero)
    assert x_neg + w_neg == pytest.approx(zero, abs=0.1)  # ends at the zero line
    assert x_neg < zero
    assert w_neg / w_in == pytest.approx(120 / 800, abs=0.002)


def test_negative_beside_zero_and_all_zero():
    _, svg = parse(bar_chart("Cd", ["a", "b"], {"Cd": [0, 0]}, "mg"))
    assert [w for _, w in bars(svg)] == [0.0, 0.0]
    _, svg = parse(bar_chart("Cd", ["a"], {"Cd": [-1]}, "mg"))
    (x, w), = bars(svg)
    assert x + w == pytest.approx(baseline_x(svg), abs=0.1) and w > 0


def test_stacked_segments_follow_each_other_and_the_table_has_the_total():
    series = {"product": [600, None], "waste": [300, None], "losses": [50, None]}
    figure, svg = parse(bar_chart("Cd out", ["recorded", "other"], series, "mg", stacked=True))
    (x1, w1), (x2, w2), (x3, w3) = bars(svg)
    assert x2 == pytest.approx(x1 + w1, abs=0.1) and x3 == pytest.approx(x2 + w2, abs=0.1)
    assert (w1, w2) and w2 / w1 == pytest.approx(300 / 600, abs=0.002)
    head, body = table_rows(figure)
    assert head == ["", "product (mg)", "waste (mg)", "losses (mg)", "total (mg)"]
    assert body[0] == ["recorded", "600", "300", "50.0", "950"]  # 3 significant figures
    assert body[1] == ["other", "—", "—", "—", "0"]


def test_stacked_negative_part_lies_left_of_zero():
    _, svg = parse(bar_chart("Cd", ["x"], {"a": [100], "b": [-40]}, "mg", stacked=True))
    zero = baseline_x(svg)
    (xa, wa), (xb, wb) = bars(svg)
    assert xa == pytest.approx(zero) and xb + wb == pytest.approx(zero, abs=0.1)


def test_the_numbers_are_in_a_table_with_the_unit_in_the_header():
    figure, _ = parse(bar_chart("Cd in run 7", ["input", "product"], {"Cd": [1234.5, 1000]}, "ug"))
    head, body = table_rows(figure)
    assert head == ["", "Cd (µg)"]  # one spelling of the unit (SI micro sign)
    assert body == [["input", "1,230"], ["product", "1,000"]]
    table = figure.find(".//table")
    assert table.find("caption").text == "Cd in run 7: the numbers"
    assert all(th.get("scope") in ("col", "row") for th in table.iter("th"))


def test_missing_value_draws_no_bar_and_reads_as_a_dash():
    figure, svg = parse(bar_chart("Te", ["a", "b"], {"Te": [5, None]}, "mg"))
    assert len(bars(svg)) == 1
    assert table_rows(figure)[1][1] == ["b", "—"]


def test_accessible_names_point_at_existing_elements():
    figure, svg = parse(bar_chart("Cd & Se <run 2>", ["a"], {"Cd": [1]}, "mg"))
    assert svg.get("role") == "img"
    ids = {el.get("id") for el in figure.iter() if el.get("id")}
    assert set(svg.get("aria-labelledby").split()) <= ids
    assert set(figure.get("aria-labelledby").split()) <= ids
    assert svg.find(f"{SVG}title").text == "Cd & Se <run 2>"  # escaped in the markup, read back whole
    assert "<run 2>" not in str(bar_chart("Cd & Se <run 2>", ["a"], {"Cd": [1]}, "mg"))


def test_series_are_told_apart_without_colour():
    _, svg = parse(bar_chart("Cd", ["a"], {"product": [3], "waste": [2], "losses": [1]}, "mg"))
    fills = [r.get("fill") for r in svg.iter(f"{SVG}rect") if r.get("fill", "").startswith("url(") and r.get("width") != "16"]
    assert len(set(fills)) == 3
    assert len(set(PATTERNS)) == len(PATTERNS)  # every pattern drawn differently
    legend = [t.text for t in svg.iter(f"{SVG}text")]
    assert {"product", "waste", "losses"} <= set(legend)


def test_two_charts_on_one_page_have_distinct_ids():
    a = parse(bar_chart("Cd", ["a"], {"Cd": [1]}, "mg"))[0]
    b = parse(bar_chart("Se", ["a"], {"Se": [1]}, "mg"))[0]
    ids_a = {el.get("id") for el in a.iter() if el.get("id")}
    ids_b = {el.get("id") for el in b.iter() if el.get("id")}
    assert ids_a and not ids_a & ids_b


def test_marks_are_drawn_at_their_values():
    _, svg = parse(bar_chart("Cd", ["unaccounted"], {"Cd": [30]}, "mg", marks=[("−5 %", -50), ("+5 %", 50)]))
    zero = baseline_x(svg)
    marks = [float(el.get("x1")) for el in svg.iter(f"{SVG}line") if el.get("class") == "mark"]
    assert len(marks) == 2
    assert zero - marks[0] == pytest.approx(marks[1] - zero, abs=0.1)  # symmetric about 0
    (_, w), = bars(svg)
    assert w / (marks[1] - zero) == pytest.approx(30 / 50, abs=0.002)


def test_a_series_of_the_wrong_length_is_refused():
    with pytest.raises(ValueError, match="2 values for 3 categories"):
        bar_chart("Cd", ["a", "b", "c"], {"Cd": [1, 2]}, "mg")


@pytest.mark.parametrize("low, high, expected", [
    (0, 930, (0, 1000, 250)),   # 930/4 = 232.5 → step 250
    (0, 1, (0, 1, 0.25)),
    (0, 7, (0, 8, 2)),          # 7/4 = 1.75 → step 2
    (-120, 800, (-250, 1000, 250)),
    (5, 9, (0, 10, 2.5)),       # the scale always holds 0
    (-9, -5, (-10, 0, 2.5)),
])
def test_nice_scale(low, high, expected):
    assert nice_scale(low, high) == pytest.approx(expected)


def step_xs(svg):
    return [float(c.get("cx")) for c in svg.iter(f"{SVG}circle") if c.get("r") == "3.2"]


def test_line_chart_places_points_by_time_and_holds_each_value():
    points = [(date(2024, 3, 1), 0), (date(2024, 3, 2), 40), (date(2024, 3, 5), 25)]
    figure, svg = parse(line_chart("Cd in W-3", points, "mg"))
    xs = step_xs(svg)
    # 1 day of 4 days → a quarter of the way along
    assert (xs[1] - xs[0]) / (xs[2] - xs[0]) == pytest.approx(1 / 4, abs=0.002)
    path = next(svg.iter(f"{SVG}path"), None)
    d = [p for p in svg.iter(f"{SVG}path") if p.get("stroke-width") == "2.2"][0].get("d")
    assert re.fullmatch(r"M[\d.]+,[\d.]+( H[\d.]+ V[\d.]+)+ H[\d.]+", d), d  # horizontal then vertical: steps
    assert path is not None
    head, body = table_rows(figure)
    assert head == ["when", "value (mg)"]
    assert body == [["2024-03-01", "0"], ["2024-03-02", "40.0"], ["2024-03-05", "25.0"]]


def test_line_chart_scale_starts_at_zero_and_heights_are_proportional():
    _, svg = parse(line_chart("Pb", [("Jan", 100), ("Feb", 50)], "mg"))
    ys = [float(c.get("cy")) for c in svg.iter(f"{SVG}circle") if c.get("r") == "3.2"]
    zero = float(next(el for el in svg.iter(f"{SVG}line") if el.get("class") == "baseline").get("y1"))
    assert (zero - ys[1]) / (zero - ys[0]) == pytest.approx(50 / 100, abs=0.002)


def test_line_chart_with_a_negative_value_and_a_limit():
    _, svg = parse(line_chart("Cd", [("a", 10), ("b", -5)], "mg", marks=[("limit", 20)]))
    zero = float(next(el for el in svg.iter(f"{SVG}line") if el.get("class") == "baseline").get("y1"))
    ys = [float(c.get("cy")) for c in svg.iter(f"{SVG}circle") if c.get("r") == "3.2"]
    assert ys[0] < zero < ys[1]  # SVG y grows downwards
    limit = float(next(el for el in svg.iter(f"{SVG}line") if el.get("class") == "mark").get("y1"))
    assert (zero - limit) / (zero - ys[0]) == pytest.approx(2, abs=0.01)


def test_line_chart_without_points():
    figure, svg = parse(line_chart("Cd in W-9", [], "mg"))
    assert not step_xs(svg)
    assert table_rows(figure)[1] == [["Nothing recorded."]]
